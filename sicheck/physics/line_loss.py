"""Loss per length of solved cross-sections, at any frequency.

Wheeler's dZ0_air/dn depends only on geometry, so it is computed once per cross-section and
the frequency enters through Rs(f), the roughness factor and the dielectric term. The field
solver returns it with its solution (the air solve differentiated on its own grid, with its own
uncertainty); for the closed forms it is a central difference of two receded geometries.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from sicheck.physics import loss
from sicheck.physics.cross_section import CrossSection
from sicheck.physics.line_result import LineResult


@dataclass(frozen=True)
class Roughness:
    """Copper surface: RMS roughness (Hammerstad-Jensen) or Huray's snowballs; none = smooth."""

    rms: float | None = None
    huray_radius: float | None = None
    huray_ratio: float | None = None
    rho: float = loss.RHO_COPPER

    def factor(self, f):
        f = np.asarray(f, dtype=float)
        if self.huray_radius is not None and self.huray_ratio is not None:
            return loss.huray_roughness(f, self.huray_radius, self.huray_ratio, self.rho)
        if self.rms is not None:
            return loss.hammerstad_roughness(f, self.rms, self.rho)
        return np.ones_like(f)


def in_air(xs: CrossSection) -> CrossSection:
    return replace(xs, below=tuple(replace(s, er=1.0) for s in xs.below),
                   above=tuple(replace(s, er=1.0) for s in xs.above))


def wheeler_derivative(xs_list: list[CrossSection], solve: Callable[[list[CrossSection]], list[LineResult]],
                       results: list[LineResult] | None = None):
    """dZ_air/dn [ohm/m] of the signal mode (Zodd for pairs) for each cross-section.

    Taken from the solver's results (``results``, else ``solve(xs_list)``) where it gave it (field
    solver); the others by solving the air-filled geometry with the walls receded by +/- n.
    """
    if results is None:
        results = solve(xs_list)
    known = [r.dz_air_dn for r in results]
    todo = [i for i, d in enumerate(known) if d is None]
    plus, minus, steps = [], [], []
    for i in todo:
        xs = xs_list[i]
        n = loss.recession_step(xs)
        a = in_air(xs)
        plus.append(loss.receded(a, n))
        minus.append(loss.receded(a, -n))
        steps.append(n)
    res = solve(plus + minus) if todo else []
    k = len(todo)
    for j, (i, n) in enumerate(zip(todo, steps)):
        zp = res[j].signal_z * np.sqrt(res[j].signal_eps)
        zm = res[k + j].signal_z * np.sqrt(res[k + j].signal_eps)
        known[i] = (zp - zm) / (2.0 * n)
    return np.asarray(known, dtype=float)


def loss_uncertainty_pct(a_c, a_d, conductor_pct, z_pct):
    """Relative uncertainty (%) of the total loss per length of a field solution, NaN without one.

    The conductor part carries the solver's own estimate for Wheeler's dZ_air/dn and Z0; the
    dielectric part (sqrt(eps_eff) times the energy-weighted loss tangent, from the same solves)
    is given twice Z0's uncertainty.
    """
    a_c, a_d = np.asarray(a_c, dtype=float), np.asarray(a_d, dtype=float)
    total = a_c + a_d
    with np.errstate(invalid="ignore", divide="ignore"):
        u = (a_c * np.asarray(conductor_pct, dtype=float) + a_d * 2.0 * np.asarray(z_pct, dtype=float)) / total
    return np.where(total > 0, u, np.asarray(conductor_pct, dtype=float))


def alphas(f, z, eps, tand, dzdn, rough: Roughness | None = None):
    """(conductor, dielectric) attenuation in dB/m; arrays broadcast over segments."""
    rough = rough or Roughness()
    a_c = loss.conductor_alpha(f, z, dzdn, rough.factor(f), rough.rho) * loss.NP_TO_DB
    a_d = loss.dielectric_alpha(f, eps, tand) * loss.NP_TO_DB
    return a_c, a_d
