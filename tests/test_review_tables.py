"""The review's table steps in their array forms give what the forms they replaced gave.

The replaced forms are written out here as the reference: pandas' factorize of (from, to) pairs, groupby
sums and least values by net name, and the advice columns made inside the net table then marked by
on_die.mark_nets (the review now works them out while the waveform stage runs).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from check_tables import cls, rules, segments
from sicheck.on_die import mark_nets
from sicheck.review import _advice_columns, _net_table
from sicheck.via_table import _pairs, net_via_summary

LAYER = st.sampled_from(["", "TOP", "IN3", "in3", "BOT"])


@settings(max_examples=80, deadline=None)
@given(st.lists(st.tuples(LAYER, LAYER), min_size=1, max_size=12))
def test_pairs_are_pandas_factorize_of_the_pairs(rows):
    a = np.array([x for x, _ in rows], dtype=object)
    b = np.array([y for _, y in rows], dtype=object)
    codes, pairs = _pairs(a, b)
    want_codes, want_pairs = pd.factorize(pd.MultiIndex.from_arrays([a, b]))
    assert codes.tolist() == want_codes.tolist()
    assert pairs == list(want_pairs)


def _summary_by_name(nets, vias):
    """The former form: groupby on the net names, looked up by name."""
    count = vias.groupby("net", sort=False)["count"].sum()
    fres = vias[np.isfinite(vias["stub_resonance"])].groupby("net", sort=False)["stub_resonance"].min()
    n = nets["net"]
    return n.map(count).fillna(0).to_numpy(int), n.map(fres).to_numpy(float)


@settings(max_examples=80, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["A", "B", "C", "gone"]), st.integers(1, 5),
                          st.sampled_from([1e9, 2.5e9, math.inf, math.nan, 7e8])), min_size=1, max_size=12),
       st.permutations(["A", "B", "C", "D"]))
def test_net_via_summary_is_the_groupby_by_name(rows, order):
    nets = pd.DataFrame({"net": order}).astype({"net": "str"})
    vias = pd.DataFrame(rows, columns=["net", "count", "stub_resonance"]).astype({"net": "str"})
    got, want = net_via_summary(nets, vias), _summary_by_name(nets, vias)
    assert got[0].tolist() == want[0].tolist() and got[0].dtype == want[0].dtype
    np.testing.assert_array_equal(got[1], want[1])          # NaN where a net has no finite resonance
    assert got[1].dtype == want[1].dtype


def _board(drivers: bool):
    """Single nets and a pair, long enough to need termination, one class terminated on the die."""
    seg = segments({"net": "A", "length_mm": 80.0, "driver_ohm": 20.0 if drivers else math.nan},
                   {"net": "B", "length_mm": 90.0, "net_class": "ODT", "driver_ohm": 15.0},
                   {"net": "C", "length_mm": 5.0},
                   {"net": "D_P", "pair": "D_N", "length_mm": 70.0, "net_class": "ODT"},
                   {"net": "E_P", "pair": "E_N", "length_mm": 75.0},
                   {"net": "F", "length_mm": 60.0, "driver_ohm": 80.0})       # driver above Z0: no series part
    return seg, rules([cls("ODT", on_die_ohm=50.0)])


def test_advice_worked_out_apart_is_the_net_tables_then_marked():
    for drivers in (True, False):        # without drivers, only the on-die net has a series value to drop
        seg, rs = _board(drivers)
        whole = mark_nets(_net_table(seg, rs), rs)
        placeholders = mark_nets(_net_table(seg, rs, advise=False), rs)
        assert list(placeholders.columns) == list(whole.columns)
        cols = _advice_columns(placeholders, rs)
        for c in ("series_ohm", "advice", "proposal"):
            pd.testing.assert_series_equal(cols[c], whole[c], check_exact=True)
            placeholders[c] = cols[c]
        pd.testing.assert_frame_equal(placeholders, whole, check_exact=True)
        assert whole["advice"].str.contains("terminated on the die").sum() == 2
        assert whole["proposal"].str.contains("ohm series").any() == drivers


def _review(board, text: str, rules: str | None = None):
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    paths = board(text, rules=rules)
    rs = load_rule_sets(paths[2:] or None)
    return build_review(read_traces(paths[0], aliases=dict(rs.columns)), load_stackup(paths[1]), rs, waveforms=False)


def test_a_net_paired_with_itself_is_named_with_its_first_such_row(board):
    import pytest

    from sicheck.errors import InputError
    text = ("net,layer,length,width,rise_time,pair,gap\nA,L1,10mm,0.15mm,300ps,,\nB,L1,10mm,0.15mm,300ps,C,0.15mm\n"
            "D,L1,10mm,0.15mm,300ps,D,0.15mm\nE,L1,10mm,0.15mm,300ps,E,0.15mm\n")
    with pytest.raises(InputError) as e:
        _review(board, text)
    assert "net 'D' is paired with itself" in str(e.value) and e.value.row == 4


def test_the_first_net_without_a_rise_time_is_named_at_its_first_row(board):
    import pytest

    from sicheck.errors import InputError
    text = ("net,layer,length,width,rise_time\nA,L1,10mm,0.15mm,300ps\nB,L1,10mm,0.15mm,\nC,L1,10mm,0.15mm,\n"
            "A,L1,10mm,0.15mm,\nB,L1,10mm,0.15mm,\n")
    with pytest.raises(InputError) as e:
        _review(board, text)
    assert "net 'B' has no rise time" in str(e.value) and e.value.row == 3


def test_each_row_works_at_its_class_freq_else_its_nets_knee(board):
    rules = '[[net_class]]\nname = "FAST"\nmatch = ["F*"]\nfreq = "5GHz"\n[[net_class]]\nname = "SLOW"\nmatch = ["S*"]\n'
    text = ("net,layer,length,width,rise_time\nF1,L1,10mm,0.15mm,100ps\nS1,L1,10mm,0.15mm,400ps\n"
            "S1,L3,10mm,0.15mm,250ps\nN1,L1,10mm,0.15mm,1ns\n")
    seg = _review(board, text, rules).segments
    assert seg["freq"].tolist() == [5e9, 0.5 / 250e-12, 0.5 / 250e-12, 0.5 / 1e-9]
