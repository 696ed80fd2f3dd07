"""Per-length line quantities shared by every solver."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from sicheck.physics.constants import C0


def per_length(z0, eps_eff):
    """(L per m, C per m, delay per m) of a TEM/quasi-TEM line from Z0 and eps_eff.

    C = sqrt(eps_eff)/(c Z0), L = Z0 sqrt(eps_eff)/c, so Z0 = sqrt(L/C), v = 1/sqrt(LC).
    """
    z0 = np.asarray(z0, dtype=float)
    root = np.sqrt(np.asarray(eps_eff, dtype=float))
    return z0 * root / C0, root / (C0 * z0), root / C0


@dataclass
class LineResult:
    """What a solver says about one cross-section (SI units)."""

    z0: float                      # single-ended Z0 (for a pair: the isolated line's)
    eps_eff: float
    model: str
    z_even: float | None = None
    z_odd: float | None = None
    eps_even: float | None = None
    eps_odd: float | None = None
    uncertainty_pct: float | None = None
    solve_s: float | None = None
    warnings: list[str] = field(default_factory=list)
    formula_z0: float | None = None     # closed-form value beside a field value
    formula_zdiff: float | None = None
    c_matrix: list | None = None        # pairs, field solver: 2x2 Maxwell capacitance matrix, F/m
    l_matrix: list | None = None        # pairs, field solver: 2x2 inductance matrix, H/m
    levels: int | None = None           # field solver: grid levels used
    formula_warnings: list[str] = field(default_factory=list)   # the closed form's range warnings
    tand_eff: float | None = None       # capacitance-weighted loss tangent (single line)
    tand_even: float | None = None
    tand_odd: float | None = None
    dz_air_dn: float | None = None      # field solver: Wheeler's dZ_air/dn of the signal mode, ohm/m
    loss_uncertainty_pct: float | None = None   # field solver: relative uncertainty of the conductor loss

    @property
    def signal_tand(self) -> float:
        v = self.tand_odd if self.z_odd is not None else self.tand_eff
        return 0.0 if v is None else v

    @property
    def coupled(self) -> bool:
        return self.z_odd is not None

    @property
    def zdiff(self) -> float | None:
        return None if self.z_odd is None else 2.0 * self.z_odd

    @property
    def zcommon(self) -> float | None:
        return None if self.z_even is None else self.z_even / 2.0

    @property
    def signal_eps(self) -> float:
        """Permittivity the signal travels in: odd mode for a pair, else the line's."""
        return self.eps_odd if self.eps_odd is not None else self.eps_eff

    @property
    def signal_z(self) -> float:
        """Impedance one conductor presents to its signal: Zodd for a pair."""
        return self.z_odd if self.z_odd is not None else self.z0
