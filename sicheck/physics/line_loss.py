"""Loss per length of solved cross-sections, at any frequency.

Wheeler's dZ0_air/dn depends only on geometry, so it is computed once per cross-section
(two air-filled solves with the walls receded by +/- n) and the frequency enters through
Rs(f), the roughness factor and the dielectric term.
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


def wheeler_derivative(xs_list: list[CrossSection], solve: Callable[[list[CrossSection]], list[LineResult]]):
    """dZ_air/dn [ohm/m] of the signal mode (Zodd for pairs) for each cross-section."""
    plus, minus, steps = [], [], []
    for xs in xs_list:
        n = loss.recession_step(xs)
        a = in_air(xs)
        plus.append(loss.receded(a, n))
        minus.append(loss.receded(a, -n))
        steps.append(n)
    res = solve(plus + minus)
    k = len(xs_list)
    out = []
    for i, n in enumerate(steps):
        zp = res[i].signal_z * np.sqrt(res[i].signal_eps)
        zm = res[k + i].signal_z * np.sqrt(res[k + i].signal_eps)
        out.append((zp - zm) / (2.0 * n))
    return np.asarray(out)


def alphas(f, z, eps, tand, dzdn, rough: Roughness | None = None):
    """(conductor, dielectric) attenuation in dB/m; arrays broadcast over segments."""
    rough = rough or Roughness()
    a_c = loss.conductor_alpha(f, z, dzdn, rough.factor(f), rough.rho) * loss.NP_TO_DB
    a_d = loss.dielectric_alpha(f, eps, tand) * loss.NP_TO_DB
    return a_c, a_d
