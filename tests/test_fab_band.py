"""Fabrication band: sensitivities against direct solves at the corners, Cohn's exact stripline, the check.

Outside references: Cohn, "Characteristic impedance of the shielded-strip transmission line", IRE Trans.
MTT 2, 1954 (Z0 = eta0/(4 sqrt(er)) K(k)/K(k'), k = sech(pi w / 2b)), evaluated here with
scipy.special.ellipk independently of sicheck's stripline module; for the microstrip the reference is
the solver itself at each of the sixteen corner geometries (a direct solve, no sensitivities).
"""

from __future__ import annotations

import itertools
import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import ellipk

from sicheck.errors import InputError
from sicheck.physics import field2d
from sicheck.physics.constants import ETA0
from sicheck.physics.cross_section import CrossSection, Stratum
from sicheck.physics.fab_band import Tolerances, perturbed, tolerance_band
from sicheck.physics.formula import solve_formula
from sicheck.rules import load_rule_sets

TOL = Tolerances(width=12.7e-6, dielectric_pct=10.0, er_pct=5.0, copper_pct=10.0)


def _corners(xs: CrossSection, tol: Tolerances) -> list[CrossSection]:
    """Every combination of the four tolerance limits, built by moving one quantity after another."""
    out = []
    for signs in itertools.product((-1, 1), repeat=4):
        x = xs
        for q, s in zip(("width", "dielectric", "er", "copper"), signs):
            x = perturbed(x, q, s, tol)
        out.append(x)
    return out


MICROSTRIP = CrossSection("microstrip", 0.15e-3, 35e-6, (Stratum(0.1e-3, 4.2),),
                          (Stratum(20e-6, 3.6, conformal=True),))
PAIR = CrossSection("microstrip", 0.12e-3, 35e-6, (Stratum(0.1e-3, 4.2),), (), gap=0.16e-3)


@pytest.mark.parametrize("xs", [MICROSTRIP, PAIR], ids=["single", "pair"])
def test_microstrip_band_matches_direct_solves_at_the_corners(xs):
    b = tolerance_band([xs], solve_formula([xs]), solve_formula, TOL)
    corners = solve_formula(_corners(xs, TOL))
    z = np.array([r.z0 for r in corners])
    # the band leaves out only the cross terms between quantities: about 0.2 % of Z here
    assert b.z_min[0] == pytest.approx(z.min(), rel=3e-3)
    assert b.z_max[0] == pytest.approx(z.max(), rel=3e-3)
    assert b.z_min[0] < b.z[0] - 2.0 and b.z_max[0] > b.z[0] + 2.0       # a real band, not zero width
    assert 0 < b.z_rss[0] < (b.z_max[0] - b.z_min[0]) / 2
    if xs.coupled:
        zd = np.array([r.zdiff for r in corners])
        assert b.zdiff_min[0] == pytest.approx(zd.min(), rel=3e-3)
        assert b.zdiff_max[0] == pytest.approx(zd.max(), rel=3e-3)


def test_microstrip_band_with_the_field_solver_within_its_uncertainty():
    """The same comparison with the field solver: band edges against the extreme corner solves."""
    def field(lst):
        return [field2d.solve_field(x, 1.0) for x in lst]
    tol = Tolerances(width=12.7e-6, dielectric_pct=10.0)        # two quantities: four corners, fast
    xs = CrossSection("microstrip", 0.15e-3, 35e-6, (Stratum(0.1e-3, 4.2),))
    nominal = field([xs])
    b = tolerance_band([xs], nominal, field, tol)
    corners = [perturbed(perturbed(xs, "width", sw, tol), "dielectric", sh, tol)
               for sw in (-1, 1) for sh in (-1, 1)]
    rs = field(corners)
    z = np.array([r.z0 for r in rs])
    # each band edge sums three solutions; each corner is one: allow their stated uncertainties added up
    unc = (3 * nominal[0].uncertainty_pct + max(r.uncertainty_pct for r in rs)) / 100.0 + 2e-3
    assert b.z_min[0] == pytest.approx(z.min(), rel=unc)
    assert b.z_max[0] == pytest.approx(z.max(), rel=unc)


def _cohn(w, b, er):
    """Cohn (1954), t = 0, centred, with scipy.special.ellipk (parameter m = k^2)."""
    x = math.pi * w / (2 * b)
    k, kp = 1 / math.cosh(x), math.tanh(x)
    return ETA0 / (4 * math.sqrt(er)) * ellipk(k * k) / ellipk(kp * kp)


def test_stripline_band_at_zero_thickness_against_cohn_at_the_corners():
    h, w, er = 0.15e-3, 0.12e-3, 3.8
    xs = CrossSection("stripline", w, 0.0, (Stratum(h, er),), (Stratum(h, er),))
    tol = Tolerances(width=15e-6, dielectric_pct=10.0, er_pct=5.0, copper_pct=10.0)
    b = tolerance_band([xs], solve_formula([xs]), solve_formula, tol)
    z = [_cohn(w + sw * tol.width, 2 * h * (1 + sh * 0.10), er * (1 + se * 0.05))
         for sw in (-1, 1) for sh in (-1, 1) for se in (-1, 1)]
    assert b.z[0] == pytest.approx(_cohn(w, 2 * h, er), rel=1e-6)
    assert b.z_min[0] == pytest.approx(min(z), rel=3e-3)
    assert b.z_max[0] == pytest.approx(max(z), rel=3e-3)


def test_one_batched_solve_of_all_limits_and_zero_tolerances_skip():
    calls = []

    def counting(lst):
        calls.append(len(lst))
        return solve_formula(lst)
    xs = [MICROSTRIP, PAIR, CrossSection("stripline", 0.1e-3, 17e-6, (Stratum(0.12e-3, 4.0),), (Stratum(0.2e-3, 4.0),))]
    tolerance_band(xs, solve_formula(xs), counting, TOL)
    assert calls == [3 * 8]               # one batched solve: two limits x four quantities x every cross-section
    calls.clear()
    b = tolerance_band(xs, solve_formula(xs), counting, Tolerances(er_pct=5.0))
    assert calls == [6]
    b0 = tolerance_band(xs, solve_formula(xs), counting, Tolerances())
    assert calls == [6] and np.array_equal(b0.z_min, b0.z) and np.array_equal(b0.z_max, b0.z)
    assert np.isnan(b.zdiff_min[0]) and not np.isnan(b.zdiff_min[1])


def test_width_limit_moves_the_gap_the_other_way():
    up = perturbed(PAIR, "width", 1, TOL)
    assert up.width == pytest.approx(PAIR.width + TOL.width) and up.gap == pytest.approx(PAIR.gap - TOL.width)
    masked = perturbed(MICROSTRIP, "dielectric", 1, TOL)
    assert masked.below[0].thickness == pytest.approx(0.11e-3) and masked.above == MICROSTRIP.above


# ---------------------------------------------------------------- the rules file and the review

def _rules_file(tmp_path, body):
    p = tmp_path / "fab.toml"
    p.write_text("name = 'fab'\n\n[fabrication]\nmin_feature = '0.075mm'\n" + body, encoding="utf-8")
    return p


def test_tolerances_read_from_the_fabrication_table(tmp_path):
    from sicheck.checks.fabrication_band import tolerances
    rs = load_rule_sets([_rules_file(tmp_path, "width_tol = '1mil'\ner_tol_pct = 3\n")])
    t = tolerances(rs)
    assert t.width == pytest.approx(25.4e-6) and t.er_pct == 3.0 and t.dielectric_pct == 10.0


@pytest.mark.parametrize("body, key", [("width_tol = '-0.01mm'\n", "width_tol"), ("width_tol = '1mm'\n", "width_tol"),
                                       ("width_tol = 0.01\n", "width_tol"), ("er_tol_pct = 80\n", "er_tol_pct"),
                                       ("copper_tol_pct = 'ten'\n", "copper_tol_pct"),
                                       ("dielectric_tol_pct = -1\n", "dielectric_tol_pct")])
def test_bad_tolerances_name_file_line_and_key(tmp_path, body, key):
    with pytest.raises(InputError) as e:
        load_rule_sets([_rules_file(tmp_path, body)])
    assert e.value.key == key and e.value.line == 5 and e.value.file.endswith("fab.toml")


def test_review_json_carries_the_band(board, run, tmp_path):
    tr, st = board("net,layer,length,width,rise_time,pair,gap\n"
                   "A,L1,30mm,0.2mm,300ps,,\nD_P,L3,30mm,0.12mm,300ps,D_N,0.15mm\n")
    rf = _rules_file(tmp_path, "width_tol = '0mm'\ndielectric_tol_pct = 0\ner_tol_pct = 5\ncopper_tol_pct = 0\n")
    js = tmp_path / "r.json"
    code, _, err = run("review", tr, "--stackup", st, "--solver", "formula", "--rules", rf, "--json", js)
    assert code in (0, 1), err
    data = json.loads(js.read_text())
    assert data["summary"]["fabrication_tolerances"] == {"width_tol_mm": 0.0, "dielectric_tol_pct": 0.0,
                                                         "er_tol_pct": 5.0, "copper_tol_pct": 0.0}
    segs = {s["net"]: s for s in data["segments"]}
    a, d = segs["A"], segs["D_P"]
    assert a["z_min_ohm"] < a["z0_ohm"] < a["z_max_ohm"] and "zdiff_min_ohm" not in a
    assert d["zdiff_min_ohm"] < d["zdiff_ohm"] < d["zdiff_max_ohm"]
    # er alone on a stripline: Z scales as 1/sqrt(er) exactly (homogeneous dielectric)
    assert d["zdiff_max_ohm"] == pytest.approx(d["zdiff_ohm"] / math.sqrt(0.95), rel=1e-4)


def test_plan_shows_the_band_of_each_width(board, run, tmp_path):
    _, st = board("net,layer,length,width,rise_time\nA,L1,30mm,0.2mm,300ps\n")
    code, out, err = run("plan", st, "--z0", "50", "--solver", "formula", "--json")
    assert code in (0, 1), err
    for layer in json.loads(out)["layers"]:
        (s,) = layer["singles"]
        assert s["band_min_ohm"] < s["achieved_ohm"] < s["band_max_ohm"]
        assert 0 < s["band_rss_ohm"] < s["band_max_ohm"] - s["band_min_ohm"]
    code, out, err = run("plan", st, "--z0", "50", "--solver", "formula")
    assert "band" in out and "width +/-0.0127 mm" in out


def test_auto_solver_decides_once_for_the_whole_review(monkeypatch):
    """The band's larger batch must not switch 'auto' to the closed forms when the nominal was field-solved."""
    from sicheck import field_solve, solvers
    monkeypatch.setattr(field_solve, "AUTO_FIELD_LIMIT", 2)
    seen = []
    monkeypatch.setattr(field_solve, "solve_field_all", lambda lst, **k: seen.append(len(lst)) or solve_formula(lst))
    solve = solvers.solver_fn("auto", show_progress=False)
    solve([MICROSTRIP, PAIR])
    solve([MICROSTRIP, PAIR] * 8)
    assert seen == [2, 16]
    closed = solvers.solver_fn("auto", show_progress=False)
    closed([MICROSTRIP, PAIR, MICROSTRIP])
    closed([MICROSTRIP])
    assert seen == [2, 16]


@settings(max_examples=40, deadline=None)
@given(w=st.floats(0.06e-3, 0.5e-3), h=st.floats(0.05e-3, 0.4e-3), er=st.floats(2.5, 6.0),
       kind=st.sampled_from(["microstrip", "stripline"]), pair=st.booleans(), scale=st.floats(0.2, 1.0))
def test_band_holds_the_nominal_and_grows_with_the_tolerances(w, h, er, kind, pair, scale):
    """Invariants: min <= nominal <= max; zero tolerances give zero width; smaller tolerances a narrower band."""
    above = (Stratum(h, er),) if kind == "stripline" else ()
    xs = [CrossSection(kind, w, 18e-6, (Stratum(h, er),), above, gap=0.15e-3 if pair else None)]
    nominal = solve_formula(xs)
    big = tolerance_band(xs, nominal, solve_formula, TOL)
    small = tolerance_band(xs, nominal, solve_formula, Tolerances(TOL.width * scale, 10 * scale, 5 * scale, 10 * scale))
    for b in (big, small):
        assert b.z_min[0] <= b.z[0] <= b.z_max[0]
        assert b.z_rss[0] <= max(b.z_max[0] - b.z[0], b.z[0] - b.z_min[0]) * 1.0001 + 1e-12
    assert big.z_min[0] <= small.z_min[0] + 1e-9 and small.z_max[0] <= big.z_max[0] + 1e-9
    if pair:
        assert big.zdiff_min[0] <= big.zdiff[0] <= big.zdiff_max[0]


def test_no_band_option_skips_the_band(board, run, tmp_path):
    tr, st = board("net,layer,length,width,rise_time\nA,L1,30mm,0.2mm,300ps\n")
    js = tmp_path / "r.json"
    code, _, err = run("review", tr, "--stackup", st, "--solver", "formula", "--json", js, "--no-band")
    assert code in (0, 1), err
    (seg,) = json.loads(js.read_text())["segments"]
    assert "z_min_ohm" not in seg and seg["z0_ohm"] > 0


def test_band_from_fixed_grid_ratios_matches_the_extrapolated_band():
    # The field solver's band from ratios on one fixed grid (what a review uses) against the band from
    # Richardson-extrapolated solves of every limit: a microstrip under a thin mask, a pair, a stripline
    # between two different laminates. Allowed: 0.15 % of Z, below the solver's own stated uncertainty.
    from sicheck.field_solve import fixed_grid_all
    strip = CrossSection("stripline", 0.12e-3, 18e-6, (Stratum(0.13e-3, 3.9),), (Stratum(0.2e-3, 4.4),))
    xs = [MICROSTRIP, PAIR, strip]
    tol = Tolerances(width=12.7e-6, dielectric_pct=10.0, er_pct=5.0, copper_pct=10.0)

    def field(lst):
        return [field2d.solve_field(x, loss=False) for x in lst]
    nominal = field(xs)
    full = tolerance_band(xs, nominal, field, tol)
    fast = tolerance_band(xs, nominal, lambda lst: pytest.fail("the full solve is not used"), tol,
                          ratio_solve=lambda lst: fixed_grid_all(lst, workers=1))
    for a, b in ((fast.z_min, full.z_min), (fast.z_max, full.z_max), (fast.zdiff_min[1:2], full.zdiff_min[1:2]),
                 (fast.zdiff_max[1:2], full.zdiff_max[1:2])):
        assert np.allclose(a, b, rtol=1.5e-3, atol=0)
    assert np.all(full.z_max - full.z_min > 2.0)                        # a real band
    assert np.allclose(fast.z_rss, full.z_rss, rtol=0.02)


def test_field_solver_gives_the_band_its_fixed_grid_ratio_solve(monkeypatch):
    from sicheck import field_solve, solvers
    seen = []
    monkeypatch.setattr(field_solve, "fixed_grid_all", lambda lst, **k: seen.append(len(lst)) or solve_formula(lst))
    monkeypatch.setattr(field_solve, "solve_field_all", lambda lst, **k: solve_formula(lst))
    field = solvers.solver_fn("field", show_progress=False)
    field.band_ratios([MICROSTRIP, PAIR])
    assert seen == [2]
    assert not hasattr(solvers.solver_fn("formula"), "band_ratios")      # the closed forms solve every limit


def test_fixed_grid_solves_are_cached_apart_from_extrapolated_ones(tmp_path, monkeypatch):
    from sicheck import field_solve
    monkeypatch.setenv("SICHECK_CACHE_DIR", str(tmp_path))
    first = field_solve.fixed_grid_all([MICROSTRIP, PAIR], workers=1)
    assert len(list(tmp_path.glob("*.json"))) == 2
    monkeypatch.setattr(field2d, "fixed_grid_impedance", lambda *a: pytest.fail("solved again"))
    again = field_solve.fixed_grid_all([MICROSTRIP, PAIR], workers=1)
    assert [(r.z0, r.zdiff) for r in again] == [(r.z0, r.zdiff) for r in first]
    assert field_solve.cache_key(MICROSTRIP, 0) != field_solve.cache_key(MICROSTRIP, 0.0)
