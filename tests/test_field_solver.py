"""The 2D field solver against outside references and physics."""

import json

import numpy as np
import pytest
from scipy.special import ellipk

from sicheck.physics.constants import C0, EPS0
from sicheck.physics.cross_section import CrossSection, Stratum
from sicheck.physics.field2d import solve_field
from sicheck.physics.formula import solve_formula
from sicheck.physics.line_result import per_length

ETA0 = 1.25663706212e-6 * 299792458.0   # mu0 c (CODATA 2018 mu0, exact c)
B = 1e-3


def stripline(w, t, below, above, gap=None, er_below=4.0, er_above=None):
    return CrossSection("stripline", w, t, (Stratum(below, er_below),), (Stratum(above, er_above or er_below),),
                        gap=gap)


def cohn_1954(w, b, er):
    # exact t = 0 centred stripline (Cohn 1954), evaluated independently with scipy.special.ellipk (m = k^2)
    k = 1 / np.cosh(np.pi * w / (2 * b))
    return ETA0 / 4 / np.sqrt(er) * ellipk(k**2) / ellipk(1 - k**2)


def cohn_1955(w, s, b, er):
    # exact t = 0 edge-coupled stripline even/odd modes (Cohn 1955)
    a, c = np.tanh(np.pi * w / (2 * b)), np.tanh(np.pi * (w + s) / (2 * b))
    return tuple(ETA0 / 4 / np.sqrt(er) * ellipk(1 - k**2) / ellipk(k**2) for k in (a * c, a / c))


@pytest.mark.parametrize("w_over_b", [0.1, 0.3, 1.0, 3.0])
def test_zero_thickness_stripline_within_0p3pct_of_cohn(w_over_b):
    r = solve_field(stripline(w_over_b * B, 0.0, B / 2, B / 2))
    ref = cohn_1954(w_over_b * B, B, 4.0)
    assert abs(r.z0 / ref - 1) < 0.003
    assert abs(r.z0 / ref - 1) * 100 <= r.uncertainty_pct     # the error estimate covers the true error
    assert r.uncertainty_pct <= 0.3
    assert r.eps_eff == 4.0                                   # homogeneous: eps_eff = er exactly


@pytest.mark.parametrize("w_over_b,s_over_b", [(0.2, 0.1), (0.5, 0.5), (1.0, 0.2)])
def test_zero_thickness_coupled_stripline_within_0p3pct_of_cohn(w_over_b, s_over_b):
    r = solve_field(stripline(w_over_b * B, 0.0, B / 2, B / 2, gap=s_over_b * B))
    ze, zo = cohn_1955(w_over_b * B, s_over_b * B, B, 4.0)
    assert abs(r.z_even / ze - 1) < 0.003
    assert abs(r.z_odd / zo - 1) < 0.003
    assert r.zdiff == pytest.approx(2 * r.z_odd)
    assert r.eps_odd == r.eps_even == 4.0


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("u", [0.2, 0.5, 1.0, 2.0, 5.0])
@pytest.mark.parametrize("er", [2.2, 4.4])
def test_microstrip_within_0p5pct_of_scikit_rf_hammerstad_jensen(u, er):
    skrf = pytest.importorskip("skrf")
    from skrf.media import MLine
    h = 0.2e-3
    m = MLine(frequency=skrf.Frequency(1, 1, 1, "MHz"), w=u * h, h=h, t=None, ep_r=er, disp="none",
              diel="frequencyinvariant", rough=0.0)
    z_ref = float(np.real(np.ravel(m.zl_eff)[0]))
    e_ref = float(np.real(np.ravel(m.ep_reff)[0]))
    r = solve_field(CrossSection("microstrip", u * h, 0.0, (Stratum(h, er),)))
    assert abs(r.z0 / z_ref - 1) < 0.005
    assert abs(r.eps_eff / e_ref - 1) < 0.005


def test_per_length_identities_for_every_solution():
    # Z0 C v = 1 and L C = eps_eff / c^2 (TEM), for single lines and for each mode of a pair
    cases = [stripline(0.15e-3, 35e-6, 0.1e-3, 0.3e-3, er_below=4.2, er_above=3.7),
             CrossSection("microstrip", 0.2e-3, 35e-6, (Stratum(0.1e-3, 4.0),), (Stratum(20e-6, 3.5, 0, True),)),
             CrossSection("microstrip", 0.12e-3, 20e-6, (Stratum(0.1e-3, 3.9),), gap=0.15e-3)]
    for xs in cases:
        r = solve_field(xs)
        modes = [(r.z0, r.eps_eff)] + ([(r.z_odd, r.eps_odd), (r.z_even, r.eps_even)] if r.coupled else [])
        for z, e in modes:
            l, c, d = per_length(z, e)
            assert z * c * (1 / d) == pytest.approx(1.0, rel=1e-12)
            assert l * c == pytest.approx(e / C0**2, rel=1e-12)
            assert 1.0 < e < 4.2 + 1e-9


def test_wide_plates_match_parallel_plate_plus_fringing():
    # A strip much wider than its spacing: C = eps (2 w / (b/2)) + the exact fringing of two zero-thickness
    # edges midway between planes, 8 eps ln2 / pi (the conformal-mapping edge result; the correction is
    # exponentially small, ~exp(-pi w / b)).
    w = 10 * B
    for target, label in ((0.1, "coarse"), (0.005, "fine")):
        r = solve_field(stripline(w, 0.0, B / 2, B / 2, er_below=1.0), target_pct=target)
        c = 1 / (C0 * r.z0)
        ref = EPS0 * (4 * w / B + 8 * np.log(2) / np.pi)
        err_pct = abs(c / ref - 1) * 100
        # C's relative error is twice Z's; the estimate must cover it
        assert err_pct <= 2 * r.uncertainty_pct + 1e-9, label
        if label == "coarse":
            coarse_err, coarse_unc = err_pct, r.uncertainty_pct
    assert r.uncertainty_pct < coarse_unc          # refining shrinks the estimate, error stays inside it
    assert coarse_err < 0.01 and err_pct < 0.01


def test_refinement_shrinks_the_true_error_as_estimated():
    # A narrow zero-thickness strip (strong edge singularity) against Cohn (1954).
    xs = stripline(0.1 * B, 0.0, B / 2, B / 2)
    ref = cohn_1954(0.1 * B, B, 4.0)
    errs, uncs = [], []
    for target in (0.3, 0.05):
        r = solve_field(xs, target_pct=target)
        errs.append(abs(r.z0 / ref - 1) * 100)
        uncs.append(r.uncertainty_pct)
        assert errs[-1] <= uncs[-1]
    assert errs[1] < errs[0] and uncs[1] < uncs[0]


def test_mirror_symmetry_of_a_stratified_stripline():
    # Turning a zero-thickness strip's stackup upside down changes nothing physical.
    a = solve_field(stripline(0.15e-3, 0.0, 0.1e-3, 0.3e-3, er_below=4.4, er_above=3.6))
    b = solve_field(stripline(0.15e-3, 0.0, 0.3e-3, 0.1e-3, er_below=3.6, er_above=4.4))
    tol = (a.uncertainty_pct + b.uncertainty_pct) / 100
    assert a.z0 == pytest.approx(b.z0, rel=tol)
    assert a.eps_eff == pytest.approx(b.eps_eff, rel=tol)


def test_pair_matrices_are_consistent_with_the_modes():
    r = solve_field(CrossSection("microstrip", 0.12e-3, 20e-6, (Stratum(0.1e-3, 3.9),), gap=0.15e-3))
    c = np.array(r.c_matrix)
    assert c[0, 1] < 0 and c[0, 0] > 0                       # Maxwell matrix: mutual term negative
    co = c[0, 0] - c[0, 1]                                   # odd-mode capacitance per line
    l = np.array(r.l_matrix)
    lo = l[0, 0] - l[0, 1]
    assert np.sqrt(lo / co) == pytest.approx(r.z_odd, rel=1e-9)
    assert 1 / np.sqrt(lo * co) == pytest.approx(C0 / np.sqrt(r.eps_odd), rel=1e-9)


def test_thin_strip_limit_of_finite_thickness():
    # t -> 0 approaches the exact zero-thickness value (Cohn 1954); thicker copper lowers Z0.
    ref = cohn_1954(0.3 * B, B, 4.0)
    thin = solve_field(stripline(0.3 * B, 1e-4 * B, (B - 1e-4 * B) / 2, (B - 1e-4 * B) / 2))
    thick = solve_field(stripline(0.3 * B, 0.05 * B, 0.475 * B, 0.475 * B))
    assert thin.z0 == pytest.approx(ref, rel=0.004)
    assert thick.z0 < thin.z0


def test_trapezoid_between_its_top_and_bottom_widths():
    base = dict(kind="stripline", thickness=35e-6, below=(Stratum(0.15e-3, 4.0),), above=(Stratum(0.15e-3, 4.0),))
    wide = solve_field(CrossSection(width=0.15e-3, **base))
    narrow = solve_field(CrossSection(width=0.11e-3, **base))
    trap = solve_field(CrossSection(width=0.15e-3, top_width=0.11e-3, **base))
    assert wide.z0 < trap.z0 < narrow.z0


def test_mask_correction_tracks_the_field_solver():
    # sicheck's closed-form cover correction (fitted to this solver) on points outside the fit set.
    for u, c_over_h, er, em in ((0.7, 0.2, 4.0, 3.6), (2.0, 0.4, 3.8, 3.4), (1.5, 0.15, 4.3, 3.9)):
        h = 0.1e-3
        xs = CrossSection("microstrip", u * h, 0.0, (Stratum(h, er),), (Stratum(c_over_h * h, em, 0, True),))
        f = solve_formula([xs])[0]
        r = solve_field(xs)
        assert abs(f.z0 / r.z0 - 1) < 0.01


def test_kirschning_jansen_against_the_field_solver():
    # Kirschning & Jansen (1984) state about 1 % in their range; our solver is the independent check.
    from sicheck.physics.coupled_microstrip import kirschning_jansen
    h = 0.1e-3
    for u, g, er in ((0.5, 0.5, 4.3), (1.0, 1.0, 4.3), (2.0, 2.0, 10.0), (1.0, 3.0, 4.3)):
        r = solve_field(CrossSection("microstrip", u * h, 0.0, (Stratum(h, er),), gap=g * h))
        ze, zo, _, _ = kirschning_jansen(u * h, h, 0.0, g * h, er)
        assert abs(ze / r.z_even - 1) < 0.01 and abs(zo / r.z_odd - 1) < 0.01


def test_line_field_json_and_plot(run, tmp_path):
    png = tmp_path / "xs.png"
    code, out, err = run("line", "microstrip", "--width", "0.15", "--thickness", "0.035", "--er", "4.2",
                         "--height", "0.1", "--mask", "0.02", "--mask-er", "3.5", "--solver", "field",
                         "--json", "--plot", png)
    assert code == 0, err
    d = json.loads(out)
    for key in ("z0_ohm", "eps_eff", "delay_ps_per_mm", "l_nh_per_mm", "c_pf_per_mm", "model", "warnings",
                "uncertainty_pct", "solve_s", "formula_z0_ohm"):
        assert key in d
    assert d["solver"] == "field" and d["uncertainty_pct"] <= 0.3
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_line_stratified_and_etched(run):
    code, out, err = run("line", "stripline", "--width", "0.12", "--thickness", "0.017", "--er", "4",
                         "--below", "0.125", "--above", "0.45", "--er-above", "3.8", "--etch-factor", "2",
                         "--solver", "field", "--json")
    assert code == 0, err
    d = json.loads(out)
    assert d["top_width_mm"] == pytest.approx(0.12 - 2 * 0.017 / 2)
    assert 3.8 < d["eps_eff"] < 4.0
