"""Closed-form microstrip: Hammerstad & Jensen (1980), quasi-static.

Source: E. Hammerstad, Ø. Jensen, "Accurate models for microstrip computer-aided
design", IEEE MTT-S Int. Microwave Symp. Digest, 1980, pp. 407-409.
Stated accuracy: Z0 (air) better than 0.03 % for w/h <= 1000, eps_eff better than
0.2 % for eps_r <= 128 and 0.01 <= w/h <= 100 (zero thickness).
All functions take numpy arrays (or scalars) and broadcast.
"""

from __future__ import annotations

import numpy as np

from sicheck.physics.constants import ETA0, PI

VALID_U = (0.01, 100.0)       # w/h
VALID_ER = (1.0, 128.0)
VALID_T_OVER_H = (0.0, 0.2)   # thickness correction is a small-t correction
THIN = 1e-9                   # t/h below this is zero thickness (avoids overflow in the correction)


def hammerstad_jensen_z0_air(u):
    """Z0 of a zero-thickness strip over a plane in air, for u = w/h (H&J eq. 1)."""
    u = np.asarray(u, dtype=float)
    f = 6.0 + (2.0 * PI - 6.0) * np.exp(-((30.666 / u) ** 0.7528))
    return ETA0 / (2.0 * PI) * np.log(f / u + np.sqrt(1.0 + (2.0 / u) ** 2))


def hammerstad_jensen_eps_eff(u, er):
    """Static effective permittivity of a zero-thickness microstrip (H&J eq. 2-4)."""
    u = np.asarray(u, dtype=float)
    er = np.asarray(er, dtype=float)
    a = (1.0 + np.log((u**4 + (u / 52.0) ** 2) / (u**4 + 0.432)) / 49.0
         + np.log(1.0 + (u / 18.1) ** 3) / 18.7)
    b = 0.564 * ((er - 0.9) / (er + 3.0)) ** 0.053
    return (er + 1.0) / 2.0 + (er - 1.0) / 2.0 * (1.0 + 10.0 / u) ** (-a * b)


def hammerstad_jensen(w, h, t, er):
    """Microstrip Z0 and eps_eff with H&J's strip-thickness correction.

    The thickness widens the strip: u1 = u + du1 in air and ur = u + dur with the
    dielectric, du1 = (t/h)/pi * ln(1 + 4e / ((t/h) coth^2 sqrt(6.517 u))),
    dur = du1 (1 + sech sqrt(er - 1)) / 2. Returns (z0, eps_eff).
    """
    w, h, t, er = (np.asarray(x, dtype=float) for x in (w, h, t, er))
    u = w / h
    th = t / h
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        du1 = np.where(th > THIN, th / PI * np.log1p(4.0 * np.e / (th / np.tanh(np.sqrt(6.517 * u)) ** 2)), 0.0)
    dur = 0.5 * (1.0 + 1.0 / np.cosh(np.sqrt(np.maximum(er - 1.0, 0.0)))) * du1
    u1 = u + du1
    ur = u + dur
    z_air_1 = hammerstad_jensen_z0_air(u1)
    z_air_r = hammerstad_jensen_z0_air(ur)
    eps_r_u = hammerstad_jensen_eps_eff(ur, er)
    z0 = z_air_r / np.sqrt(eps_r_u)
    eps_eff = eps_r_u * (z_air_1 / z_air_r) ** 2
    return z0, eps_eff


def validity_warnings(w, h, t, er) -> list[str]:
    """Messages for inputs outside the published accuracy range (scalar inputs)."""
    out = []
    u = float(w) / float(h)
    if not VALID_U[0] <= u <= VALID_U[1]:
        out.append(f"w/h = {u:.3g} is outside Hammerstad-Jensen's 0.01..100")
    if not VALID_ER[0] <= float(er) <= VALID_ER[1]:
        out.append(f"er = {float(er):.3g} is outside Hammerstad-Jensen's 1..128")
    if float(t) / float(h) > VALID_T_OVER_H[1]:
        out.append(f"t/h = {float(t) / float(h):.3g} is beyond the thin-strip correction (<= 0.2)")
    return out
