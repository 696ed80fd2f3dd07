"""Loss per length: conductor (skin effect, roughness) and dielectric.

Skin depth delta = sqrt(rho / (pi f mu0)); surface resistance Rs = rho / delta.
Roughness:
  Hammerstad & Jensen (E. O. Hammerstad, F. Bekkadal, "Microstrip Handbook", ELAB
  report, Univ. of Trondheim, 1975): K = 1 + (2/pi) atan(1.4 (Delta/delta)^2), Delta the
  RMS roughness; tends to 2 for Delta >> delta.
  Huray's snowball model (P. G. Huray et al., DesignCon 2010), one ball size:
  K = 1 + ratio / (1 + delta/a + delta^2/(2 a^2)), ratio = N 4 pi a^2 / A_flat (the
  balls' surface per flat area), a the ball radius.
Conductor loss: Wheeler's incremental-inductance rule (H. A. Wheeler, "Formulas for the
skin effect", Proc. IRE 30, 1942): R = (Rs / mu0) dL/dn, with dL/dn the change of the
line's inductance when every conductor wall recedes by n. With L = Z0_air / c,
alpha_c = Rs / (2 Z0 eta0) * dZ0_air/dn [Np/m], evaluated by a central difference.
Dielectric loss: G = omega sum_i tan(d_i) C_i with C_i the part of the capacitance in
dielectric i (field solver) or the quasi-TEM filling factors of the substrate and of a cover
(closed forms, covered_microstrip_tand_eff):
alpha_d = G Z0 / 2 = pi f sqrt(eps_eff) tan(d_eff) / c [Np/m].
Both are low-loss (first-order) results. 1 Np = 20/ln(10) dB = 8.686 dB.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from sicheck.physics.constants import C0, ETA0, MU0, PI

RHO_COPPER = 1.68e-8          # ohm m, annealed copper at 20 C (handbook value)
NP_TO_DB = 20.0 / math.log(10.0)


def skin_depth(f, rho=RHO_COPPER, mu_r=1.0):
    return np.sqrt(np.asarray(rho, dtype=float) / (PI * np.asarray(f, dtype=float) * MU0 * mu_r))


def surface_resistance(f, rho=RHO_COPPER):
    return np.asarray(rho, dtype=float) / skin_depth(f, rho)


def hammerstad_roughness(f, rms, rho=RHO_COPPER):
    """Hammerstad-Jensen roughness factor for RMS roughness ``rms`` (m)."""
    d = skin_depth(f, rho)
    return 1.0 + 2.0 / PI * np.arctan(1.4 * (np.asarray(rms, dtype=float) / d) ** 2)


def huray_roughness(f, radius, area_ratio, rho=RHO_COPPER):
    """Huray snowball roughness factor, one ball size (see module doc)."""
    d = skin_depth(f, rho)
    a = np.asarray(radius, dtype=float)
    return 1.0 + np.asarray(area_ratio, dtype=float) / (1.0 + d / a + d * d / (2.0 * a * a))


def dielectric_alpha(f, eps_eff, tand_eff):
    """alpha_d [Np/m] = pi f sqrt(eps_eff) tand_eff / c."""
    return PI * np.asarray(f, dtype=float) * np.sqrt(eps_eff) * np.asarray(tand_eff, dtype=float) / C0


def microstrip_filling(eps_eff, er):
    """Substrate filling factor of a bare microstrip (quasi-TEM): q = (eps_eff - 1)/(er - 1)."""
    eps_eff, er = np.asarray(eps_eff, dtype=float), np.asarray(er, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(er > 1.0, (eps_eff - 1.0) / (er - 1.0), 0.0)


def covered_microstrip_tand_eff(eps_bare, eps_covered, er, tand, er_cover, tand_cover):
    """Effective loss tangent of a microstrip (or one mode of a pair) under a cover.

    Partial filling: eps_eff = 1 + q_s (er - 1) + q_c (er_c - 1), q_s the bare line's
    substrate filling factor and q_c the cover's, taken from the covered eps_eff; then
    tand_eff = (q_s er tand + q_c er_c tand_c) / eps_eff (the low-loss perturbation result,
    e.g. Pozar ch. 3 for one dielectric). With no cover (eps_covered = eps_bare) this is
    microstrip_tand_eff.
    """
    eps_bare, eps_covered, er, tand, er_cover, tand_cover = (
        np.asarray(x, dtype=float) for x in (eps_bare, eps_covered, er, tand, er_cover, tand_cover))
    q_s = microstrip_filling(eps_bare, er)
    with np.errstate(invalid="ignore", divide="ignore"):
        q_c = np.where(er_cover > 1.0, (eps_covered - 1.0 - q_s * (er - 1.0)) / (er_cover - 1.0), 0.0)
    q_c = np.clip(q_c, 0.0, 1.0)
    return (q_s * er * tand + q_c * er_cover * tand_cover) / eps_covered


def microstrip_tand_eff(er, eps_eff, tand):
    """Effective loss tangent of a microstrip (quasi-TEM filling factor; e.g. Pozar, ch. 3):
    tand_eff = er (eps_eff - 1) tand / (eps_eff (er - 1))."""
    er, eps_eff, tand = (np.asarray(x, dtype=float) for x in (er, eps_eff, tand))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(er > 1.0, er * (eps_eff - 1.0) * tand / (eps_eff * (er - 1.0)), 0.0)


def conductor_alpha(f, z0, dz_air_dn, roughness=1.0, rho=RHO_COPPER):
    """alpha_c [Np/m] from Wheeler's rule: Rs K / (2 Z0 eta0) * dZ0_air/dn."""
    return surface_resistance(f, rho) * roughness / (2.0 * np.asarray(z0) * ETA0) * np.asarray(dz_air_dn)


def receded(xs, n: float):
    """The cross-section with every conductor wall moved n into the metal (Wheeler's recession).

    The trace shrinks by n on each face and the planes' surfaces move away by n, so the
    distance from a trace face to its plane grows by 2n; a pair's gap grows by 2n.
    """
    def grow(strata, by):
        if not strata:
            return strata
        first = strata[0]
        return (replace(first, thickness=first.thickness + by),) + tuple(strata[1:])

    below = grow(xs.below, 2.0 * n)
    # a stripline's upper plane recedes too; a microstrip's cover just follows the trace top (n)
    above = grow(xs.above, 2.0 * n if xs.kind == "stripline" else n) if xs.above else xs.above
    top = None if xs.top_width is None else max(xs.top_width - 2.0 * n, 1e-9)
    return replace(xs, width=max(xs.width - 2.0 * n, 1e-9), thickness=max(xs.thickness - 2.0 * n, 0.0),
                   below=below, above=above, gap=None if xs.gap is None else xs.gap + 2.0 * n, top_width=top)


def recession_step(xs) -> float:
    """A recession for the central difference: large enough to rise above grid noise."""
    feats = [xs.width / 2.0, xs.h_below]
    if xs.thickness > 0:
        feats.append(xs.thickness / 2.0)
    if xs.gap is not None:
        feats.append(xs.gap / 2.0)
    return 0.03 * min(feats)


def djordjevic_sarkar(f, er_ref, tand_ref, f_ref, f_low=1e3, f_high=1e12):
    """Causal wideband permittivity (Djordjevic, Biljic, Likar-Smiljanic, Sarkar, IEEE Trans. EMC
    43(4), 2001): eps(w) = eps_inf + d_eps / ln(w2/w1) * ln((w2 + j w)/(w1 + j w)), fitted so that
    it returns er_ref and tand_ref at f_ref. Returns (er(f), tand(f))."""
    w = 2.0 * PI * np.asarray(f, dtype=float)
    w1, w2, wr = 2.0 * PI * f_low, 2.0 * PI * f_high, 2.0 * PI * f_ref
    span = math.log(w2 / w1)
    d_eps = er_ref * tand_ref * span / (math.atan(wr / w1) - math.atan(wr / w2))
    eps_inf = er_ref - d_eps / span * 0.5 * math.log((w2 * w2 + wr * wr) / (w1 * w1 + wr * wr))
    eps = eps_inf + d_eps / span * np.log((w2 + 1j * w) / (w1 + 1j * w))
    return np.real(eps), -np.imag(eps) / np.real(eps)


def kirschning_jansen_dispersion(f, w, h, er, eps0):
    """Microstrip eps_eff(f) (M. Kirschning, R. H. Jansen, Electronics Letters 18(6), 1982),
    valid 0.1 <= w/h <= 100, 1 <= er <= 20, f h <= 25 GHz mm; coefficients as recalled from
    the paper and checked against scikit-rf's implementation in the tests."""
    u = np.asarray(w, dtype=float) / np.asarray(h, dtype=float)
    fn = np.asarray(f, dtype=float) * 1e-9 * np.asarray(h, dtype=float) * 1e3     # GHz * mm
    p1 = 0.27488 + (0.6315 + 0.525 / (1.0 + 0.0157 * fn) ** 20) * u - 0.065683 * np.exp(-8.7513 * u)
    p2 = 0.33622 * (1.0 - np.exp(-0.03442 * er))
    p3 = 0.0363 * np.exp(-4.6 * u) * (1.0 - np.exp(-((fn / 38.7) ** 4.97)))
    p4 = 1.0 + 2.751 * (1.0 - np.exp(-((er / 15.916) ** 8)))
    p = p1 * p2 * ((0.1844 + p3 * p4) * fn) ** 1.5763
    return er - (er - eps0) / (1.0 + p)
