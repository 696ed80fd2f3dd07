"""Crosstalk from the command line: line --spacing, plan --crosstalk, and the review."""

import json

import numpy as np
import openpyxl
import pytest

from sicheck.physics import crosstalk as xt
from sicheck.physics.formula import solve_formula
from sicheck.stackup import load_stackup

LINE = ["line", "microstrip", "--width", "0.2", "--thickness", "0.035", "--height", "0.2", "--er", "4.3"]


def kb_of(r):
    return float(xt.coupling_from_modes(r.z_even, r.z_odd, r.eps_even, r.eps_odd).kb)


def test_line_spacing_json(run):
    code, out, _ = run(*LINE, "--spacing", "0.3", "--length", "40", "--rise", "150ps", "--swing", "3.3V",
                       "--driver-ohm", "25", "--json")
    assert code == 0
    d = json.loads(out)
    for k in ("kb", "kf", "kf_ps_per_mm", "next_pct", "fext_pct", "saturation_length_mm", "l_matrix_nh_per_mm",
              "c_matrix_pf_per_mm", "next_v", "fext_v"):
        assert k in d
    # 40 mm is beyond the saturation length here: NEXT is Kb itself
    assert d["saturation_length_mm"] < 40
    assert d["next_pct"] == pytest.approx(100 * d["kb"])
    # a bare microstrip: inductive coupling dominates, so the far-end noise is negative
    assert d["fext_pct"] < 0
    assert d["fext_pct"] == pytest.approx(100 * d["kf"] * 40 * d["coupled_delay_ps_per_mm"] / (150 / 0.8))
    L, C = d["l_matrix_nh_per_mm"], d["c_matrix_pf_per_mm"]
    assert d["kb"] == pytest.approx((L[0][1] / L[0][0] - C[0][1] / C[0][0]) / 4)
    # the isolated line's impedance is still the line's Z0 (the same as without --spacing)
    code, out2, _ = run(*LINE, "--json")
    assert json.loads(out2)["z0_ohm"] == pytest.approx(d["z0_ohm"])
    assert d["next_v"] == pytest.approx(d["next_pct"] / 100 * 3.3 * d["coupled_z_ohm"] / (d["coupled_z_ohm"] + 25))


def test_line_spacing_stripline_and_text(run):
    code, out, _ = run("line", "stripline", "--width", "0.15", "--thickness", "0.017", "--height", "0.5", "--er", "4",
                       "--spacing", "0.2", "--length", "100", "--rise", "100ps", "--json")
    d = json.loads(out)
    assert abs(d["fext_pct"]) < 1e-9          # one dielectric: no far-end noise
    code, out, _ = run(*LINE, "--spacing", "0.3", "--length", "5", "--rise", "500ps")
    assert code == 0 and "Kb (near end)" in out and "C matrix" in out and "NEXT over 5 mm" in out


@pytest.mark.parametrize("extra,msg", [
    (["--spacing", "0.2", "--gap", "0.2"], "not both"),
    (["--spacing", "0.2", "--swing", "3.3"], "--driver-ohm"),
    (["--rise", "100ps"], "--spacing"),
    (["--spacing", "-0.2"], "--spacing"),
    (["--spacing", "0.2", "--rise", "100"], "--rise"),
])
def test_line_spacing_errors(run, extra, msg):
    code, _, err = run(*LINE, *extra)
    assert code == 2 and msg in err


def test_plan_crosstalk_solves_the_spacing(run, board):
    _, st = board("net,layer,length\n")
    xl = st.parent / "plan.xlsx"
    code, out, _ = run("plan", st, "--z0", "50", "--crosstalk", "3%", "--coupled-length", "50mm", "--rise", "200ps",
                       "--solver", "formula", "--json", "--out", xl)
    assert code == 0, out
    plan = json.loads(out)
    rows = list(openpyxl.load_workbook(xl, read_only=True)["Spacing"].iter_rows(values_only=True))
    assert [r[0] for r in rows[1:]] == [L["layer"] for L in plan["layers"]]
    assert rows[1][4] == pytest.approx(plan["layers"][0]["crosstalk"]["spacing_mm"])
    stack = load_stackup(st)
    for L in plan["layers"]:
        x = L["crosstalk"]
        w, s = x["width_mm"] * 1e-3, x["spacing_mm"] * 1e-3
        # independent check: the closed form at the reported spacing meets the budget, and 5 % closer does not
        at = solve_formula([stack.cross_section(L["layer"], w, s), stack.cross_section(L["layer"], w, 0.95 * s)])
        c = [xt.coupling_from_modes(r.z_even, r.z_odd, r.eps_even, r.eps_odd) for r in at]
        worst = [max(float(k.kb), abs(float(xt.fext_fraction(k.kf, 0.05, k.delay_per_m, 200e-12)))) for k in c]
        assert worst[0] <= 0.03 * 1.005
        assert worst[1] > 0.03
        if L["kind"] == "stripline":
            assert x["spacing_for_fext_mm"] == pytest.approx(plan["min_feature_mm"])   # no far-end noise


ONE_LAYER = """\
name = "one microstrip layer"
units = "mm"

[[layers]]
type = "signal"
name = "L1"
copper = "1oz"

[[layers]]
type = "dielectric"
thickness = 0.2
er = 4.3

[[layers]]
type = "plane"
name = "GND"
copper = "1oz"
"""


def test_plan_crosstalk_with_the_field_solver(run, board, tmp_path, monkeypatch):
    monkeypatch.setenv("SICHECK_CACHE_DIR", str(tmp_path / "cache"))
    _, st = board("net,layer,length\n", stackup=ONE_LAYER)      # one layer: a few seconds of field solves
    code, out, _ = run("plan", st, "--z0", "50", "--crosstalk", "2", "--json")
    plan = json.loads(out)
    x = plan["layers"][0]["crosstalk"]
    assert x["next_saturated_pct"] == pytest.approx(2.0, rel=0.005)
    from sicheck.physics.field2d import solve_field
    stack = load_stackup(st)
    r = solve_field(stack.cross_section(plan["layers"][0]["layer"], x["width_mm"] * 1e-3, x["spacing_mm"] * 1e-3))
    assert kb_of(r) == pytest.approx(0.02, rel=0.006)


def test_plan_crosstalk_budgets_from_the_rules(run, board, tmp_path):
    _, st = board("net,layer,length\n")
    rules = tmp_path / "xt.toml"
    rules.write_text("[crosstalk]\nmax_next_pct = 4\nmax_fext_pct = 2\n")
    code, out, _ = run("plan", st, "--z0", "50", "--crosstalk", "rules", "--rules", rules, "--coupled-length", "50mm",
                       "--rise", "200ps", "--solver", "formula", "--json")
    assert code == 0, out
    plan = json.loads(out)
    stack = load_stackup(st)
    for L in plan["layers"]:
        x = L["crosstalk"]
        assert (x["budget_pct"], x["far_budget_pct"]) == (4, 2)
        r = solve_formula([stack.cross_section(L["layer"], x["width_mm"] * 1e-3, x["spacing_mm"] * 1e-3)])[0]
        k = xt.coupling_from_modes(r.z_even, r.z_odd, r.eps_even, r.eps_odd)
        assert float(k.kb) <= 0.04 * 1.005
        assert abs(float(xt.fext_fraction(k.kf, 0.05, k.delay_per_m, 200e-12))) <= 0.02 * 1.005
    assert json.loads(run("plan", st, "--z0", "50", "--crosstalk", "rules", "--solver", "formula",
                          "--json")[1])["layers"][0]["crosstalk"]["budget_pct"] == 5        # the shipped default


def test_plan_crosstalk_errors(run, board):
    _, st = board("net,layer,length\n")
    assert run("plan", st, "--zdiff", "100", "--crosstalk", "3%")[0] == 2          # needs a --z0 width
    assert run("plan", st, "--z0", "50", "--crosstalk", "300%")[0] == 2
    assert run("plan", st, "--z0", "50", "--crosstalk", "3%", "--rise", "1ns")[0] == 2
    assert run("plan", st, "--z0", "50", "--rise", "1ns")[0] == 2


RULES = """\
[[net_class]]
name = "FAST"
match = ["CLK*"]
rise_time = "200ps"
width = "0.2mm"
spacing = "0.2mm"
max_next_pct = 3
max_fext_pct = 4

[[net_class]]
name = "default"
match = []
"""

TRACES = """\
net,layer,length [mm],width [mm],rise_time,spacing [mm],parallel [mm]
CLK1,L1,60,,,,
CLK1,L3,40,0.15,,,
SLOW,L1,80,0.2,2ns,0.6,20
QUIET,L3,30,0.15,1ns,,
LONE,L1,10,0.2,1ns,,
"""


def test_review_with_class_spacing_and_coupling_file(run, board, tmp_path):
    tr, st, rules = board(TRACES, rules=RULES)
    cp = tmp_path / "coupling.csv"
    cp.write_text("victim,aggressor,layer,spacing [mm],length [mm]\nQUIET,CLK1,L3,0.15,30\nQUIET,OTHER,l3,0.4,10\n")
    js, xl = tmp_path / "r.json", tmp_path / "r.xlsx"
    code, out, err = run("review", tr, "--stackup", st, "--rules", rules, "--coupling", cp, "--solver", "formula",
                         "--json", js, "--out", xl)
    assert code in (0, 1), err
    d = json.loads(js.read_text())
    assert "crosstalk: 3 nets; worst NEXT" in out          # CLK1, SLOW, QUIET (its coupling rows); LONE has none
    seg = {(s["net"], s["layer"]): s for s in d["segments"]}
    assert seg[("CLK1", "L1")]["spacing_mm"] == pytest.approx(0.2)        # the class spacing
    assert seg[("SLOW", "L1")]["spacing_mm"] == pytest.approx(0.6)        # the trace list's own
    assert seg[("SLOW", "L1")]["parallel_mm"] == pytest.approx(20)
    assert seg[("QUIET", "L3")]["next_pct"] is None                       # no spacing: no figure
    assert [n for n in d["nets"] if n["net"] == "LONE"][0]["next_pct"] is None   # nor for its net
    # CLK1 on the stripline: no far-end noise; on the microstrip: some
    assert abs(seg[("CLK1", "L3")]["fext_pct"]) < 1e-6
    assert seg[("CLK1", "L1")]["fext_pct"] < 0
    nets = {n["net"]: n for n in d["nets"]}
    assert nets["CLK1"]["next_pct"] == max(seg[("CLK1", "L1")]["next_pct"], seg[("CLK1", "L3")]["next_pct"])
    # QUIET's worst comes from the coupling file, with CLK1's 200 ps edge
    cps = d["crosstalk"]["couplings"]
    assert cps[0]["edge_from"] == "aggressor" and cps[0]["rise_ps"] == pytest.approx(200)
    assert cps[1]["edge_from"].startswith("victim") and cps[1]["rise_ps"] == pytest.approx(1000)
    assert nets["QUIET"]["next_pct"] == pytest.approx(max(c["next_pct"] for c in cps), rel=1e-3)
    xf = [f for f in d["findings"] if f["rule"] == "crosstalk"]
    by_net = {f["net"]: f for f in xf}
    assert "any neighbour at the class spacing" in by_net["CLK1"]["message"]
    assert "CLK1" in by_net["QUIET"]["message"] and "aggressor's edge" in by_net["QUIET"]["message"]
    assert "SLOW" not in by_net          # 0.6 mm over 20 mm with a 2 ns edge stays within 5 %
    # the suggested spacing really meets the budgets (closed forms, as in this review)
    msg = by_net["CLK1"]["message"]
    s_fix = float(msg.split("a spacing of ")[1].split(" mm")[0]) * 1e-3
    stack = load_stackup(st)
    layer = by_net["CLK1"]["layer"]
    w = 0.2e-3 if layer == "L1" else 0.15e-3
    r = solve_formula([stack.cross_section(layer, w, s_fix * 1.002)])[0]
    c = xt.coupling_from_modes(r.z_even, r.z_odd, r.eps_even, r.eps_odd)
    length = 0.06 if layer == "L1" else 0.04
    assert float(xt.next_fraction(c.kb, length, c.delay_per_m, 200e-12)) <= 0.03
    assert abs(float(xt.fext_fraction(c.kf, length, c.delay_per_m, 200e-12))) <= 0.04
    # the worst couplings simulated with the nets' own ends (sicheck.physics.coupled_wave)
    waves = d["crosstalk"]["waves"]
    assert 1 <= len(waves) <= 3 and len({w["victim"] for w in waves}) == len(waves)
    assert all(w["near_peak_mv"] != 0 and w["far_peak_mv"] is not None for w in waves)
    worst = max(d["nets"], key=lambda n: max(n.get("next_pct") or 0, abs(n.get("fext_pct") or 0)))
    assert waves[0]["victim"] == worst["net"]
    assert any("mV at its near end" in f["message"] for f in xf)
    wb = openpyxl.load_workbook(xl, read_only=True)
    assert "Crosstalk" in wb.sheetnames and "Couplings" in wb.sheetnames and "Crosstalk waves" in wb.sheetnames
    head = [c.value for c in next(wb["Segments"].iter_rows(max_row=1))]
    assert "NEXT [%]" in head and "FEXT [%]" in head
    rows = list(wb["Crosstalk"].iter_rows(values_only=True))
    # one row per unique (layer, width, spacing): class 0.2 on L1 and L3, the trace list's 0.6, the file's two
    assert len(rows) - 1 == len(d["crosstalk"]["sections"]) == 5


def test_review_without_spacing_is_unchanged(run, board, tmp_path):
    tr, st = board("net,layer,length [mm],width [mm],rise_time\nA,L1,50,0.2,300ps\n")
    js = tmp_path / "r.json"
    run("review", tr, "--stackup", st, "--solver", "formula", "--json", js)
    d = json.loads(js.read_text())
    assert "crosstalk" not in d and "next_pct" not in d["segments"][0] and "next_pct" not in d["nets"][0]


@pytest.mark.parametrize("body,column", [
    ("victim,aggressor,layer,spacing [mm],length [mm]\nA,B,L9,0.2,10\n", "layer"),
    ("victim,aggressor,layer,spacing [mm],length [mm]\nNOPE,B,L1,0.2,10\n", "victim"),
    ("victim,aggressor,layer,spacing,length [mm]\nA,B,L1,0.2,10\n", "spacing"),
    ("victim,aggressor,layer,spacing [mm],length [mm]\nA,B,L1,-1,10\n", "spacing"),
    ("victim,aggressor,layer,spacing [mm]\nA,B,L1,0.2\n", "length"),
    ("victim,aggressor,layer,spacing [mm],length [mm]\nA,B,L3,0.2,10\n", "layer"),     # A has no L3 segment
])
def test_coupling_file_errors_name_file_row_and_column(run, board, tmp_path, body, column):
    tr, st = board("net,layer,length [mm],width [mm],rise_time\nA,L1,50,0.2,300ps\n")
    cp = tmp_path / "c.csv"
    cp.write_text(body)
    code, _, err = run("review", tr, "--stackup", st, "--coupling", cp, "--solver", "formula")
    assert code == 2
    assert "c.csv" in err and column in err


def test_rules_reject_bad_crosstalk_keys(run, board, tmp_path):
    tr, st, rules = board("net,layer,length [mm],width [mm],rise_time\nA,L1,50,0.2,300ps\n",
                          rules='[[net_class]]\nname = "X"\nmax_next_pct = 300\n')
    code, _, err = run("review", tr, "--stackup", st, "--rules", rules, "--solver", "formula")
    assert code == 2 and "max_next_pct" in err


def test_spacing_search_meets_each_budget_and_stops_at_the_minimum_feature(board):
    from sicheck.crosstalk_plan import spacing_for_budget
    _, st = board("net,layer,length\n")
    stack = load_stackup(st)
    spacings = []
    for budget in (0.005, 0.02, 0.06, 0.45):
        r = spacing_for_budget(lambda s: stack.cross_section("L1", 0.2e-3, s), "L1", 0.2e-3, 0.2e-3, budget,
                               solve_formula, 75e-6)
        spacings.append(r.spacing)
        if budget < 0.4:
            assert r.kb == pytest.approx(budget, rel=0.005)
            assert r.steps <= 6
    assert spacings == sorted(spacings, reverse=True)
    assert spacings[-1] == pytest.approx(75e-6)          # even the closest spacing meets a 45 % budget


def test_semicolons_mils_decimal_commas_and_hostile_names_in_the_coupling_file(run, board, tmp_path):
    # a semicolon export in mils with decimal commas; names that look like formulas stay text in the workbook
    tr, st, rules = board("net;layer;length [mil];width [mil];rise_time;spacing [mil]\n"
                          "=CLK;L1;2400;8;150ps;6\n@VICTIM;L1;1500;8;150ps;\n", rules=RULES)
    cp = tmp_path / "c.csv"
    cp.write_text("Victim;Aggressor;Layer;Spacing [mil];Length [mil]\n@VICTIM;=CLK;L1;5,5;1200\n", encoding="utf-8")
    js, xl = tmp_path / "r.json", tmp_path / "r.xlsx"
    code, _, err = run("review", tr, "--stackup", st, "--rules", rules, "--coupling", cp, "--solver", "formula",
                       "--json", js, "--out", xl)
    assert code in (0, 1), err
    d = json.loads(js.read_text())
    (c,) = d["crosstalk"]["couplings"]
    assert c["spacing_mm"] == pytest.approx(5.5 * 0.0254) and c["length_mm"] == pytest.approx(1200 * 0.0254)
    assert c["edge_from"] == "aggressor" and c["width_mm"] == pytest.approx(8 * 0.0254)
    seg = {s["net"]: s for s in d["segments"]}
    assert seg["=CLK"]["spacing_mm"] == pytest.approx(6 * 0.0254)
    assert seg["@VICTIM"]["spacing_mm"] is None              # no class spacing for the default class either
    wb = openpyxl.load_workbook(xl)
    cells = [cell for row in wb["Couplings"].iter_rows(min_row=2) for cell in row if cell.value in ("=CLK", "@VICTIM")]
    assert len(cells) == 2 and all(cell.data_type == "s" for cell in cells)
    assert any(f["rule"] == "crosstalk" and f["net"] == "@VICTIM" for f in d["findings"])


def test_coupling_file_victim_may_be_a_pair_leg_listed_through_its_partner(run, board, tmp_path):
    tr, st = board("net,pair,layer,length [mm],width [mm],gap [mm],rise_time\nD_P,D_N,L1,40,0.15,0.15,100ps\n"
                   "CLK,,L1,40,0.15,,100ps\n")
    cp = tmp_path / "c.csv"
    cp.write_text("victim,aggressor,layer,spacing [mm],length [mm]\nD_N,CLK,L1,0.1,40\n")
    js = tmp_path / "r.json"
    code, _, err = run("review", tr, "--stackup", st, "--coupling", cp, "--solver", "formula", "--json", js)
    assert code in (0, 1), err
    d = json.loads(js.read_text())
    (c,) = d["crosstalk"]["couplings"]
    assert c["width_mm"] == pytest.approx(0.15) and c["edge_from"] == "aggressor"
    net = [n for n in d["nets"] if n["net"] == "D_N"][0]
    assert net["listed_via_partner"] and net["next_pct"] == pytest.approx(c["next_pct"], rel=1e-3)


def test_line_spacing_with_real_ends(run):
    from sicheck.physics.coupled_wave import End, coupled_pair_waves
    code, out, _ = run(*LINE, "--spacing", "0.2", "--length", "30", "--rise", "100ps", "--swing", "1V",
                       "--driver-ohm", "25", "--victim-ohm", "10", "--load-pf", "3", "--json")
    assert code == 0
    d = json.loads(out)
    e = d["real_ends"]
    assert (e["victim_driver_ohm"], e["load_pf"]) == (10, 3)
    # the same solution from the printed matrices (nH/mm = uH/m, pF/mm = nF/m)
    L, C = d["l_matrix_nh_per_mm"], d["c_matrix_pf_per_mm"]
    w = coupled_pair_waves(L[0][0] * 1e-6, L[0][1] * 1e-6, C[0][0] * 1e-9, -C[0][1] * 1e-9, 0.03, 100e-12, 1.0,
                           25.0, End(r=10.0), End(c=3e-12), End(c=3e-12))
    assert e["near_peak_mv"] == pytest.approx(1e3 * w.victim_near[np.argmax(np.abs(w.victim_near))], rel=1e-3)
    assert e["far_peak_mv"] == pytest.approx(1e3 * w.victim_far[np.argmax(np.abs(w.victim_far))], rel=1e-3)
    # unmatched ends: the far end sees more than the matched-end FEXT of the same step
    assert abs(e["far_peak_mv"]) > abs(d["fext_v"]) * 1e3
    for extra in (["--load-pf", "3"], ["--victim-ohm", "10"], ["--swing", "1V", "--driver-ohm", "25", "--load-pf", "-3"]):
        code, _, err = run(*LINE, "--spacing", "0.2", "--length", "30", "--rise", "100ps", *extra)
        assert code == 2 and ("--load-pf" in err or "--swing" in err)
