"""Closed-form stripline between two planes, single and edge-coupled.

Single strip, zero thickness, centred: exact conformal mapping,
    S. B. Cohn, "Characteristic impedance of the shielded-strip transmission line",
    IRE Trans. MTT 2, 1954, pp. 52-57:  Z0 = (eta0 / (4 sqrt(er))) K(k)/K(k'),
    k = sech(pi w / 2b), k' = tanh(pi w / 2b).
Finite thickness: Wheeler's formula,
    H. A. Wheeler, "Transmission-line properties of a strip line between parallel
    planes", IEEE Trans. MTT 26(11), 1978, pp. 866-876 (stated 0.5 % for w/(b-t) < 10),
    applied as the ratio Z_wheeler(t)/Z_wheeler(0) to Cohn's exact t = 0 value, so the
    result is exact at t = 0 and follows Wheeler's thickness dependence.
Edge-coupled, zero thickness, centred: exact even/odd modes,
    S. B. Cohn, "Shielded coupled-strip transmission line", IRE Trans. MTT 3(5), 1955,
    k_e = tanh(pi w/2b) tanh(pi (w+s)/2b), k_o = tanh(pi w/2b) coth(pi (w+s)/2b),
    Z_mode = (30 pi / sqrt(er)) K(k_mode')/K(k_mode);
    thickness by the ratio of Cohn's thick-strip formulas (same paper, valid
    w/(b-t) >= 0.35): Z_mode = 30 pi (b-t) / (sqrt(er) (w + b C_f A_mode / (2 pi))).
Offset strip (planes at unequal distances) and a different dielectric on each side:
capacitance averaging of two centred striplines of spacing 2 h_i + t, each taking the
capacitance of its own half (the approximation given in Wadell's handbook for offset
stripline, from memory). It is good for moderate offsets only; `offset_ratio` is
reported so that callers can flag strong offsets.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ellipkm1

from sicheck.physics.constants import C0, ETA0, PI

# Cohn writes 30 pi for eta0/4 (eta0 ~ 120 pi); the exact factor is eta0/4, 0.07 % smaller.
ETA_30PI = ETA0 / 4.0
COHN_THICK_MIN_W_OVER_B = 0.35
WHEELER_MAX_W_OVER_B = 10.0
THIN = 1e-9                # t/b below this is zero thickness (avoids overflow)
OFFSET_RATIO_LIMIT = 2.0   # beyond this the averaging approximation loses accuracy (see tests)


def _k_ratio(m, m1):
    """K(k)/K(k') from m = k^2 and m1 = k'^2 = 1 - m, both given accurately.

    scipy's ellipkm1(p) = K(1 - p), so K(m) = ellipkm1(m1) keeps full precision when
    m is within rounding of 1 (very wide or very narrow strips).
    """
    return ellipkm1(np.asarray(m1, dtype=float)) / ellipkm1(np.asarray(m, dtype=float))


def cohn_stripline_z0_air(w, b):
    """Exact zero-thickness centred stripline in air (Cohn 1954)."""
    x = PI * np.asarray(w, dtype=float) / (2.0 * np.asarray(b, dtype=float))
    sech2 = 1.0 / np.cosh(x) ** 2
    return ETA_30PI * _k_ratio(sech2, np.tanh(x) ** 2)


def wheeler_stripline_z0_air(w, b, t):
    """Wheeler's (1978) finite-thickness centred stripline in air."""
    w, b, t = (np.asarray(v, dtype=float) for v in (w, b, t))
    x = t / b
    m = 2.0 / (1.0 + 2.0 / 3.0 * x / (1.0 - x))
    with np.errstate(divide="ignore", invalid="ignore"):
        dw = np.where(
            x > THIN,
            x / (PI * (1.0 - x)) * (1.0 - 0.5 * np.log((x / (2.0 - x)) ** 2
                                                       + (0.0796 * x / (w / b + 1.1 * x)) ** m)),
            0.0,
        )
    w_eff = w / (b - t) + dw           # w'/(b - t)
    r = 1.0 / w_eff
    return 30.0 * np.log(1.0 + 4.0 / PI * r * (8.0 / PI * r + np.sqrt((8.0 / PI * r) ** 2 + 6.27)))


def cohn_wheeler_stripline_z0_air(w, b, t):
    """Centred stripline in air: Cohn exact at t = 0 times Wheeler's thickness ratio."""
    return cohn_stripline_z0_air(w, b) * wheeler_stripline_z0_air(w, b, t) / wheeler_stripline_z0_air(w, b, 0.0)


def _cohn_thick_cf(t_over_b):
    """Cohn's fringing term C_f(t/b) for thick strips (C_f(0) = 2 ln 2)."""
    x = np.asarray(t_over_b, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        tail = np.where(x > THIN, x * np.log(x * (2.0 - x) / (1.0 - x) ** 2), 0.0)
    return 2.0 * np.log((2.0 - x) / (1.0 - x)) - tail


def _cohn_thick_mode_air(w, b, t, s, odd: bool):
    cf = _cohn_thick_cf(t / b)
    theta = PI * s / (2.0 * b)
    hyp = 1.0 / np.tanh(theta) if odd else np.tanh(theta)
    a = 1.0 + np.log1p(hyp) / np.log(2.0)
    return ETA_30PI * (b - t) / (w + b * cf * a / (2.0 * PI))


def cohn_coupled_stripline_air(w, b, t, s):
    """Even and odd mode Z (air) of centred edge-coupled striplines (Cohn 1955).

    Returns (z_even_air, z_odd_air).
    """
    w, b, t, s = (np.asarray(v, dtype=float) for v in (w, b, t, s))
    x1 = PI * w / (2.0 * b)
    x2 = PI * (w + s) / (2.0 * b)
    t1, t2 = np.tanh(x1) ** 2, np.tanh(x2) ** 2
    s1, s2 = 1.0 / np.cosh(x1) ** 2, 1.0 / np.cosh(x2) ** 2
    ke2, ke2c = t1 * t2, s1 + t1 * s2                 # k_e^2 and 1 - k_e^2
    ko2, ko2c = t1 / t2, (s1 - s2) / t2               # k_o^2 and 1 - k_o^2
    ze0 = ETA_30PI / _k_ratio(ke2, ke2c)
    zo0 = ETA_30PI / _k_ratio(ko2, ko2c)
    ze = ze0 * _cohn_thick_mode_air(w, b, t, s, False) / _cohn_thick_mode_air(w, b, 0.0 * t, s, False)
    zo = zo0 * _cohn_thick_mode_air(w, b, t, s, True) / _cohn_thick_mode_air(w, b, 0.0 * t, s, True)
    return ze, zo


def _combine_halves(z_air_1, z_air_2, er1, er2):
    """Capacitance averaging of two half-structures. Returns (z0, eps_eff)."""
    c_air = 0.5 * (1.0 / (C0 * z_air_1) + 1.0 / (C0 * z_air_2))
    c_diel = 0.5 * (er1 / (C0 * z_air_1) + er2 / (C0 * z_air_2))
    z0 = 1.0 / (C0 * np.sqrt(c_air * c_diel))
    return z0, c_diel / c_air


def stripline(w, t, h_below, h_above, er_below, er_above):
    """Single stripline, possibly offset and with a dielectric of its own on each side.

    h_below: trace bottom face to the plane beneath; h_above: trace top face to the
    plane above. Centred and homogeneous, this is Cohn x Wheeler exactly.
    Returns (z0, eps_eff).
    """
    w, t, h1, h2, e1, e2 = (np.asarray(v, dtype=float) for v in (w, t, h_below, h_above, er_below, er_above))
    z1 = cohn_wheeler_stripline_z0_air(w, 2.0 * h1 + t, t)
    z2 = cohn_wheeler_stripline_z0_air(w, 2.0 * h2 + t, t)
    return _combine_halves(z1, z2, e1, e2)


def coupled_stripline(w, t, s, h_below, h_above, er_below, er_above):
    """Edge-coupled striplines; same averaging for offset/stratified cases.

    Returns (z_even, z_odd, eps_eff_even, eps_eff_odd).
    """
    w, t, s, h1, h2, e1, e2 = (np.asarray(v, dtype=float) for v in (w, t, s, h_below, h_above, er_below, er_above))
    ze1, zo1 = cohn_coupled_stripline_air(w, 2.0 * h1 + t, t, s)
    ze2, zo2 = cohn_coupled_stripline_air(w, 2.0 * h2 + t, t, s)
    ze, ee = _combine_halves(ze1, ze2, e1, e2)
    zo, eo = _combine_halves(zo1, zo2, e1, e2)
    return ze, zo, ee, eo


def offset_ratio(h_below, h_above):
    """max(h)/min(h): 1 for a centred strip."""
    h1 = np.asarray(h_below, dtype=float)
    h2 = np.asarray(h_above, dtype=float)
    return np.maximum(h1, h2) / np.minimum(h1, h2)


def validity_warnings(w, t, h_below, h_above, s=None) -> list[str]:
    """Messages for a scalar cross-section outside the models' stated ranges."""
    out = []
    b = float(h_below) + float(h_above) + float(t)
    r = float(offset_ratio(h_below, h_above))
    if r > OFFSET_RATIO_LIMIT:
        out.append(f"strip is offset (plane distances differ {r:.2g}x): the closed form's averaging "
                   "approximation is outside its accuracy; use the field solver")
    if float(w) / (b - float(t)) > WHEELER_MAX_W_OVER_B:
        out.append("w/(b-t) > 10 is beyond Wheeler's stated range")
    if s is not None and float(t) > 0 and float(w) / (b - float(t)) < COHN_THICK_MIN_W_OVER_B:
        out.append("w/(b-t) < 0.35: Cohn's thick-strip correction for coupled lines is outside its range")
    return out
