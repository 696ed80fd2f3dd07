"""A line's cross-section, in SI: what every solver takes."""

from __future__ import annotations

from dataclasses import dataclass, replace


@dataclass(frozen=True)
class Stratum:
    """A dielectric layer: thickness (m), relative permittivity, loss tangent."""

    thickness: float
    er: float
    loss_tangent: float = 0.0
    conformal: bool = False   # a solder mask follows the copper; a prepreg fills flat


@dataclass(frozen=True)
class CrossSection:
    """One trace (or an edge-coupled pair) over one plane or between two.

    ``below``: strata from the trace's bottom face down to the plane beneath.
    ``above``: strata from the trace's top face upwards; for a stripline they end at
    the plane above, for a microstrip they are the covers (mask, or the dielectric of
    an embedded line) and then air. The first stratum above a planar cover fills the
    space beside the trace too. ``top_width`` < ``width`` describes a trapezoidal etch.
    """

    kind: str                      # "microstrip" | "stripline"
    width: float
    thickness: float
    below: tuple[Stratum, ...]
    above: tuple[Stratum, ...] = ()
    gap: float | None = None       # edge-to-edge spacing of a pair; None for one trace
    top_width: float | None = None

    def __post_init__(self):
        if self.kind not in ("microstrip", "stripline"):
            raise ValueError(f"unknown line kind {self.kind!r}")

    @property
    def coupled(self) -> bool:
        return self.gap is not None

    @property
    def h_below(self) -> float:
        return sum(s.thickness for s in self.below)

    @property
    def h_above(self) -> float:
        return sum(s.thickness for s in self.above)

    @property
    def stratified(self) -> bool:
        """More than one permittivity around the trace (besides air over a microstrip)."""
        ers = {s.er for s in self.below} | {s.er for s in self.above}
        return len(ers) > 1

    def single(self) -> "CrossSection":
        return replace(self, gap=None)


def series_er(strata: tuple[Stratum, ...]) -> float:
    """Permittivity of one layer equivalent to stacked strata between parallel plates."""
    h = sum(s.thickness for s in strata)
    return h / sum(s.thickness / s.er for s in strata)


