"""Closed-form edge-coupled microstrip: Kirschning & Jansen (1984), static part.

Source: M. Kirschning, R. H. Jansen, "Accurate wide-range design equations for the
frequency-dependent characteristic of parallel coupled microstrip lines", IEEE Trans.
MTT 32(1), 1984, pp. 83-90 (coefficients as recalled from the paper; tests check the
model's limits and compare it with the field solver). Stated range: 0.1 <= w/h <= 10,
0.1 <= s/h <= 10, 1 <= er <= 18, accuracy about 1 %.
Strip thickness: the model is for t = 0; we scale each mode by the single line's
Hammerstad-Jensen thickness ratio (Z(t)/Z(0), eps_eff(t)/eps_eff(0)). That scaling is
our own first-order correction, not part of the paper.
"""

from __future__ import annotations

import numpy as np

from sicheck.physics.constants import ETA0
from sicheck.physics.microstrip import hammerstad_jensen

VALID_U = (0.1, 10.0)
VALID_G = (0.1, 10.0)
VALID_ER = (1.0, 18.0)


def kirschning_jansen_static(w, h, s, er):
    """Zero-thickness coupled microstrip. Returns (z_even, z_odd, eps_even, eps_odd)."""
    w, h, s, er = (np.asarray(x, dtype=float) for x in (w, h, s, er))
    u = w / h
    g = s / h
    z0, e0 = hammerstad_jensen(w, h, 0.0 * w, er)

    # Even mode effective permittivity.
    v = u * (20.0 + g * g) / (10.0 + g * g) + g * np.exp(-g)
    ae = (1.0 + np.log((v**4 + (v / 52.0) ** 2) / (v**4 + 0.432)) / 49.0
          + np.log(1.0 + (v / 18.1) ** 3) / 18.7)
    be = 0.564 * ((er - 0.9) / (er + 3.0)) ** 0.053
    ee = (er + 1.0) / 2.0 + (er - 1.0) / 2.0 * (1.0 + 10.0 / v) ** (-ae * be)

    # Odd mode effective permittivity.
    ao = 0.7287 * (e0 - (er + 1.0) / 2.0) * (1.0 - np.exp(-0.179 * u))
    bo = 0.747 * er / (0.15 + er)
    co = bo - (bo - 0.207) * np.exp(-0.414 * u)
    do = 0.593 + 0.694 * np.exp(-0.562 * u)
    eo = ((er + 1.0) / 2.0 + ao - e0) * np.exp(-co * g**do) + e0

    # Impedances.
    q1 = 0.8695 * u**0.194
    q2 = 1.0 + 0.7519 * g + 0.189 * g**2.31
    q3 = 0.1975 + (16.6 + (8.4 / g) ** 6) ** -0.387 + np.log(g**10 / (1.0 + (g / 3.4) ** 10)) / 241.0
    q4 = 2.0 * q1 / q2 / (np.exp(-g) * u**q3 + (2.0 - np.exp(-g)) * u**-q3)
    q5 = 1.794 + 1.14 * np.log(1.0 + 0.638 / (g + 0.517 * g**2.43))
    q6 = 0.2305 + np.log(g**10 / (1.0 + (g / 5.8) ** 10)) / 281.3 + np.log(1.0 + 0.598 * g**1.154) / 5.1
    q7 = (10.0 + 190.0 * g * g) / (1.0 + 82.3 * g**3)
    q8 = np.exp(-6.5 - 0.95 * np.log(g) - (g / 0.15) ** 5)
    q9 = np.log(q7) * (q8 + 1.0 / 16.5)
    q10 = q4 - q5 / q2 * np.exp(q6 * np.log(u) * u**-q9)

    ze = z0 * np.sqrt(e0 / ee) / (1.0 - z0 / ETA0 * np.sqrt(e0) * q4)
    zo = z0 * np.sqrt(e0 / eo) / (1.0 - z0 / ETA0 * np.sqrt(e0) * q10)
    return ze, zo, ee, eo


def kirschning_jansen(w, h, t, s, er):
    """Coupled microstrip with our single-line thickness scaling (see module doc)."""
    ze, zo, ee, eo = kirschning_jansen_static(w, h, s, er)
    z_t, e_t = hammerstad_jensen(w, h, t, er)
    z_0, e_0 = hammerstad_jensen(w, h, 0.0 * np.asarray(t, dtype=float), er)
    kz = z_t / z_0
    ke = e_t / e_0
    return ze * kz, zo * kz, ee * ke, eo * ke


def validity_warnings(w, h, s, er) -> list[str]:
    out = []
    u, g = float(w) / float(h), float(s) / float(h)
    if not VALID_U[0] <= u <= VALID_U[1]:
        out.append(f"w/h = {u:.3g} is outside Kirschning-Jansen's 0.1..10")
    if not VALID_G[0] <= g <= VALID_G[1]:
        out.append(f"s/h = {g:.3g} is outside Kirschning-Jansen's 0.1..10")
    if not VALID_ER[0] <= float(er) <= VALID_ER[1]:
        out.append(f"er = {float(er):.3g} is outside Kirschning-Jansen's 1..18")
    return out
