"""Timing end to end: a board made here (mils, semicolons), a match group, a skewed pair, a delay budget.

Outside references: TD = length * sqrt(eps_eff) / c for a TEM or quasi-TEM line (any transmission-line
text, e.g. Pozar, Microwave Engineering); a stripline in one homogeneous dielectric has eps_eff = er exactly;
the microstrip's eps_eff is scikit-rf's MLine (Hammerstad-Jensen, quasi-static); c from scipy.constants.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from openpyxl import load_workbook
from scipy.constants import c as C

MIL = 25.4e-6

STACKUP = """\
name = "timing test, 4 layers"
units = "mm"

[[layers]]
type = "signal"
name = "TOP"
thickness = "35um"

[[layers]]
type = "dielectric"
thickness = 0.2
er = 4.3

[[layers]]
type = "plane"
name = "GND"
copper = "1oz"

[[layers]]
type = "dielectric"
thickness = 0.3
er = 4.3

[[layers]]
type = "signal"
name = "IN"
copper = "0.5oz"

[[layers]]
type = "dielectric"
thickness = 0.3
er = 4.3

[[layers]]
type = "plane"
name = "VCC"
copper = "1oz"
"""

TRACES = """\
Net;Layer;Length [mil];Width [mil];Gap [mil];Pair;Rise time;Match group
BUS_A;TOP;2000;12;;;5ns;
BUS_B;IN;2000;5;;;5ns;
STROBE;TOP;1000;12;;;5ns;=bus+1
STROBE;IN;1000;5;;;5ns;
P_P;IN;1500;5;6;P_N;5ns;
P_N;IN;1540;5;6;P_P;5ns;
"""

RULES = """\
[[net_class]]
name = "BUS"
match = ["BUS_*"]
max_delay = "340ps"

[[match_group]]
name = "=BUS+1"
match = ["BUS_*"]
max_skew = "10ps"
"""


def _microstrip_eps(w, h, t, er):
    skrf = pytest.importorskip("skrf")
    from skrf.media import MLine
    m = MLine(frequency=skrf.Frequency(1, 1, 1, "MHz"), w=w, h=h, t=t, ep_r=er, disp="none",
              diel="frequencyinvariant", rho=1.7e-8, rough=0.0)
    return float(np.real(np.ravel(m.ep_reff)[0]))


@pytest.mark.filterwarnings("ignore")
def test_match_group_pair_and_budget_end_to_end(run, board, tmp_path):
    tr, st, rl = board(TRACES, stackup=STACKUP, rules=RULES)
    js, xl = tmp_path / "out.json", tmp_path / "out.xlsx"
    code, out, err = run("review", tr, "--stackup", st, "--rules", rl, "--solver", "formula", "--json", js,
                         "--out", xl)
    assert code == 1, err            # delay-skew and delay-budget are errors
    data = json.loads(js.read_text(encoding="utf-8"))
    nets = {n["net"]: n for n in data["nets"]}

    e_ms = _microstrip_eps(12 * MIL, 0.2e-3, 35e-6, 4.3)
    e_sl = 4.3
    td_a = 2000 * MIL * math.sqrt(e_ms) / C
    td_b = 2000 * MIL * math.sqrt(e_sl) / C
    td_strobe = 1000 * MIL * (math.sqrt(e_ms) + math.sqrt(e_sl)) / C      # a net on two layers
    # vias (README "Vias and return paths"): a net ending on IN has an escape via from TOP at that end, and
    # each via's barrel (middle of TOP to middle of IN, in er 4.3) adds length * sqrt(er) / c; BUS_B has two
    # escapes, STROBE a layer change and one escape
    barrel = (35e-6 / 2 + 0.2e-3 + 35e-6 + 0.3e-3 + 17.5e-6 / 2) * math.sqrt(4.3) / C
    td_b += 2 * barrel
    td_strobe += 2 * barrel
    assert nets["BUS_A"]["delay_ps"] == pytest.approx(td_a * 1e12, rel=1e-3)
    assert nets["BUS_B"]["delay_ps"] == pytest.approx(td_b * 1e12, rel=1e-4)
    assert nets["STROBE"]["delay_ps"] == pytest.approx(td_strobe * 1e12, rel=1e-3)
    assert nets["BUS_A"]["length_mm"] == nets["BUS_B"]["length_mm"] == nets["STROBE"]["length_mm"]

    (g,) = data["match_groups"]
    assert g["name"] == "=BUS+1" and g["nets"] == ["BUS_A", "BUS_B", "STROBE"] and g["reference"] is None
    assert g["limit_ps"] == pytest.approx(10.0) and g["main_layer"] in ("TOP", "IN")
    assert g["min_delay_ps"] == pytest.approx(td_a * 1e12, rel=1e-3)
    assert g["max_delay_ps"] == pytest.approx(td_b * 1e12, rel=1e-4)
    assert g["skew_ps"] == pytest.approx((td_b - td_a) * 1e12, rel=1e-2)   # equal lengths, 40 ps apart

    by_rule = {}
    for f in data["findings"]:
        by_rule.setdefault(f["rule"], []).append(f)
    (skew,) = by_rule["delay-skew"]
    assert skew["severity"] == "error" and skew["value"] == pytest.approx(g["skew_ps"], rel=1e-5)
    # the row of the net furthest from the median (STROBE's); with the vias' barrels that is BUS_A
    far_row = 2 if abs(td_a - td_strobe) > abs(td_b - td_strobe) else 3
    assert skew["key"] == "delay-skew|=BUS+1" and skew["row"] == far_row
    (pair,) = by_rule["pair-skew"]
    want = 40 * MIL * math.sqrt(e_sl) / C * 1e12                             # 7.0 ps on the stripline
    assert pair["value"] == pytest.approx(want, rel=1e-4) and pair["net"] == "P_P & P_N" and pair["row"] == 7
    assert nets["P_N"]["pair_skew_ps"] == pytest.approx(want, rel=1e-3) and nets["BUS_A"]["pair_skew_ps"] is None
    (budget,) = by_rule["delay-budget"]
    assert budget["net"] == "BUS_B" and budget["limit"] == pytest.approx(340.0)

    wb = load_workbook(xl, read_only=True)
    cells = [c for r in wb["Timing"].iter_rows() for c in r if c.value is not None]
    names = [c for c in cells if c.value == "=BUS+1"]
    assert len(names) == 3 and all(c.data_type == "s" for c in names)        # stored as text, not a formula
    (pair_row,) = [r for r in wb["Timing"].iter_rows(values_only=True) if r[1] == "P_P & P_N"]
    assert pair_row[3] == pytest.approx(nets["P_N"]["delay_ps"], rel=1e-5)           # the slower leg
    assert pair_row[7] == pytest.approx(want, rel=1e-4) and pair_row[11] == "yes"


def test_unknown_match_group_in_trace_list_names_row_and_column(run, board):
    tr, st, rl = board(TRACES.replace("=bus+1", "DDR"), stackup=STACKUP, rules=RULES)
    code, _, err = run("review", tr, "--stackup", st, "--rules", rl, "--solver", "formula")
    assert code == 2 and "row 4" in err and "match_group" in err and "'DDR' is not in the rules" in err
    assert "Traceback" not in err


def test_demo_board_shows_each_timing_finding():
    # the demo's timing block: a matched bus with one long net and one on a faster layer, a skewed pair
    from sicheck.resources import default_rules_path, demo_dir
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    d = demo_dir()
    rv = build_review(read_traces(d / "traces.csv"), load_stackup(d / "stackup.toml"),
                      load_rule_sets([default_rules_path(), d / "rules.toml"]), waveforms=False)
    got = {(f.rule, f.net) for f in rv.findings}
    assert {("delay-skew", "TDC bus"), ("delay-budget", "TDC_D3"), ("pair-skew", "HEAD_SYNC_P & HEAD_SYNC_N")} <= got
    (skew,) = [f for f in rv.findings if f.rule == "delay-skew"]
    assert "TDC_D3 +" in skew.message and "TDC_D1 -" in skew.message      # too long; same length, faster layer
