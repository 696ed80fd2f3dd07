"""Crosstalk coefficients against exact results, ngspice and physical invariants."""


import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import ellipk

from ngspice_ref import needs_ngspice, transient
from sicheck.physics import crosstalk as xt
from sicheck.physics.cross_section import CrossSection, Stratum
from sicheck.physics.field2d import solve_field
from sicheck.physics.formula import solve_formula

ETA0 = 1.25663706212e-6 * 299792458.0   # mu0 c (CODATA 2018 mu0, exact c)
B = 1e-3


def coupling(r):
    return xt.coupling_from_modes(r.z_even, r.z_odd, r.eps_even, r.eps_odd)


def cohn_1955(w, s, b, er):
    # exact t = 0 edge-coupled stripline even/odd modes (Cohn 1955), evaluated here with scipy.special.ellipk
    a, c = np.tanh(np.pi * w / (2 * b)), np.tanh(np.pi * (w + s) / (2 * b))
    return tuple(ETA0 / 4 / np.sqrt(er) * ellipk(1 - k**2) / ellipk(k**2) for k in (a * c, a / c))


def stripline(w, s, er_above=4.0, t=0.0):
    return CrossSection("stripline", w, t, (Stratum(B / 2, 4.0),), (Stratum(B / 2, er_above),), gap=s)


def microstrip(w, s, h=0.2e-3, er=4.3, t=35e-6):
    return CrossSection("microstrip", w, t, (Stratum(h, er),), (), gap=s)


@pytest.mark.parametrize("w_over_b,s_over_b", [(0.3, 0.1), (0.5, 0.5), (0.3, 1.0)])
def test_backward_coefficient_of_zero_thickness_stripline_matches_cohn(w_over_b, s_over_b):
    # Reference: Cohn (1955) exact even/odd impedances. In one dielectric Lm/Ls = Cm/Cs = (Ze-Zo)/(Ze+Zo),
    # so Kb = (Lm/Ls + Cm/Cs)/4 = (Ze-Zo)/(2(Ze+Zo)) (Paul 2008, from memory).
    ze, zo = cohn_1955(w_over_b * B, s_over_b * B, B, 4.0)
    ref = (ze - zo) / (2 * (ze + zo))
    r = solve_field(stripline(w_over_b * B, s_over_b * B))
    c = coupling(r)
    assert float(c.kb) == pytest.approx(ref, rel=0.005)
    # the field solver's own 2x2 matrices give the same coefficient as its mode results
    C, L = np.array(r.c_matrix), np.array(r.l_matrix)
    assert 0.25 * (L[0, 1] / L[0, 0] - C[0, 1] / C[0, 0]) == pytest.approx(float(c.kb), rel=1e-9)
    # and so do the closed forms (Cohn 1955 in sicheck's formula path)
    f = solve_formula([stripline(w_over_b * B, s_over_b * B)])[0]
    assert float(coupling(f).kb) == pytest.approx(ref, rel=1e-6)


def test_homogeneous_stripline_has_no_far_end_coupling():
    # Physics (Johnson & Graham 1993; Paul 2008): in one dielectric L = inv(C)/v^2, so Lm/Ls = Cm/Cs.
    # The dielectric above differs by 1e-9 so that the solver takes its general path (air and dielectric
    # solved separately), not the one-dielectric shortcut; kf must vanish within its uncertainty.
    r = solve_field(stripline(0.3 * B, 0.2 * B, er_above=4.0 * (1 + 1e-9)))
    c = coupling(r)
    assert abs(float(c.kf)) <= float(c.kb) * r.uncertainty_pct / 100.0
    # ... whereas a microstrip of similar coupling has a far-end coefficient of the order of Kb
    m = coupling(solve_field(microstrip(0.2e-3, 0.2e-3)))
    assert float(m.kf) < -0.3 * float(m.kb)
    # the FEXT expression itself: any length and edge gives zero for the stripline
    assert abs(float(xt.fext_fraction(c.kf, 0.3, c.delay_per_m, 50e-12))) < 1e-6


def test_near_end_saturation_and_far_end_growth():
    c = xt.paul_weak_coupling(400e-9, 40e-9, 100e-12, 5e-12)
    assert float(c.kb) == pytest.approx((0.1 + 0.05) / 4)
    assert float(c.kf) == pytest.approx((0.05 - 0.1) / 2)
    rise = 200e-12
    lsat = float(xt.saturation_length(rise, c.delay_per_m))
    # at the saturation length the round trip equals the 0-100 % ramp (rise/0.8)
    assert 2 * lsat * float(c.delay_per_m) == pytest.approx(rise / 0.8)
    lengths = np.array([0.25, 0.5, 1.0, 2.0, 4.0]) * lsat
    ne = xt.next_fraction(c.kb, lengths, c.delay_per_m, rise)
    assert ne[:2] == pytest.approx(float(c.kb) * np.array([0.25, 0.5]))
    assert ne[2:] == pytest.approx([float(c.kb)] * 3)
    fe = xt.fext_fraction(c.kf, lengths, c.delay_per_m, rise)
    assert fe == pytest.approx(float(c.kf) * lengths * float(c.delay_per_m) / (rise / 0.8))
    # modal bound: never beyond half the step
    assert float(xt.fext_fraction(c.kf, 1e3, c.delay_per_m, rise)) == -0.5
    # volts: a 3.3 V driver of 25 ohm into the line launches the divider's share
    assert float(xt.launched_step(3.3, 50.0, 25.0)) == pytest.approx(2.2)


# ---------------------------------------------------------------- ngspice: coupled ladder



def coupled_ladder(tmp_path, c, length, rise, ends: list[str], swing: float, t_end: float, dx=0.1e-3):
    """ngspice on a coupled LC ladder: (t, victim near end, victim far end), smoothed over ramp/10.

    Each section carries Ls dx on both lines with a mutual K = Lm/Ls, Cs - Cm to ground on each line
    and a mutual capacitor Cm dx between them (pi sections: half capacitors at the ends). The aggressor
    is driven at node a0 from node src (a ramp of ``swing``); ``ends`` are the elements at src/a0, v0,
    a{n} and v{n}, with {n} the last node.
    """
    ls, lm, cs, cm = (float(np.ravel(v)[0]) for v in (c.ls, c.lm, c.cs, c.cm))
    n = max(int(round(length / dx)), 10)
    d = length / n
    ramp = rise / 0.8
    lines = [f"V1 src 0 PWL(0 0 {ramp:.6e} {swing})"] + [e.replace("{n}", str(n)) for e in ends]
    for i in range(1, n + 1):
        lines += [f"La{i} a{i - 1} a{i} {ls * d:.6e}", f"Lv{i} v{i - 1} v{i} {ls * d:.6e}",
                  f"K{i} La{i} Lv{i} {lm / ls:.9f}"]
    for i in range(n + 1):
        f = 0.5 if i in (0, n) else 1.0
        lines += [f"Ca{i} a{i} 0 {f * (cs - cm) * d:.6e}", f"Cv{i} v{i} 0 {f * (cs - cm) * d:.6e}",
                  f"Cm{i} a{i} v{i} {f * cm * d:.6e}"]
    ts, (v_ne, v_fe) = transient(tmp_path, "coupled ladder", "\n".join(lines), ramp / 400, t_end, ("v0", f"v{n}"))
    t = np.linspace(0.0, t_end, 4001)
    # A lumped ladder rings (Gibbs) at its cut-off where the far-end pulse has its sharp edges; a moving
    # average over ramp/10 removes that artefact of the discretisation and leaves the line's pulse.
    k = max(int(round((ramp / 10) / (t[1] - t[0]))), 1)
    kernel = np.ones(k) / k
    return (t, np.convolve(np.interp(t, ts, v_ne), kernel, "same"), np.convolve(np.interp(t, ts, v_fe), kernel, "same"))


def ladder_noise(tmp_path, c, length, rise, dx=0.1e-3):
    """Near- and far-end victim peaks of the coupled ladder, as fractions of the incident step: the source
    (2 V through Z) launches 1 V; all four ends are terminated in Z = sqrt(Ls/Cs)."""
    z = float(np.ravel(c.z_line)[0])
    t_end = 2 * length * float(np.ravel(c.delay_per_m)[0]) + 3 * rise / 0.8
    _, ne, fe = coupled_ladder(tmp_path, c, length, rise, [f"Rs src a0 {z}", f"Rne v0 0 {z}", f"Rfa a{{n}} 0 {z}",
                                                           f"Rfv v{{n}} 0 {z}"], 2.0, t_end, dx)
    return ne.max(), fe.min()


@pytest.fixture(scope="module")
def microstrip_pair():
    return coupling(solve_field(microstrip(0.2e-3, 0.2e-3)))


@needs_ngspice
@pytest.mark.parametrize("times_saturation", [0.35, 3.0])
def test_near_and_far_end_noise_against_ngspice_ladder(tmp_path, microstrip_pair, times_saturation):
    # Reference: ngspice (general-purpose circuit simulator) on a coupled ladder built from the field-solved
    # L and C matrices, below and above the near-end saturation length.
    c = microstrip_pair
    rise = 100e-12
    length = times_saturation * float(xt.saturation_length(rise, c.delay_per_m))
    ne_ref, fe_ref = ladder_noise(tmp_path, c, length, rise)
    ne = float(xt.next_fraction(c.kb, length, c.delay_per_m, rise))
    fe = float(xt.fext_fraction(c.kf, length, c.delay_per_m, rise))
    assert ne == pytest.approx(ne_ref, rel=0.10)
    assert fe == pytest.approx(fe_ref, rel=0.10)
    assert fe < 0 < ne


# ---------------------------------------------------------------- monotonicity

@settings(max_examples=40, deadline=None)
@given(w_over_h=st.floats(0.3, 3.0), s_over_h=st.floats(0.2, 4.0), grow=st.floats(1.05, 2.0),
       kind=st.sampled_from(["microstrip", "stripline"]))
def test_coupling_falls_with_spacing_and_rises_with_dielectric_thickness(w_over_h, s_over_h, grow, kind):
    # Physics: a wider spacing couples less; a plane further away (thicker dielectric) couples more.
    # Checked on the closed forms (Kirschning & Jansen 1984, Cohn 1955), which the field solver matches.
    h = 0.2e-3

    def kb(s, hh):
        if kind == "microstrip":
            xs = microstrip(w_over_h * h, s * h, h=hh)
        else:
            xs = CrossSection("stripline", w_over_h * h, 17e-6, (Stratum(hh, 4.0),), (Stratum(hh, 4.0),), gap=s * h)
        return float(coupling(solve_formula([xs])[0]).kb)

    assert kb(s_over_h * grow, h) < kb(s_over_h, h)
    assert kb(s_over_h, h * grow) > kb(s_over_h, h)


def test_field_solved_coupling_falls_with_spacing():
    kbs = [float(coupling(solve_field(microstrip(0.2e-3, s))).kb) for s in (0.1e-3, 0.3e-3, 0.9e-3)]
    assert kbs[0] > kbs[1] > kbs[2] > 0


# ---------------------------------------------------------------- waveforms with real ends: modal solution vs ngspice

def ladder_waves(tmp_path, c, length, rise, r_drv, r_victim, c_far, t_end, dx=0.1e-3):
    """The coupled ladder with a 1 V ramp behind r_drv, the victim's near end in r_victim and both far ends a
    capacitor c_far: (t, victim near, victim far), smoothed over ramp/10."""
    return coupled_ladder(tmp_path, c, length, rise, [f"Rs src a0 {r_drv}", f"Rne v0 0 {r_victim}",
                                                      f"Cfa a{{n}} 0 {c_far:.6e}", f"Cfv v{{n}} 0 {c_far:.6e}"],
                          1.0, t_end, dx)


@needs_ngspice
def test_crosstalk_waveforms_with_real_ends_match_ngspice(tmp_path, microstrip_pair):
    # Reference: ngspice on the coupled ladder with a 25 ohm aggressor driver, the victim's quiet 25 ohm driver
    # at its near end and 3 pF receivers at both far ends (nothing matched): the victim's waveforms at both
    # ends from the modal solution follow the ladder's within 3 % of the largest noise (measured 0.3 %).
    from sicheck.physics.coupled_wave import End, coupled_pair_waves
    c = microstrip_pair
    ls, lm, cs, cm = (float(np.ravel(v)[0]) for v in (c.ls, c.lm, c.cs, c.cm))
    rise, length = 100e-12, 30e-3
    w = coupled_pair_waves(ls, lm, cs, cm, length, rise, 1.0, 25.0, End(25.0), End(c=3e-12), End(c=3e-12))
    t, ne_ref, fe_ref = ladder_waves(tmp_path, c, length, rise, 25.0, 25.0, 3e-12, float(w.t[-1]))
    k = max(int(round((rise / 0.8 / 10) / (w.t[1] - w.t[0]))), 1)
    ne = np.convolve(w.victim_near, np.ones(k) / k, "same")
    fe = np.convolve(w.victim_far, np.ones(k) / k, "same")
    scale = max(np.abs(ne_ref).max(), np.abs(fe_ref).max())
    assert scale > 0.02                         # the unmatched ends give tens of mV per volt: a real test
    inner = t < 0.9 * t[-1]                     # the moving average's edge effect at the record's end
    assert np.abs(np.interp(t, w.t, ne) - ne_ref)[inner].max() < 0.03 * scale
    assert np.abs(np.interp(t, w.t, fe) - fe_ref)[inner].max() < 0.03 * scale
    # and with every end matched, the modal solution gives the weak-coupling coefficients (crosstalk.py)
    z = float(np.ravel(c.z_line)[0])
    m = coupled_pair_waves(ls, lm, cs, cm, length, rise, 2.0, z, End(z), End(z), End(z))
    assert m.victim_near.max() == pytest.approx(float(xt.next_fraction(c.kb, length, c.delay_per_m, rise)), rel=0.03)
    assert m.victim_far.min() == pytest.approx(float(xt.fext_fraction(c.kf, length, c.delay_per_m, rise)), rel=0.03)
