"""A waveform check's share worked out before the waveform stage (Check.prepare, run_early) gives the findings the
check gave when it worked everything out at the end; the engine's severity and the review's order are unchanged.

The row-by-row loops below are the former forms of the checks, kept here as the reference.
"""

from __future__ import annotations

import math
import random

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from check_tables import context, needing_termination_longest_first, rules, segments
from sicheck.checks import ReviewContext, by_id, run_checks, run_early
from sicheck.checks import engine
from sicheck.checks.engine import _findings, make_key, pair_id, pair_label, prepared
from sicheck.findings import SEVERITY_ORDER, Finding
from sicheck.physics.electrical import REQUIRED
from sicheck.review import _by_severity_rule_net

WAVE_COLUMNS = ["termination_part", "waveform_meets_limits", "waveform_violations", "waveform_assumptions",
                "before_overshoot_pct", "after_overshoot_pct", "before_ringback_pct", "after_ringback_pct",
                "before_settle_ns", "after_settle_ns"]


def _electrical_length_row_by_row(ctx, chk):
    """The former check: every line's text made after the waveform stage, one namedtuple per net."""
    seg = ctx.segments
    first = seg.groupby("net", sort=False)["row"].first()
    rows = dict(zip(first.index.tolist(), first.tolist()))
    nets = ctx.nets
    limits = {t: float(ctx.param("required_min_td_over_tr" if t == REQUIRED else "lumped_max_td_over_tr"))
              for t in set(nets["termination"].tolist())}
    out = []
    for r in needing_termination_longest_first(nets):
        msg = (f"one-way delay {r.delay * 1e12:.0f} ps is {r.td_over_tr:.2f} x the {r.rise_time * 1e12:.0f} ps rise "
               f"time (critical length {r.critical_length * 1e3:.1f} mm on its layers, net is {r.length * 1e3:.1f} "
               f"mm): transmission line, termination {r.termination}")
        note = getattr(r, "topology_note", "")
        if isinstance(note, str) and note:
            msg += f"; route: {note}"
        part = getattr(r, "termination_part", "")
        if isinstance(part, str) and part:
            msg += (f". Simulated: {r.termination_part} (overshoot {r.before_overshoot_pct:.0f} % -> "
                    f"{r.after_overshoot_pct:.0f} %, ringback {r.before_ringback_pct:.0f} % -> "
                    f"{r.after_ringback_pct:.0f} %, settled {r.before_settle_ns:.2f} -> {r.after_settle_ns:.2f} ns)")
            if r.waveform_assumptions:
                msg += f"; {r.waveform_assumptions}"
        elif r.advice:
            msg += f". Proposal: {r.advice}"
        ident = pair_id(r.net, r.pair) if r.pair else r.net
        out.append(chk.finding(pair_label(r.net, r.pair) if r.pair else r.net, r.layers, msg,
                               row=rows.get(r.net, rows.get(r.pair)), key=make_key(chk.id, ident),
                               value=float(r.td_over_tr), limit=limits[r.termination], unit="x Tr",
                               severity=None if r.termination == REQUIRED else "info"))
    return out


def _waveform_failures_row_by_row(ctx, chk):
    seg, nets = ctx.segments, ctx.nets
    first = seg.groupby("net", sort=False)["row"].first()
    rows = dict(zip(first.index.tolist(), first.tolist()))
    out = []
    for r in needing_termination_longest_first(nets):
        part = r.termination_part
        if isinstance(part, str) and part and r.waveform_meets_limits is False:
            ident = pair_id(r.net, r.pair) if r.pair else r.net
            out.append(chk.finding(pair_label(r.net, r.pair) if r.pair else r.net, r.layers,
                                   f"no standard termination meets the limits; best found: {part} "
                                   f"({r.waveform_violations})", row=rows.get(r.net, rows.get(r.pair)),
                                   key=make_key(chk.id, ident)))
    return out


NET = st.tuples(
    st.sampled_from(["", "P"]),                                                  # a pair leg (partner named below)
    st.one_of(st.sampled_from([1e-10, 2e-10, 3e-10]), st.just(math.nan)),         # delay (ties, NaN)
    st.sampled_from(["not-needed", "recommended", "required"]),
    st.sampled_from(["", "22 ohm series at the driver"]),                         # advice
    st.sampled_from(["", "rows in series"]),                                      # topology note
    st.sampled_from(["", "33 ohm series", None]),                                 # part ("" or missing: not simulated)
    st.sampled_from([True, False, None, np.False_]),                              # meets the limits
    st.sampled_from(["", "assumed load 2 pF"]),                                   # waveform assumptions
    st.one_of(st.floats(-50, 200), st.just(math.nan)),                            # a metric
)


def _tables(rows, with_note: bool):
    nets = []
    for i, (leg, delay, term, advice, note, part, meets, assumed, metric) in enumerate(rows):
        net = f"N{i // 2}_{'AB'[i % 2]}" if leg else f"S{i}"
        pair = (f"N{i // 2}_{'BA'[i % 2]}" if leg else "")
        nets.append({"net": net, "pair": pair, "layers": "L1 > L2", "delay": delay, "td_over_tr": delay / 4e-10,
                     "rise_time": 4e-10, "critical_length": 0.02, "length": 0.05, "termination": term,
                     "advice": advice, "topology_note": note, "termination_part": part, "waveform_meets_limits": meets,
                     "waveform_violations": "overshoot 22 % > 15 %", "waveform_assumptions": assumed,
                     "before_overshoot_pct": metric, "after_overshoot_pct": 3.0, "before_ringback_pct": 1.0,
                     "after_ringback_pct": metric, "before_settle_ns": 0.5, "after_settle_ns": metric})
    nets = pd.DataFrame(nets, columns=["net", "pair", "layers", "delay", "td_over_tr", "rise_time", "critical_length",
                                       "length", "termination", "advice", "topology_note"] + WAVE_COLUMNS)
    nets = nets.astype({c: "str" for c in ("net", "pair", "layers", "termination", "advice", "topology_note",
                                           "termination_part", "waveform_violations", "waveform_assumptions")})
    if not with_note:
        nets = nets.drop(columns=["topology_note"])
    seg = pd.DataFrame({"net": nets["net"].tolist()[::-1] + ["S0"], "row": range(2, len(nets) + 3)})
    return seg, nets


@settings(max_examples=80, deadline=None)
@given(st.lists(NET, max_size=8), st.booleans())
def test_prepared_checks_give_the_former_findings(rows, with_note):
    seg, nets = _tables(rows, with_note)
    ctx = ReviewContext(segments=seg, nets=nets, rules=rules())
    for rule, former in (("electrical-length", _electrical_length_row_by_row), ("waveform", _waveform_failures_row_by_row)):
        chk = by_id(rule)
        got = [f for f in chk.fn(ctx, chk) if f.key != make_key(chk.id, "not-simulated")]
        assert _text(got) == _text(former(ctx, chk)), rule
    # worked out on the nets without the waveform stage's columns, while it runs: the same findings
    marked = [by_id("electrical-length"), by_id("waveform")]
    early = ReviewContext(segments=seg, nets=nets.drop(columns=WAVE_COLUMNS), rules=rules())
    with pytest.MonkeyPatch.context() as mp:        # these tables have only what the two checks read
        mp.setattr(engine, "REGISTRY", marked)
        assert run_early(early) == {}
    assert set(early.prepared) == {"electrical-length", "waveform"}
    late = ReviewContext(segments=seg, nets=nets, rules=rules(), prepared=early.prepared)
    assert _text(run_checks(late, marked)) == _text(run_checks(ctx, marked))


def _text(findings) -> list[str]:
    return [repr(f) for f in findings]          # a NaN value compares equal as text

def test_prepared_share_is_taken_only_for_the_same_nets():
    seg = segments({"net": "A", "length_mm": 60.0}, {"net": "B", "length_mm": 90.0, "row": 7})
    ctx = context(seg, rules())
    run_early(ctx)
    chk = by_id("electrical-length")
    assert prepared(ctx, chk) is ctx.prepared[chk.id][1]
    # the nets reordered (or others) after run_early: worked out again, not taken
    moved = ReviewContext(segments=seg, nets=ctx.nets.iloc[::-1].reset_index(drop=True), rules=ctx.rules,
                          prepared=ctx.prepared)
    assert prepared(moved, chk) is not ctx.prepared[chk.id][1]
    assert run_checks(moved, [chk]) == run_checks(context(seg, rules()), [chk])
    fewer = ReviewContext(segments=seg, nets=ctx.nets.iloc[:1], rules=ctx.rules, prepared=ctx.prepared)
    assert [f.net for f in run_checks(fewer, [chk])] == ["A"]


def test_prepare_skipped_for_a_check_turned_off():
    ctx = context(segments({"net": "A", "length_mm": 60.0}), rules(severity={"electrical-length": "off"}))
    run_early(ctx)
    assert "electrical-length" not in ctx.prepared and "waveform" in ctx.prepared


def test_findings_take_the_rules_severity_when_made():
    seg = segments({"net": "A", "length_mm": 60.0}, {"net": "B", "length_mm": 25.0})
    ctx = context(seg, rules(severity={"electrical-length": "error"}))
    req, rec = _findings(ctx, by_id("electrical-length"))
    assert (req.net, req.severity, rec.net, rec.severity) == ("A", "error", "B", "info")
    chk = by_id("electrical-length")
    assert chk.level == ""        # the registry's check is left as it was: called directly, no severity
    assert {f.severity for f in chk.fn(ctx, chk)} == {"", "info"}


FINDING = st.builds(Finding, rule=st.sampled_from(["b-rule", "a-rule", "c"]),
                    severity=st.sampled_from(list(SEVERITY_ORDER)), net=st.sampled_from(["", "N1", "N10", "n2"]),
                    layer=st.sampled_from(["", "TOP", "IN3"]), message=st.text(max_size=3))


@settings(max_examples=100, deadline=None)
@given(st.lists(FINDING, max_size=30))
def test_review_order_is_the_sorted_order(findings):
    want = sorted(findings, key=lambda f: (SEVERITY_ORDER[f.severity], f.rule, f.net, f.layer))
    got = _by_severity_rule_net(findings)
    assert got == want and all(a is b for a, b in zip(got, want))      # equal ones keep their order


def test_review_order_of_many_findings():
    rnd = random.Random(3)
    fs = [Finding(rule=rnd.choice("xyz"), severity=rnd.choice(list(SEVERITY_ORDER)), net=f"N{rnd.randrange(50)}",
                  layer=rnd.choice(["A", "B"]), message=str(i)) for i in range(3000)]
    assert _by_severity_rule_net(fs) == sorted(fs, key=lambda f: (SEVERITY_ORDER[f.severity], f.rule, f.net, f.layer))
