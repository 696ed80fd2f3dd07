"""Checks run while the waveform stage's processes work (checks.run_early): only those that do not read its columns.

A review runs every check not marked ``waveforms=True`` before the waveform stage's results are in, on the
nets table without that stage's columns, and the marked ones afterwards. These tests hold the marks true:
an unmarked check gives the same findings with or without those columns, a marked one does not, and a
review whose waveform stage runs in a process pool (the early checks then run in between) gives the same
findings and nets table as one run in a single process.
"""

from __future__ import annotations

import pandas as pd
import pytest

from sicheck import waveform_review
from sicheck.checks import CHECKS, ReviewContext, run_checks
from sicheck.checks.engine import _findings
from sicheck.resources import demo_dir
from sicheck.review import build_review
from sicheck.rules import load_rule_sets
from sicheck.stackup import load_stackup
from sicheck.traces import read_traces


@pytest.fixture(scope="module")
def demo():
    d = demo_dir()
    rules = load_rule_sets([d / "rules.toml"])
    st = load_stackup(d / "stackup.toml")
    full = build_review(read_traces(d / "traces.csv", aliases=dict(rules.columns)), st, rules)
    bare = build_review(read_traces(d / "traces.csv", aliases=dict(rules.columns)), st, rules, waveforms=False)
    return full, [c for c in full.nets.columns if c not in bare.nets.columns]


def _ctx(rv, nets):
    return ReviewContext(segments=rv.segments, nets=nets, rules=rv.rules, stackup=rv.stackup,
                         cross_sections=[(xs, r) for _, xs, r in rv.cross_sections], crosstalk=rv.crosstalk)


def test_unmarked_checks_do_not_read_the_waveform_columns(demo):
    rv, wave_cols = demo
    assert {"termination_part", "after_overshoot_pct", "waveform_meets_limits"} <= set(wave_cols)
    full, bare = _ctx(rv, rv.nets), _ctx(rv, rv.nets.drop(columns=wave_cols))
    early = [c for c in CHECKS if not c.waveforms]
    assert len(early) > 10
    for chk in early:
        assert _findings(bare, chk) == _findings(full, chk), chk.id


def test_marked_checks_need_the_waveform_columns(demo):
    # a mark costs speed (the check waits for the waveform stage): each marked check must need it
    rv, wave_cols = demo
    full, bare = _ctx(rv, rv.nets), _ctx(rv, rv.nets.drop(columns=wave_cols))
    marked = [c for c in CHECKS if c.waveforms]
    assert {c.id for c in marked} == {"waveform", "electrical-length"}
    for chk in marked:
        try:
            without = _findings(bare, chk)
        except (KeyError, AttributeError):
            continue
        assert without != _findings(full, chk), chk.id


def test_run_checks_keeps_the_registry_order_with_findings_worked_out_early(demo):
    rv, _ = demo
    ctx = _ctx(rv, rv.nets)
    early = {c.id: _findings(ctx, c) for c in CHECKS if not c.waveforms}
    assert run_checks(ctx, ready=early) == run_checks(ctx)


def test_pool_review_equals_single_process_review(board, monkeypatch):
    # the pool hands out every job, then runs the early checks and the crosstalk figures, then collects
    rows = ["net,layer,length,width,rise_time,driver_ohm,spacing"]
    rows += [f"S{i},L3,{60 + 5 * (i % 9)}mm,0.15mm,{200 + 40 * (i % 7)}ps,{5 + 3 * (i % 5)},"
             f"{0.1 + 0.05 * (i % 4):.2f}mm" for i in range(40)]
    tr, st = board("\n".join(rows) + "\n")
    reviews = {}
    for label, n_workers, pool_min in (("serial", "1", 10 ** 6), ("pool", "2", 1)):
        monkeypatch.setenv("SICHECK_WORKERS", n_workers)
        monkeypatch.setattr(waveform_review, "POOL_MIN_NETS", pool_min)
        monkeypatch.setattr(waveform_review, "CHUNK_MIN", 3)
        reviews[label] = build_review(read_traces(tr), load_stackup(st), load_rule_sets(None))
    serial, pool = reviews["serial"], reviews["pool"]
    assert "next_pct" in serial.nets.columns and serial.nets["next_pct"].notna().any()
    assert list(serial.nets.columns) == list(pool.nets.columns)
    assert list(serial.nets.columns)[-2:] == ["next_pct", "fext_pct"]     # after the waveform columns, as before
    pd.testing.assert_frame_equal(serial.nets.drop(columns=["waveform_inputs", "receivers"]),
                                  pool.nets.drop(columns=["waveform_inputs", "receivers"]))
    assert serial.findings == pool.findings and len(serial.findings) > 0
