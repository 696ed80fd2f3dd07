"""delay-skew, pair-skew and delay-budget on hand-made tables (no solver).

Delays follow the closed form TD = length * sqrt(eps_eff) / c (a TEM line; any transmission-line text, e.g.
Pozar, Microwave Engineering): at eps_eff 4, 1 mm is 6.671 ps; at eps_eff 3, 5.778 ps.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from check_tables import C0, cls, context, findings, rules, segments
from sicheck.skew import MatchGroup, group_timing

PS_PER_MM_4 = 1e-3 * 2.0 / C0 * 1e12          # 6.671 ps per mm at eps_eff 4


def td_ps(length_mm: float, eps: float = 4.0) -> float:
    return length_mm * 1e-3 * math.sqrt(eps) / C0 * 1e12


def group(name="G", match=("D*",), skew_ps=10.0, reference=None):
    return MatchGroup(name=name, max_skew=skew_ps * 1e-12, match=tuple(match), reference=reference,
                      origin="rules.toml, line 1")


# ---------------------------------------------------------------- delay-skew

def test_delay_skew_passes_within_limit():
    seg = segments({"net": "D0", "length_mm": 50.0}, {"net": "D1", "length_mm": 51.0}, {"net": "X", "length_mm": 90})
    assert findings(seg, rules(match_groups=[group()]), "delay-skew") == []


def test_delay_skew_fails_on_long_net():
    seg = segments({"net": "D0", "length_mm": 50.0}, {"net": "D1", "length_mm": 50.0},
                   {"net": "D2", "length_mm": 55.0, "row": 9}, {"net": "CLK", "length_mm": 200.0})
    (f,) = findings(seg, rules(match_groups=[group()]), "delay-skew")
    assert f.severity == "error" and f.unit == "ps" and f.limit == pytest.approx(10.0)
    assert f.value == pytest.approx(td_ps(5.0), rel=1e-9)          # CLK matches no pattern: not in the group
    assert f.net == "G" and f.key == "delay-skew|G" and f.row == 9 and f.layer == "L1"
    assert "D2 +33.4 ps (+5.00 mm)" in f.message and "3 nets" in f.message


def test_delay_skew_fails_on_delay_with_equal_lengths():
    # equal lengths on layers of different eps_eff: lengths match, delays do not (TD = l sqrt(eps_eff) / c)
    seg = segments({"net": "D0", "layer": "TOP", "eps_eff": 3.0, "length_mm": 50.0},
                   {"net": "D1", "layer": "IN2", "eps_eff": 4.0, "length_mm": 50.0})
    (f,) = findings(seg, rules(match_groups=[group()]), "delay-skew")
    assert f.value == pytest.approx(td_ps(50, 4.0) - td_ps(50, 3.0), rel=1e-9)      # 44.7 ps


def test_delay_skew_net_on_two_layers_uses_each_segments_layer():
    seg = segments({"net": "D0", "layer": "IN2", "length_mm": 50.0},
                   {"net": "D1", "layer": "TOP", "eps_eff": 3.0, "length_mm": 25.0},
                   {"net": "D1", "layer": "IN2", "length_mm": 25.0})
    (gt,) = group_timing(seg, context(seg, rules()).nets, [group()])
    assert gt.delays[1] * 1e12 == pytest.approx(td_ps(25, 3.0) + td_ps(25, 4.0), rel=1e-12)
    assert gt.main_layer == "IN2" and gt.fastest == "D1" and gt.slowest == "D0"
    assert gt.skew_length == pytest.approx(gt.skew / (PS_PER_MM_4 * 1e-9), rel=1e-9)
    (f,) = findings(seg, rules(match_groups=[group(skew_ps=5.0)]), "delay-skew")
    assert f.value == pytest.approx(td_ps(25, 4.0) - td_ps(25, 3.0), rel=1e-9)


def test_delay_skew_reference_measures_distance_from_it():
    seg = segments({"net": "STB", "length_mm": 50.0}, {"net": "D0", "length_mm": 51.0},
                   {"net": "D1", "length_mm": 49.0})
    # spread 13.3 ps, but each net is only 6.7 ps from the strobe
    assert findings(seg, rules(match_groups=[group(reference="STB")]), "delay-skew") == []
    (f,) = findings(seg, rules(match_groups=[group()]), "delay-skew")
    assert f.value == pytest.approx(td_ps(2.0))
    (f,) = findings(seg, rules(match_groups=[group(match=("D*", "STB"), reference="D1")]), "delay-skew")
    assert f.value == pytest.approx(td_ps(2.0)) and "reference D1" in f.message and "D0 +13.3 ps" in f.message


def test_delay_skew_column_and_pair_legs_count_as_nets():
    seg = segments({"net": "A_P", "pair": "A_N", "length_mm": 50.0, "match_group": "G"},
                   {"net": "A_N", "pair": "A_P", "length_mm": 52.0, "match_group": "G"},
                   {"net": "B", "length_mm": 50.0, "match_group": "G"}, {"net": "C", "length_mm": 80.0})
    (f,) = findings(seg, rules(match_groups=[group(match=())]), "delay-skew")
    assert f.value == pytest.approx(td_ps(2.0)) and "(3 nets" in f.message and "A_N" in f.message


def test_delay_skew_notes_missing_members_and_reference():
    seg = segments({"net": "D0"}, {"net": "D1"})
    fs = findings(seg, rules(match_groups=[group(name="Q", match=("Q*",)), group(reference="STROBE")]),
                  "delay-skew")
    assert [(f.severity, f.key) for f in fs] == [("info", "delay-skew|Q|members"), ("info", "delay-skew|G|reference")]


def test_delay_skew_max_skew_is_its_parameter():
    seg = segments({"net": "D0", "length_mm": 50.0}, {"net": "D1", "length_mm": 52.0})      # 13.3 ps
    assert len(findings(seg, rules(match_groups=[group(skew_ps=13.0)]), "delay-skew")) == 1
    assert findings(seg, rules(match_groups=[group(skew_ps=14.0)]), "delay-skew") == []


def test_delay_skew_off():
    seg = segments({"net": "D0", "length_mm": 50.0}, {"net": "D1", "length_mm": 60.0})
    assert findings(seg, rules(match_groups=[group()], severity={"delay-skew": "off"}), "delay-skew") == []


# ---------------------------------------------------------------- pair-skew

def _pair(p_mm, n_mm, **kw):
    return segments({"net": "D_P", "pair": "D_N", "length_mm": p_mm, "row": 2, **kw},
                    {"net": "D_N", "pair": "D_P", "length_mm": n_mm, "row": 3, **kw})


def test_pair_skew_passes_within_default():
    assert findings(_pair(50.0, 50.5), rules(), "pair-skew") == []          # 3.3 ps < 5 ps


def test_pair_skew_fails_once_per_pair():
    (f,) = findings(_pair(50.0, 51.0), rules(), "pair-skew")                 # 6.7 ps > 5 ps
    assert f.severity == "warning" and f.key == "pair-skew|D_N & D_P" and f.net == "D_P & D_N" and f.row == 3
    assert f.value == pytest.approx(td_ps(1.0)) and f.limit == pytest.approx(5.0) and f.unit == "ps"
    assert "lengthen D_P" in f.message and "1.00 mm" in f.message


def test_pair_skew_legs_on_different_layers():
    # equal lengths, the N leg partly on a slower layer
    seg = segments({"net": "D_P", "pair": "D_N", "length_mm": 40.0, "eps_eff": 3.0},
                   {"net": "D_N", "pair": "D_P", "length_mm": 20.0, "eps_eff": 3.0},
                   {"net": "D_N", "pair": "D_P", "length_mm": 20.0, "eps_eff": 4.0})
    (f,) = findings(seg, rules(), "pair-skew")
    assert f.value == pytest.approx(td_ps(20, 4.0) - td_ps(20, 3.0), rel=1e-9)


def test_pair_skew_leg_listed_only_through_partner_is_not_checked():
    seg = segments({"net": "D_P", "pair": "D_N", "length_mm": 50.0})
    assert findings(seg, rules(), "pair-skew") == []


def test_pair_skew_params():
    seg = _pair(50.0, 50.5)
    assert len(findings(seg, rules(max_pair_skew=2e-12), "pair-skew")) == 1
    seg = _pair(50.0, 51.0, net_class="SLOW")
    assert findings(seg, rules([cls("SLOW", max_pair_skew=10e-12)]), "pair-skew") == []
    (f,) = findings(seg, rules([cls("SLOW", max_pair_skew=1e-12)], max_pair_skew=100e-12), "pair-skew")
    assert f.limit == pytest.approx(1.0)


def test_pair_skew_off():
    assert findings(_pair(50.0, 60.0), rules(severity={"pair-skew": "off"}), "pair-skew") == []


# ---------------------------------------------------------------- delay-budget

def test_delay_budget_passes_under_budget_and_without_one():
    seg = segments({"net": "A", "length_mm": 50.0, "net_class": "BUS"}, {"net": "B", "length_mm": 500.0})
    assert findings(seg, rules([cls("BUS", max_delay=400e-12)]), "delay-budget") == []     # 333.6 ps; B: no budget


def test_delay_budget_fails_over_budget():
    seg = segments({"net": "A", "length_mm": 30.0, "net_class": "BUS", "row": 5},
                   {"net": "A", "length_mm": 40.0, "net_class": "BUS", "eps_eff": 3.0})
    (f,) = findings(seg, rules([cls("BUS", max_delay=400e-12)]), "delay-budget")
    want = td_ps(30.0) + td_ps(40.0, 3.0)
    assert f.severity == "error" and f.value == pytest.approx(want) and f.limit == pytest.approx(400.0)
    assert f.key == "delay-budget|A" and f.row == 5 and "class BUS" in f.message


def test_delay_budget_pair_once_by_slower_leg():
    seg = _pair(60.0, 62.0, net_class="BUS")
    (f,) = findings(seg, rules([cls("BUS", max_delay=400e-12)]), "delay-budget")
    assert f.value == pytest.approx(td_ps(62.0)) and f.key == "delay-budget|D_N & D_P"


def test_delay_budget_off():
    seg = segments({"net": "A", "length_mm": 70.0, "net_class": "BUS"})
    assert findings(seg, rules([cls("BUS", max_delay=400e-12)], severity={"delay-budget": "off"}),
                    "delay-budget") == []


# ---------------------------------------------------------------- invariants of the group table

_nets = st.lists(st.tuples(st.floats(1.0, 200.0), st.sampled_from([3.0, 3.5, 4.2])), min_size=2, max_size=6)


@settings(max_examples=25, deadline=None)
@given(nets=_nets, ref=st.booleans(), k=st.floats(0.5, 3.0), seed=st.randoms(use_true_random=False))
def test_group_skew_invariants(nets, ref, k, seed):
    rows = [{"net": f"D{i}", "length_mm": ln, "eps_eff": e} for i, (ln, e) in enumerate(nets)]

    def skew(rws):
        seg = segments(*rws)
        (gt,) = group_timing(seg, context(seg, rules()).nets, [group(reference="D0" if ref else None)])
        return gt
    gt = skew(rows)
    spread = gt.max_delay - gt.min_delay
    assert gt.skew >= 0 and gt.min_delay <= gt.max_delay
    if ref:      # distance from one member: at most the spread, at least half of it
        assert spread / 2 - 1e-18 <= gt.skew <= spread + 1e-18
    else:
        assert gt.skew == pytest.approx(spread, rel=1e-12, abs=1e-18)
    shuffled = list(rows)
    seed.shuffle(shuffled)
    assert skew(shuffled).skew == pytest.approx(gt.skew, rel=1e-12, abs=1e-18)     # row order does not matter
    scaled = [{**r, "length_mm": r["length_mm"] * k} for r in rows]
    assert skew(scaled).skew == pytest.approx(gt.skew * k, rel=1e-9, abs=1e-18)    # TD is linear in length
