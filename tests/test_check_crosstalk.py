"""crosstalk on hand-made tables (no stackup, no solver): the figures are given, the check compares them."""

from __future__ import annotations

import pandas as pd
import pytest

from check_tables import cls, rules, segments
from sicheck.checks import ReviewContext, by_id, run_checks
from sicheck.crosstalk_review import ANY_NEIGHBOUR, TRACE_LIST_NEIGHBOUR as NEIGHBOUR, CrosstalkTables



def _seg(*figures):
    """Segments with crosstalk figures: (net, next %, fext %[, pair, aggressor]) each."""
    rows = []
    for f in figures:
        net, ne, fe = f[:3]
        pair = f[3] if len(f) > 3 else ""
        rows.append({"net": net, "pair": pair, "net_class": "FAST", "length_mm": 40.0, "rise_ps": 200.0})
    seg = segments(*rows)
    seg["spacing"] = 0.2e-3
    seg["parallel"] = seg["length"]
    seg["next_pct"] = [f[1] for f in figures]
    seg["fext_pct"] = [f[2] for f in figures]
    seg["xt_aggressor"] = [f[4] if len(f) > 4 else ANY_NEIGHBOUR for f in figures]
    seg["xt_rise"] = seg["rise_time"]
    return seg


def _findings(seg, rs, tables=None):
    from sicheck.review import _net_table
    ctx = ReviewContext(segments=seg, nets=_net_table(seg, rs), rules=rs, crosstalk=tables)
    return run_checks(ctx, [by_id("crosstalk")])


def test_crosstalk_passes_within_the_default_budgets():
    # defaults: 5 % at each end (common practice)
    assert _findings(_seg(("A", 4.9, -4.9), ("B", 1.0, 0.0)), rules([cls("FAST")])) == []


def test_crosstalk_passes_without_any_spacing():
    seg = segments({"net": "A"})
    assert _findings(seg, rules()) == []
    seg = _seg(("A", 9.0, -9.0))
    seg["next_pct"] = float("nan")      # no spacing on this segment: no figure, no finding
    assert _findings(seg, rules([cls("FAST")])) == []


def test_crosstalk_fails_on_the_near_end_once_per_net_at_its_worst_segment():
    seg = _seg(("A", 6.0, -1.0), ("A", 8.0, -1.0), ("B", 2.0, 0.5))
    (f,) = _findings(seg, rules([cls("FAST")]))
    assert (f.rule, f.net, f.severity, f.unit) == ("crosstalk", "A", "warning", "%")
    assert (f.value, f.limit) == (8.0, 5.0) and f.row == 3 and f.key == "crosstalk|A"
    assert "NEXT 8.00 % (budget 5 %)" in f.message and ANY_NEIGHBOUR in f.message
    assert "victim's own edge" in f.message and "200 ps" in f.message


def test_crosstalk_fails_on_the_far_end_with_its_magnitude():
    (f,) = _findings(_seg(("A", 1.0, -7.5, "", NEIGHBOUR)), rules([cls("FAST")]))
    assert (f.value, f.limit) == (7.5, 5.0)
    assert "FEXT -7.50 %" in f.message and NEIGHBOUR in f.message


def test_crosstalk_fails_once_for_a_pair_at_its_class_spacing():
    seg = _seg(("D_P", 6.0, 0.0, "D_N"), ("D_N", 6.0, 0.0, "D_P"))
    (f,) = _findings(seg, rules([cls("FAST")]))
    assert f.net == "D_P & D_N" and f.key == "crosstalk|D_N & D_P"


def test_crosstalk_fails_on_a_listed_coupling_with_the_aggressors_edge():
    seg = _seg(("A", 1.0, 0.0))
    cp = pd.DataFrame({"row": [2], "victim": ["A"], "aggressor": ["CLK"], "layer": ["L1"], "width": [0.15e-3],
                       "spacing": [0.1e-3], "length": [0.03], "rise": [150e-12], "edge_from": ["aggressor"],
                       "kb": [0.09], "kf": [-0.05], "next_pct": [9.0], "fext_pct": [-2.0]})
    tables = CrosstalkTables(sections=pd.DataFrame(columns=["layer", "width", "spacing", "kb", "z_line"]),
                             couplings=cp)
    (f,) = _findings(seg, rules([cls("FAST")]), tables)
    assert f.key == "crosstalk|A|CLK|L1" and f.value == 9.0
    assert "next to CLK" in f.message and "aggressor's edge" in f.message and "150 ps" in f.message


def test_crosstalk_off():
    seg = _seg(("A", 50.0, -50.0))
    assert _findings(seg, rules([cls("FAST")], severity={"crosstalk": "off"})) == []


def test_crosstalk_param_budgets_per_class_and_from_the_crosstalk_table():
    seg = _seg(("A", 4.0, -3.0))
    assert _findings(seg, rules([cls("FAST")])) == []
    (f,) = _findings(seg, rules([cls("FAST", max_next_pct=3.5)]))
    assert f.limit == 3.5 and "budget 3.5 %" in f.message
    (f,) = _findings(seg, rules([cls("FAST")], max_fext_pct=2.0))          # [crosstalk] max_fext_pct = 2
    assert (f.value, f.limit) == (3.0, 2.0)
    # the class's own value wins over the rules' [crosstalk] table
    assert _findings(seg, rules([cls("FAST", max_fext_pct=4.0)], max_fext_pct=2.0)) == []


def test_crosstalk_param_spacing_and_budgets_read_from_a_rules_file(tmp_path):
    from sicheck.errors import InputError
    from sicheck.rules import load_rule_sets
    p = tmp_path / "r.toml"
    p.write_text('[crosstalk]\nmax_next_pct = 4\n\n[[net_class]]\nname = "CLK"\nmatch = ["CLK*"]\n'
                 'spacing = "8mil"\nmax_fext_pct = 2.5\n')
    rs = load_rule_sets([None, p])
    c = rs.class_named("CLK")
    assert c.spacing == pytest.approx(8 * 25.4e-6) and c.max_fext_pct == 2.5
    assert rs.value("max_next_pct", c) == 4.0 and rs.value("max_fext_pct") == 5.0
    p.write_text('[[net_class]]\nname = "CLK"\nspacing = "0.2"\n')       # no unit: an error, not a guess
    with pytest.raises(InputError, match="spacing"):
        load_rule_sets([None, p])
    p.write_text('[crosstalk]\nmax_next_pct = 300\n')
    with pytest.raises(InputError, match="max_next_pct"):
        load_rule_sets([None, p])
