"""Fabrication band: the impedance a cross-section may come out at, given the fabricator's tolerances.

Method (worst-case tolerance stacking with solved sensitivities, common practice in tolerance analysis):
each toleranced quantity p is moved to its two limits p - dp and p + dp, one quantity at a time, and
every cross-section is solved again with the same solver as the nominal: one batched solve of at most
eight copies of the list (two limits of four quantities), never a loop over cross-sections. With
Z0 the nominal and r+ = Z(p + dp) / Z0, r- = Z(p - dp) / Z0:

    worst case:    Z_max = Z0 prod_p max(r+, r-, 1),  Z_min = Z0 prod_p min(r+, r-, 1)
    independent:   spread = sqrt(sum_p ((Z(p + dp) - Z(p - dp)) / 2)^2)   (root-sum-square, RSS)

Taking each limit's own change (not a derivative times dp) keeps the curvature of Z along each
quantity. The changes combine as ratios because Z depends on the quantities through products and
ratios (1/sqrt(eps_eff), ln of w/h and its kin): on microstrips, pairs and striplines that puts the
band within about 0.2 % of the extreme of direct solves at all sixteen corners (the tests check it),
where adding the changes in ohms is off by about 0.5 %. A field solver's accuracy carries over: the
perturbed cross-sections are field-solved too.

The toleranced quantities, and how each moves a cross-section:
  width        etched width +/- width_tol (an absolute length); a trapezoid's top width moves with it,
               and a pair's gap moves the other way (the pitch is fixed by the artwork);
  dielectric   every laminate stratum's thickness (not a conformal mask) scaled by 1 +/- pct/100, all
               together (one press cycle);
  er           every laminate stratum's permittivity scaled by 1 +/- pct/100 (not below 1);
  copper       the trace's copper thickness scaled by 1 +/- pct/100.
Tolerances of zero are skipped (no solve).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from sicheck.physics.cross_section import CrossSection, Stratum
from sicheck.physics.line_result import LineResult

QUANTITIES = ("width", "dielectric", "er", "copper")
MIN_FRACTION = 0.05      # a width or gap never goes below this fraction of its nominal (tolerance >= feature)


@dataclass(frozen=True)
class Tolerances:
    """Fabrication tolerances, +/-: width in metres, the others in percent of the nominal."""

    width: float = 0.0
    dielectric_pct: float = 0.0
    er_pct: float = 0.0
    copper_pct: float = 0.0

    def amount(self, quantity: str) -> float:
        return {"width": self.width, "dielectric": self.dielectric_pct, "er": self.er_pct,
                "copper": self.copper_pct}[quantity]


def _laminate(strata: tuple[Stratum, ...], thick: float, er: float) -> tuple[Stratum, ...]:
    return tuple(s if s.conformal else replace(s, thickness=s.thickness * thick, er=max(1.0, s.er * er))
                 for s in strata)


def perturbed(xs: CrossSection, quantity: str, sign: int, tol: Tolerances) -> CrossSection:
    """The cross-section with one toleranced quantity at its upper (sign +1) or lower (-1) limit."""
    a = tol.amount(quantity)
    if quantity == "width":
        d = sign * a
        w = max(xs.width + d, MIN_FRACTION * xs.width)
        top = None if xs.top_width is None else max(xs.top_width + d, MIN_FRACTION * xs.top_width)
        gap = None if xs.gap is None else max(xs.gap - d, MIN_FRACTION * xs.gap)
        return replace(xs, width=w, top_width=top, gap=gap)
    f = 1.0 + sign * a / 100.0
    if quantity == "copper":
        return replace(xs, thickness=xs.thickness * f)
    thick, er = (f, 1.0) if quantity == "dielectric" else (1.0, f)
    return replace(xs, below=_laminate(xs.below, thick, er), above=_laminate(xs.above, thick, er))


@dataclass
class Band:
    """Per cross-section (arrays in the order given): nominal, worst-case limits and RSS spread, in ohm.

    ``z``: the line's Z0 (a pair's isolated line); ``zdiff``: a pair's differential impedance (NaN for
    one trace). ``sens_*``: per quantity, the half-difference (Z(p+dp) - Z(p-dp))/2, ohm.
    """

    z: np.ndarray
    z_min: np.ndarray
    z_max: np.ndarray
    z_rss: np.ndarray
    zdiff: np.ndarray
    zdiff_min: np.ndarray
    zdiff_max: np.ndarray
    zdiff_rss: np.ndarray
    sens_z: dict[str, np.ndarray]
    sens_zdiff: dict[str, np.ndarray]


def _z(results: list[LineResult]) -> tuple[np.ndarray, np.ndarray]:
    z = np.array([r.z0 for r in results], dtype=float)
    zd = np.array([np.nan if r.zdiff is None else r.zdiff for r in results], dtype=float)
    return z, zd


def stack(nominal: np.ndarray, up: list[np.ndarray], down: list[np.ndarray]):
    """(min, max, rss, half-differences) from the nominal and each quantity's values at its two limits."""
    nominal = np.asarray(nominal, dtype=float)
    log_lo = np.zeros_like(nominal)
    log_hi = np.zeros_like(nominal)
    sq = np.zeros_like(nominal)
    halves = []
    with np.errstate(invalid="ignore", divide="ignore"):
        for zu, zl in zip(up, down):
            lu, ll = np.log(zu / nominal), np.log(zl / nominal)
            log_hi = log_hi + np.maximum(np.maximum(lu, ll), 0.0)
            log_lo = log_lo + np.minimum(np.minimum(lu, ll), 0.0)
            half = 0.5 * (zu - zl)
            sq = sq + half * half
            halves.append(half)
    return nominal * np.exp(log_lo), nominal * np.exp(log_hi), np.sqrt(sq), halves


def tolerance_band(xs_list: list[CrossSection], results: list[LineResult],
                   solve: Callable[[list[CrossSection]], list[LineResult]], tol: Tolerances,
                   ratio_solve: Callable[[list[CrossSection]], list[LineResult]] | None = None) -> Band:
    """The fabrication band of every cross-section: one batched ``solve`` of every limit of every quantity.

    ``ratio_solve``: a cheaper solve whose error is nearly the same for a cross-section and its limits (the
    field solver on one fixed grid, field2d.fixed_grid_impedance); the limits are then the nominal ``results``
    times its ratios Z(p +/- dp) / Z(p), and ``solve`` is not called.
    """
    z0, zd0 = _z(results)
    n = len(xs_list)
    used = [q for q in QUANTITIES if tol.amount(q) > 0] if n else []
    limits = [(q, sign) for q in used for sign in (1, -1)]
    moved = [perturbed(x, q, sign, tol) for q, sign in limits for x in xs_list]
    if not limits:
        z, zd = [], []
    elif ratio_solve is None:
        # one batched solve of every limit of every cross-section (a field solver spreads them over its workers)
        z, zd = _z(solve(moved))
    else:
        z_ref, zd_ref = _z(ratio_solve(list(xs_list)))
        z, zd = _z(ratio_solve(moved))
        z = z / np.tile(z_ref, len(limits)) * np.tile(z0, len(limits))
        zd = zd / np.tile(zd_ref, len(limits)) * np.tile(zd0, len(limits))
    zu = [z[2 * k * n:(2 * k + 1) * n] for k in range(len(used))]
    zl = [z[(2 * k + 1) * n:(2 * k + 2) * n] for k in range(len(used))]
    du = [zd[2 * k * n:(2 * k + 1) * n] for k in range(len(used))]
    dl = [zd[(2 * k + 1) * n:(2 * k + 2) * n] for k in range(len(used))]
    lo, hi, rss, halves = stack(z0, zu, zl)
    dlo, dhi, drss, dhalves = stack(zd0, du, dl)
    return Band(z=z0, z_min=lo, z_max=hi, z_rss=rss, zdiff=zd0, zdiff_min=dlo, zdiff_max=dhi, zdiff_rss=drss,
                sens_z=dict(zip(used, halves)), sens_zdiff=dict(zip(used, dhalves)))


def band_columns(b: Band) -> dict[str, np.ndarray]:
    """The band as named columns (ohm), one value per cross-section: what segments and reports carry."""
    return {"z_min_ohm": b.z_min, "z_max_ohm": b.z_max, "z_rss_ohm": b.z_rss,
            "zdiff_min_ohm": b.zdiff_min, "zdiff_max_ohm": b.zdiff_max, "zdiff_rss_ohm": b.zdiff_rss}
