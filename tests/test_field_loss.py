"""Conductor loss from the field solver (Wheeler's dZ_air/dn on one grid) and a pair's C and L matrices,
against exact results evaluated in the test."""

import json

import numpy as np
import pytest
from scipy.special import ellipk

from sicheck.physics import loss
from sicheck.physics.constants import C0, EPS0
from sicheck.physics.cross_section import CrossSection, Stratum
from sicheck.physics.field2d import solve_field

ETA0 = 1.25663706212e-6 * 299792458.0   # mu0 c (CODATA 2018 mu0, exact c)
B = 1e-3
H = 1e-6 * B                            # central-difference step on the exact formulas


def stripline(w, t, b, er=1.0, gap=None):
    return CrossSection("stripline", w, t, (Stratum((b - t) / 2, er),), (Stratum((b - t) / 2, er),), gap=gap)


def cohn_1954(w, b):
    # exact t = 0 centred stripline in air (Cohn 1954), scipy.special.ellipk with m = k^2
    k = 1 / np.cosh(np.pi * w / (2 * b))
    return ETA0 / 4 * ellipk(k**2) / ellipk(1 - k**2)


def cohn_1955_odd(w, s, b):
    # exact t = 0 edge-coupled stripline, odd mode, in air (Cohn 1955)
    k = np.tanh(np.pi * w / (2 * b)) / np.tanh(np.pi * (w + s) / (2 * b))
    return ETA0 / 4 * ellipk(1 - k**2) / ellipk(k**2)


def cohn_thick_wide(w, t, b):
    # Cohn (1954), thick strip centred between planes, in air: parallel-plate part plus the fringing
    # capacitance of a semi-infinite thick strip (exact by conformal mapping), so exact for wide strips
    # up to the edges' interaction, ~exp(-pi w / b). Fringing formula from memory (also in Matthaei,
    # Young & Jones 1964); the first assertion below confirms it.
    x = t / b
    cf = (2 / (1 - x) * np.log(1 / (1 - x) + 1) - (1 / (1 - x) - 1) * np.log(1 / (1 - x) ** 2 - 1)) / np.pi
    return ETA0 / (4 * (w / (b - t) + cf))


@pytest.mark.parametrize("w_over_b", [0.3, 1.0, 3.0])
def test_zero_thickness_stripline_dz_dn_against_cohn(w_over_b):
    # t = 0: the recession narrows the strip by 2n and moves each plane 2n away (loss.receded's
    # convention); Cohn's exact Z differentiated numerically is the reference.
    w = w_over_b * B
    r = solve_field(stripline(w, 0.0, B, er=4.0))
    ref = (cohn_1954(w - 2 * H, B + 4 * H) - cohn_1954(w + 2 * H, B - 4 * H)) / (2 * H)
    err = abs(r.dz_air_dn / ref - 1) * 100
    assert err < 0.2 and err <= r.loss_uncertainty_pct <= 2.0


@pytest.mark.parametrize("w_over_b,s_over_b", [(0.5, 0.5), (0.2, 0.1)])
def test_zero_thickness_coupled_stripline_dz_dn_against_cohn(w_over_b, s_over_b):
    # the signal mode of a pair is the odd mode; the gap grows by 2n
    w, s = w_over_b * B, s_over_b * B
    r = solve_field(stripline(w, 0.0, B, er=3.0, gap=s))
    ref = (cohn_1955_odd(w - 2 * H, s + 2 * H, B + 4 * H) - cohn_1955_odd(w + 2 * H, s - 2 * H, B - 4 * H)) / (2 * H)
    err = abs(r.dz_air_dn / ref - 1) * 100
    assert err < 0.2 and err <= r.loss_uncertainty_pct <= 2.0


@pytest.mark.parametrize("w_over_b,t_over_b", [(2.0, 0.1), (3.0, 0.2), (1.0, 0.05)])
def test_thick_wide_stripline_conductor_loss_against_cohn_thick_strip(w_over_b, t_over_b):
    # Wheeler's rule on Cohn's thick-strip formula (recession: w - 2n, t - 2n, b + 2n), differentiated
    # here, against the solver's own derivative. The strips are wide enough for the formula to be exact.
    w, t = w_over_b * B, t_over_b * B
    r = solve_field(stripline(w, t, B, er=1.0))
    assert r.z0 == pytest.approx(cohn_thick_wide(w, t, B), rel=1e-4)       # the formula itself
    ref = (cohn_thick_wide(w - 2 * H, t - 2 * H, B + 2 * H)
           - cohn_thick_wide(w + 2 * H, t + 2 * H, B - 2 * H)) / (2 * H)
    f = 1e9
    a_ref = loss.conductor_alpha(f, cohn_thick_wide(w, t, B), ref)
    a = loss.conductor_alpha(f, r.z0, r.dz_air_dn)
    err = abs(a / a_ref - 1) * 100
    assert err < 0.2 and err <= r.loss_uncertainty_pct <= 2.0


def test_line_stripline_loss_converged_with_its_uncertainty(run):
    # The stripline of issue 13 item 3 (it gave 3.116 dB/m from two separately meshed recessions).
    # Pozar, Microwave Engineering, stripline attenuation from Wheeler's rule (formula from memory):
    # alpha_c = 2.7e-3 Rs er Z0 / (30 pi (b - t)) A, A = 1 + 2W/(b-t) + (b+t)/(pi (b-t)) ln((2b-t)/t),
    # for sqrt(er) Z0 < 120 ohm; about 1 % off Wheeler's rule here (an approximation to it).
    code, out, err = run("line", "stripline", "--width", "0.15", "--thickness", "0.035", "--below", "0.2",
                         "--above", "0.2", "--er", "3.8", "--freq", "1GHz", "--loss-tangent", "0.02",
                         "--solver", "field", "--json")
    assert code == 0, err
    d = json.loads(out)
    b, t, w, er = 0.435e-3, 35e-6, 0.15e-3, 3.8
    a_fac = 1 + 2 * w / (b - t) + (b + t) / (np.pi * (b - t)) * np.log((2 * b - t) / t)
    pozar = 2.7e-3 * loss.surface_resistance(1e9) * er * d["z0_ohm"] / (30 * np.pi * (b - t)) * a_fac
    assert d["conductor_loss_db_per_mm"] * 1e3 == pytest.approx(pozar * loss.NP_TO_DB, rel=0.02)
    assert 0 < d["conductor_loss_uncertainty_pct"] <= 2.0
    assert 0 < d["loss_uncertainty_pct"] <= d["conductor_loss_uncertainty_pct"]


def test_coupled_stripline_c_and_l_matrices_against_cohn():
    # Maxwell C matrix of a symmetric pair from Cohn's exact mode impedances (t = 0, one dielectric):
    # C_mode = sqrt(er) / (c Z_mode), C11 = (Ce + Co) / 2, C12 = (Ce - Co) / 2; L = (er / c^2) inv(C).
    er, w, s = 4.0, 0.3 * B, 0.2 * B
    a, c = np.tanh(np.pi * w / (2 * B)), np.tanh(np.pi * (w + s) / (2 * B))
    ze, zo = (ETA0 / 4 / np.sqrt(er) * ellipk(1 - k**2) / ellipk(k**2) for k in (a * c, a / c))
    ce, co = np.sqrt(er) / (C0 * ze), np.sqrt(er) / (C0 * zo)
    r = solve_field(stripline(w, 0.0, B, er=er, gap=s))
    cm, lm = np.array(r.c_matrix), np.array(r.l_matrix)
    tol = 2 * r.uncertainty_pct / 100
    assert cm[0, 0] == pytest.approx((ce + co) / 2, rel=tol) and cm[1, 1] == cm[0, 0]
    assert cm[0, 1] == pytest.approx((ce - co) / 2, rel=10 * tol) and cm[0, 1] < 0 and cm[1, 0] == cm[0, 1]
    assert lm @ cm == pytest.approx(er / C0**2 * np.eye(2), rel=1e-9, abs=1e-9 * er / C0**2)
    assert lm[0, 1] > 0 and lm[0, 0] > lm[0, 1]
    assert cm[0, 0] > 4 * EPS0 * er * w / B        # at least the parallel-plate part of each strip


def test_review_segments_carry_the_loss_uncertainty(run, board, tmp_path, monkeypatch):
    # field solver: a number within the 2 % target; closed forms state none (null)
    monkeypatch.setenv("SICHECK_CACHE_DIR", str(tmp_path / "cache"))
    tr, st = board("net,layer,length,width,rise_time\nA,L3,40mm,0.15mm,200ps\n")
    for solver, check in (("field", lambda u: 0 < u <= 2.0), ("formula", lambda u: u is None)):
        js = tmp_path / f"{solver}.json"
        code, _, err = run("review", tr, "--stackup", st, "--solver", solver, "--json", js)
        assert code in (0, 1), err
        seg = json.loads(js.read_text())["segments"][0]
        assert check(seg["loss_uncertainty_pct"]), (solver, seg["loss_uncertainty_pct"])
