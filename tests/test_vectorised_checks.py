"""The checks' column-at-once loops give what the row-at-a-time loops they replaced gave.

Edge cases the hand-made boards elsewhere do not reach: empty tables, one row, NaN values, ties in delay.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from check_tables import cls, context, findings, needing_termination_longest_first, rules, segments
from sicheck.checks.engine import pair_id, plain_rows
from sicheck.checks.length import lines_longest_first

TEXT = st.sampled_from(["", "N1", "N2", "CLK", "D_P", "D_N"])
FLOAT = st.one_of(st.floats(-1e3, 1e3), st.just(math.nan), st.just(math.inf))


def _same(a, b) -> bool:
    return a == b or (isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(TEXT, FLOAT, st.integers(-5, 5), st.booleans(), st.sampled_from([None, 1.5, "x"])),
                max_size=6))
def test_plain_rows_is_itertuples(rows):
    df = pd.DataFrame(rows, columns=["net", "Length [mm]", "count", "mirrored", "misc"])
    df["net"] = df["net"].astype("str")            # the review's tables hold pandas string columns
    got, want = list(plain_rows(df)), list(df.itertuples(index=False))
    assert len(got) == len(want)
    for g, w in zip(got, want):
        assert g._fields == w._fields
        assert all(_same(x, y) and type(x) is type(y) for x, y in zip(g, w))


def test_plain_rows_of_a_table_without_columns():
    assert list(plain_rows(pd.DataFrame(index=range(2)))) == list(pd.DataFrame(index=range(2)).itertuples(index=False))


def _longest_first_row_by_row(nets):
    """The former loop: sort the whole table, skip lumped nets, a pair once."""
    return [r.net for r in needing_termination_longest_first(nets)]


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["", "A", "B", "C"]),
                          st.one_of(st.sampled_from([1e-9, 2e-9]), st.just(math.nan)),
                          st.sampled_from(["not-needed", "recommended", "required"])), max_size=8))
def test_lines_longest_first_keeps_the_sorted_order(rows):
    nets = pd.DataFrame([{"net": f"N{i}", "pair": p, "delay": d, "termination": t}
                         for i, (p, d, t) in enumerate(rows)], columns=["net", "pair", "delay", "termination"])
    nets = nets.astype({"net": "str", "pair": "str", "termination": "str"})
    assert [r.net for r in lines_longest_first(nets)] == _longest_first_row_by_row(nets)


def _run(ctx, rule):
    from sicheck.checks import by_id, run_checks
    return run_checks(ctx, [by_id(rule)])


def test_loss_budget_reports_an_unknown_loss_and_a_single_segment_net():
    seg = segments({"net": "A", "net_class": "LV", "loss_db": 1.0}, {"net": "A", "net_class": "LV", "loss_db": 1.0},
                   {"net": "B", "net_class": "LV", "loss_db": 2.0},
                   {"net": "C", "net_class": "LV", "loss_db": 0.5})
    ctx = context(seg, rules([cls("LV", max_loss_db=1.5)]))
    ctx.nets.loc[ctx.nets["net"] == "A", "loss_db"] = np.nan
    got = _run(ctx, "loss-budget")
    assert [f.net for f in got] == ["A", "B"]           # NaN is not within the budget, as before
    assert math.isnan(got[0].value) and got[1].value == 2.0 and got[1].row == 4


def test_delay_budget_single_segment_and_nan_delay():
    seg = segments({"net": "A", "net_class": "FAST", "length_mm": 100.0},
                   {"net": "B", "net_class": "FAST", "length_mm": 1.0},
                   {"net": "C", "net_class": "FAST", "length_mm": 1.0})
    ctx = context(seg, rules([cls("FAST", max_delay=100e-12)]))
    ctx.nets.loc[ctx.nets["net"] == "B", "delay"] = np.nan
    got = _run(ctx, "delay-budget")
    assert [f.net for f in got] == ["A", "B"]     # a NaN delay is not within the budget either (sorted last)


def test_budgets_on_a_board_whose_class_sets_none():
    seg = segments({"net": "A", "net_class": "LV", "loss_db": 9.0, "length_mm": 500.0})
    assert findings(seg, rules([cls("LV")]), "loss-budget") == []
    assert findings(seg, rules([cls("LV")]), "delay-budget") == []


def _grouped_via_by_via(vias):
    """The former loop: one dict lookup per via."""
    groups: dict = {}
    for r in vias.itertuples(index=False):
        ident, label = (pair_id(r.net, r.pair), f"{r.net} & {r.pair}") if r.pair else (r.net, r.net)
        a, b = r.from_layer.lower(), r.to_layer.lower()
        g = groups.setdefault((ident, r.how == "export", (a, b) if a <= b else (b, a)), [ident, label, []])
        g[2].append(r)
    for ident, label, rows in groups.values():
        legs = {r.net for r in rows}
        one = [r for r in rows if r.net == min(legs)] if len(legs) > 1 else rows
        yield ident, label, one[0], one


@settings(max_examples=80, deadline=None)
@given(st.lists(st.tuples(st.sampled_from([("A", ""), ("D_P", "D_N"), ("D_N", "D_P"), ("B", "A")]),
                          st.sampled_from(["TOP", "In1", "in1", "BOT"]), st.sampled_from(["TOP", "In1", "BOT"]),
                          st.sampled_from(["layer change", "escape", "export"])), max_size=10))
def test_grouped_vias_as_the_via_by_via_loop(rows):
    from sicheck.checks.vias import grouped
    vias = pd.DataFrame([{"net": n, "pair": p, "row": i + 2, "from_layer": a, "to_layer": b, "how": h, "count": 1}
                         for i, ((n, p), a, b, h) in enumerate(rows)],
                        columns=["net", "pair", "row", "from_layer", "to_layer", "how", "count"])
    vias = vias.astype({c: "str" for c in ("net", "pair", "from_layer", "to_layer", "how")})
    got, want = list(grouped(vias)), list(_grouped_via_by_via(vias))
    assert [(i, l, tuple(f), [tuple(r) for r in rs]) for i, l, f, rs in got] == \
           [(i, l, tuple(f), [tuple(r) for r in rs]) for i, l, f, rs in want]


def _via_rows_row_by_row(seg, st):
    """The former via table for nets in series (no from/to): (net, row, from, to, how, count, barrel delay)."""
    from sicheck.via_table import component_layer, inner_layers, transition
    comp, inner, out, order = component_layer(st), inner_layers(st), [], {}
    for i, n in enumerate(seg["net"]):
        order.setdefault(n, []).append(i)
    lay, rows, extra = seg["layer"].tolist(), seg["row"].tolist(), seg["vias"].tolist()
    for n, idx in order.items():
        ls = [lay[i] for i in idx]
        if ls[0] in inner:
            out.append((n, rows[idx[0]], comp, ls[0], "escape", 1, transition(st, comp, ls[0]).barrel_delay))
        for k in range(1, len(idx)):
            if ls[k] != ls[k - 1]:
                out.append((n, rows[idx[k]], ls[k - 1], ls[k], "layer change", 1,
                            transition(st, ls[k - 1], ls[k]).barrel_delay))
        if ls[-1] in inner:
            out.append((n, rows[idx[-1]], ls[-1], comp, "escape", 1, transition(st, ls[-1], comp).barrel_delay))
        for i in idx:
            if extra[i] > 0:
                to = comp if lay[i].lower() == comp.lower() else lay[i]
                out.append((n, rows[i], comp, to, "export", int(extra[i]), 0.0))
    return out


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["A", "B", "C"]), st.sampled_from(["TOP", "IN3", "IN4", "BOT"]),
                          st.sampled_from([0.0, 0.0, 1.0, 3.0])), max_size=12))
def test_via_table_as_the_row_by_row_loop(rows):
    from sicheck.resources import demo_dir
    from sicheck.stackup import load_stackup
    from sicheck.via_table import via_table
    stk = load_stackup(demo_dir() / "stackup.toml")
    seg = pd.DataFrame([{"net": n, "pair": "", "row": i + 2, "layer": l, "freq": 1e9, "vias": v, "mirrored": False}
                        for i, (n, l, v) in enumerate(rows)],
                       columns=["net", "pair", "row", "layer", "freq", "vias", "mirrored"])
    seg = seg.astype({"net": "str", "pair": "str", "layer": "str"})
    got = via_table(seg, stk)
    want = _via_rows_row_by_row(seg, stk)
    assert list(zip(got["net"], got["row"], got["from_layer"], got["to_layer"], got["how"], got["count"],
                    got["barrel_delay"])) == want
    if not want:
        assert got.empty
