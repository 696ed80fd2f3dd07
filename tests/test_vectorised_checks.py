"""The checks' column-at-once loops give what the row-at-a-time loops they replaced gave.

Edge cases the hand-made boards elsewhere do not reach: empty tables, one row, NaN values, ties in delay.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from check_tables import cls, context, findings, rules, segments
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
    done, out = set(), []
    for r in nets.sort_values("delay", ascending=False).itertuples(index=False):
        if r.termination == "not-needed":
            continue
        if r.pair:
            ident = pair_id(r.net, r.pair)
            if ident in done:
                continue
            done.add(ident)
        out.append(r.net)
    return out


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
