"""Closed-form edge-coupled microstrip: Kirschning & Jansen (1984) with a thickness correction.

Zero thickness: M. Kirschning, R. H. Jansen, "Accurate wide-range design equations for the
frequency-dependent characteristic of parallel coupled microstrip lines", IEEE Trans.
MTT 32(1), 1984, pp. 83-90 (static part; coefficients as recalled from the paper, from
memory; tests compare it with the field solver). Stated range: 0.1 <= w/h <= 10,
0.1 <= s/h <= 10, 1 <= er <= 18, accuracy about 1 %.

Strip thickness (``kirschning_jansen``): a capacitance form of Jansen's coupled-line
thickness correction (R. H. Jansen, "High-speed computation of single and coupled
microstrip parameters including dispersion, high-order modes, loss and finite strip
thickness", IEEE Trans. MTT 26(2), 1978, pp. 75-82; as reproduced in Gupta, Garg, Bahl,
Bhartia, "Microstrip Lines and Slotlines", 2nd ed., 1996, ch. 8; from memory). Jansen's
two ideas are kept:
  * even mode: the single line's thickness increment (Hammerstad-Jensen) is shared by
    the two edges, and the inner edge's share fades as the gap closes,
        dC_even = dC_single (1 - exp(-a g) / 2);
  * odd mode: the facing side walls form a parallel-plate capacitor across the gap,
    to the virtual ground in the middle, P = 2 eps0 t / s; it takes over from the
    inner edge's share of the single line's increment as the gap closes,
        dC_odd = (1 - q) dC_single + sqrt((q dC_single)^2 + P^2),
    which tends to dC_single for a wide gap and to P for a narrow one,
applied separately to the line in air and with its dielectric (as Hammerstad-Jensen
do for the single line), which gives each mode's Z and eps_eff. The side-wall field lies
in the air above the substrate, so the plate term is eps0, not er eps0.
Jansen's own widths (u_e = u + du (1 - 0.5 exp(-0.69 du/dt)), u_o = u_e + dt,
dt = t/(er s)), as we recall them, were 23 % high in Zodd at s/h = 0.2, t/h = 0.3 against
sicheck's field solver; hence the capacitance form. Its two coefficients (a = 0.30,
q = 0.2) were fitted by us to the field solver over w/h 0.3-2.5, s/h 0.2-3,
t/h 0.05-0.3, er 2.5-10 (44 cross-sections): there Zodd is within 1.0 %, Zeven within
2.3 %, eps_eff within 1.8 %; on 24 other cross-sections (w/h 0.5, 1.8; s/h 0.3-2.2;
er 3.3, 6) within 0.8 %, 1.4 % and 1.5 %. Stated accuracy, for THICK_RANGE below:
Zodd and Zdiff within 1.5 %, Zeven within 2.5 %, eps_eff of either mode within 2 %
(t = 0: Kirschning-Jansen's 1 %). tests/test_coupled_thickness.py checks this on a
sweep not used for the fit. ``validity_warnings`` flags a pair outside that range.
``validity_warnings`` flags a pair outside that range.
"""

from __future__ import annotations

import numpy as np

from sicheck.physics.constants import C0, EPS0, ETA0
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


EVEN_DECAY = 0.30         # a: how fast the even mode's inner edge regains its share with the gap
ODD_SIDE_SHARE = 0.2      # q: the inner side wall's share that the gap's plate capacitance replaces
# where the thickness correction was checked against the field solver
THICK_RANGE = {"t/h": (0.0, 0.3), "s/h": (0.2, 3.0), "w/h": (0.3, 3.0), "er": (2.0, 10.0)}


def _caps(z, eps):
    """(C, C in air) per length of a quasi-TEM mode from its Z and eps_eff."""
    root = np.sqrt(eps)
    return root / (C0 * z), 1.0 / (C0 * z * root)


def jansen_thickness_increments(w, h, t, s, er):
    """Thickness increments (dC_even, dC_even_air, dC_odd, dC_odd_air), F/m (see module doc)."""
    w, h, t, s, er = (np.asarray(x, dtype=float) for x in (w, h, t, s, er))
    z_t, e_t = hammerstad_jensen(w, h, t, er)
    z_0, e_0 = hammerstad_jensen(w, h, 0.0 * t, er)
    c_t, ca_t = _caps(z_t, e_t)
    c_0, ca_0 = _caps(z_0, e_0)
    dc, dca = c_t - c_0, ca_t - ca_0
    g = s / h
    plate = 2.0 * EPS0 * t / s
    even = 1.0 - 0.5 * np.exp(-EVEN_DECAY * g)
    q = ODD_SIDE_SHARE

    def odd(d):
        return (1.0 - q) * d + np.sqrt((q * d) ** 2 + plate**2)
    return dc * even, dca * even, odd(dc), odd(dca)


def kirschning_jansen(w, h, t, s, er):
    """Coupled microstrip with strip thickness t. Returns (z_even, z_odd, eps_even, eps_odd)."""
    ze, zo, ee, eo = kirschning_jansen_static(w, h, s, er)
    ce, cea = _caps(ze, ee)
    co, coa = _caps(zo, eo)
    de, dea, do, doa = jansen_thickness_increments(w, h, t, s, er)
    ce, cea, co, coa = ce + de, cea + dea, co + do, coa + doa
    return 1.0 / (C0 * np.sqrt(ce * cea)), 1.0 / (C0 * np.sqrt(co * coa)), ce / cea, co / coa


def lined_gap(z_odd, eps_odd, t, s, c, er_c):
    """Odd mode of a pair whose gap side walls carry a conformal mask of thickness c (er_c).

    The side-wall plate 2 eps0 t / s of ``jansen_thickness_increments`` becomes mask, air and
    mask in series, 2 eps0 t / (s - 2c + 2c / er_c) (the gap is full of mask when 2c >= s);
    the difference is added to the mode's capacitance, not to its capacitance in air.
    Returns (z_odd, eps_odd).
    """
    z_odd, eps_odd, t, s, c, er_c = (np.asarray(x, dtype=float) for x in (z_odd, eps_odd, t, s, c, er_c))
    lining = np.minimum(2.0 * c, s)
    extra = 2.0 * EPS0 * t * (1.0 / (s - lining + lining / er_c) - 1.0 / s)
    cap, cap_air = _caps(z_odd, eps_odd)
    cap = cap + extra
    return 1.0 / (C0 * np.sqrt(cap * cap_air)), cap / cap_air


def validity_warnings(w, h, s, er, t=0.0) -> list[str]:
    out = []
    u, g, th = float(w) / float(h), float(s) / float(h), float(t) / float(h)
    if not VALID_U[0] <= u <= VALID_U[1]:
        out.append(f"w/h = {u:.3g} is outside Kirschning-Jansen's 0.1..10")
    if not VALID_G[0] <= g <= VALID_G[1]:
        out.append(f"s/h = {g:.3g} is outside Kirschning-Jansen's 0.1..10")
    if not VALID_ER[0] <= float(er) <= VALID_ER[1]:
        out.append(f"er = {float(er):.3g} is outside Kirschning-Jansen's 1..18")
    if th > 0:
        checked = {"t/h": th, "w/h": u, "er": float(er), "s/h": g}
        outside = [f"{k} = {v:.3g}" for k, v in checked.items()
                   if not THICK_RANGE[k][0] <= v <= THICK_RANGE[k][1]
                   # beyond s/h = 3 the pair tends to two single lines: no warning for a wide gap alone
                   and not (k == "s/h" and v > THICK_RANGE[k][1])]
        if outside:
            rng = ", ".join(f"{k} {a:g}..{b:g}" for k, (a, b) in THICK_RANGE.items())
            out.append(f"strip-thickness correction for the pair used outside the range where it was checked "
                       f"against the field solver ({', '.join(outside)}; checked: {rng}; Zdiff within 1.5 % "
                       "there; use the field solver)")
    return out
