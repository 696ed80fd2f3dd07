"""What the termination choice writes only when it is read, and the engine's shared record sizes.

Candidate texts and violations are put into words on first reading (physics/termination_choice.py); the
words must be the ones the metrics and limits give, whenever they are read. Record sizes are worked out once
per Simulation (Simulation.records) for both the caller's memory slicing and the batched engine. A plain
chain of lines is built without the tree walk (tree_network); it must be the network the walk builds.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hst

from sicheck.physics.causal_line import Line, LineLoss
from sicheck.physics.chain_batch import samples_needed
from sicheck.physics.line_network import (RECORD_FACTOR, SAMPLES_PER_RAMP, Network, Series, Simulation,
                                          record_ladder, record_size)
from sicheck.physics.termination_choice import Candidate, Limits, _evaluate, _pick, choose, tree_network
from sicheck.physics.transient import RAMP_PER_RISE, Load, LoadSet


def _metrics(over=0.0, ring=0.0, settled=True, settle=1.0, window=8.0):
    return {"overshoot_pct": over, "ringback_pct": ring, "settled_in_window": settled, "settle_ns": settle,
            "window_ns": window, "flight_ns": 0.5, "v_final": 3.3, "v_max": 3.3}


def test_violations_written_from_metrics_and_limits():
    lim = Limits(max_overshoot_pct=10.0, max_ringback_pct=12.5)
    c = Candidate("none", "unterminated", _metrics(over=23.4, ring=13.0, settle=3.456), 0.0)
    _evaluate(c, 2.0, lim)
    assert not c.meets and c.n_violations == 3
    assert c.violations == ["overshoot 23 % > 10 %", "ringback 13 % > 12.5 %", "settles at 3.46 ns > 2.00 ns"]
    d = Candidate("none", "unterminated", _metrics(settled=False, window=7.125), 0.0)
    _evaluate(d, 2.5, lim)
    assert d.violations == ["not settled within the 7.12 ns simulated (limit 2.50 ns)"] and d.n_violations == 1
    ok = Candidate("none", "unterminated", _metrics(over=10.0, ring=12.5, settle=2.0), 0.0)
    _evaluate(ok, 2.0, lim)                  # at the limits is within them
    assert ok.meets and ok.n_violations == 0 and ok.violations == []
    nan = Candidate("none", "unterminated", _metrics(over=math.nan, ring=math.nan, settle=math.nan), 0.0)
    _evaluate(nan, 2.0, lim)                 # NaN compares false: no violation, as before
    assert nan.meets and nan.violations == []


def test_set_violations_keep_their_count_and_unjudged_has_none():
    c = Candidate("series", "x", _metrics(), 0.0)
    assert c.violations == [] and c.n_violations == 0 and c.receivers == []
    c.violations = ("a", "b")
    assert c.violations == ["a", "b"] and c.n_violations == 2
    given = Candidate("rc", "y", _metrics(), 0.0, violations=["z"], receivers=[{"receiver": "r"}])
    assert given.n_violations == 1 and given.receivers == [{"receiver": "r"}]


def test_text_template_is_formatted_once_on_reading():
    c = Candidate("parallel", ("{:g} ohm to {:g} V at {}", (np.float64(51.0), 1.65, "the receiver")), {}, 0.0)
    assert c.text == "51 ohm to 1.65 V at the receiver"
    assert c.text is c.text
    assert "51 ohm" in repr(c)


def test_pick_ranks_on_counts_without_writing_texts():
    lim = Limits()
    cands = []
    for scheme, m in (("none", _metrics(over=40)), ("series", _metrics(over=30, ring=20)), ("rc", _metrics(over=16))):
        c = Candidate(scheme, scheme, m, 0.0)
        _evaluate(c, 5.0, lim)
        cands.append(c)
    best = _pick(cands, cands[0])
    assert best.scheme == "rc"
    assert all(c._violations is None for c in cands)      # ranking read no text


def test_chosen_texts_as_the_schemes_are_written():
    # a 50 ohm line driven by 10 ohm, no loss: every stage runs (the series values ring at 0.1 ns edges)
    none, rec, cands = choose([50.0], [1e-9], 0.1e-9, 10.0, 3.3, 2e-12, Limits(max_overshoot_pct=1.0,
                                                                            max_ringback_pct=1.0))
    texts = [c.text for c in cands]
    assert texts[0] == "unterminated"
    assert "39 ohm in series at the driver" in texts and "51 ohm to 1.65 V at the receiver" in texts
    assert "100 ohm to the supply and 100 ohm to ground at the receiver" in texts
    assert any(t.startswith("51 ohm + ") and t.endswith(" pF to ground at the receiver") for t in texts)
    for c in cands:
        assert c.n_violations == len(c.violations)
        assert c.receivers == [{"receiver": "receiver", "metrics": c.metrics, "meets": c.meets,
                                "violations": c.violations}]


def test_multi_drop_violations_name_each_receiver():
    z, td = [50.0, 50.0, 50.0], [0.3e-9, 0.4e-9, 0.2e-9]
    rx = [(1, 2e-12, "U2"), (2, 3e-12, "U3")]
    none, _, cands = choose(z, td, 0.1e-9, 10.0, 3.3, 0.0, Limits(max_overshoot_pct=1.0), parents=[-1, 0, 0],
                            receivers=rx)
    assert not none.meets
    for c in cands:
        own = [r for r in c.receivers]
        assert [r["receiver"] for r in own] == ["U2", "U3"]
        assert c.metrics is own[c.worst]["metrics"]
        assert c.meets == all(r["meets"] for r in own)
        assert c.n_violations == len(c.violations)
        assert all(v.startswith(("at U2: ", "at U3: ")) for v in c.violations)
        # each receiver's own words, prefixed by its name, in receiver order
        other = 1 - c.worst
        prefixed = [v for v in c.violations if v.startswith(f"at {own[other]['receiver']}: ")]
        assert prefixed == [f"at {own[other]['receiver']}: {v}" for v in own[other]["violations"]]


# ---- record sizes, worked out once

def _sim(rs, t_end, rise=0.3e-9, loads=None):
    net, end = Network.chain([Line(50.0, 1e-9), Line(60.0, 0.5e-9)])
    loads = loads or LoadSet.of([Load(cap=2e-12)] * len(rs))
    return Simulation(net, [end], 3.3, rise, np.asarray(rs, dtype=float), {end: loads}, t_end)


def _record(te, rise):
    return record_ladder(record_size(te, rise * RAMP_PER_RISE / SAMPLES_PER_RAMP))


@pytest.mark.parametrize("t_end", [None, 12e-9, np.array([5e-9, 9e-9, 30e-9])])
def test_records_as_each_window_gives(t_end):
    sim = _sim([10.0, 30.0, 60.0], t_end)
    ends = sim.estimated_window if t_end is None else np.broadcast_to(t_end, (3,))
    want = [_record(float(te), 0.3e-9) for te in ends]
    assert sim.records == want
    assert sim.records is sim.records          # worked out once
    assert samples_needed(sim) == sum(int(n / RECORD_FACTOR) for n in want)
    assert list(sim.ends) == list(ends)


def test_records_of_a_simulation_that_cannot_run():
    assert samples_needed(_sim([25.0], 1e-3)) == 0                 # beyond MAX_SAMPLES
    with pytest.raises(ValueError, match="time samples"):
        _ = _sim([25.0], 1e-3).records
    assert samples_needed(_sim([25.0], 5e-9, rise=0.0)) == 0       # no time step
    assert samples_needed(_sim([25.0, 30.0], np.array([1e-9, 2e-9, 3e-9]))) == 0   # windows do not match


# ---- a plain chain without the tree walk

def _walked(z, td, losses):
    """The chain as Network.add builds it, one edge at a time."""
    net = Network()
    node = 0
    for a, d, lo in zip(z, td, losses):
        node = net.add(node, Line(a, d, lo))
    return net


@settings(max_examples=30, deadline=None)
@given(hst.lists(hst.tuples(hst.floats(20, 120), hst.floats(1e-12, 1e-9), hst.booleans()), min_size=1, max_size=6))
def test_chain_is_the_network_the_walk_builds(spec):
    z = [a for a, _, _ in spec]
    td = [d for _, d, _ in spec]
    losses = [LineLoss(f_ref=1e9, r_ac=1.5, tan_delta=0.02) if lossy else None for _, _, lossy in spec]
    for parents in (list(range(-1, len(z) - 1)), np.arange(-1, len(z) - 1)):
        net, far = tree_network(z, td, losses, parents)
        assert net.edges == _walked(z, td, losses).edges
        assert far == list(range(1, len(z) + 1))
    # with a part the tree walk runs: the same lines, the part after line 0
    net, far = tree_network(z, td, losses, list(range(-1, len(z) - 1)), {0: Series(ohm=10.0)})
    assert [e for _, _, e in net.edges if isinstance(e, Line)] == [e for _, _, e in _walked(z, td, losses).edges]
    assert far[0] == 1 and len(net.edges) == len(z) + 1


def test_chain_checks_its_lines_and_parts():
    with pytest.raises(ValueError, match="positive impedance"):
        tree_network([50.0, -1.0], [1e-9, 1e-9], [None, None], [-1, 0])
    with pytest.raises(TypeError, match="not str"):
        Network.chain([Line(50.0, 1e-9), "R"])
    with pytest.raises(ValueError, match="do not form a tree"):
        tree_network([50.0, 50.0], [1e-9, 1e-9], [None, None], [-1, 5])
    net, far = tree_network([], [], [], [])
    assert net.edges == [] and far == []


def test_receiver_results_as_the_receivers_say():
    z, td = [50.0, 50.0, 50.0], [0.3e-9, 0.4e-9, 0.2e-9]
    rx = [(1, 2e-12, "U2"), (2, 3e-12, "U3")]
    multi = choose(z, td, 0.1e-9, 10.0, 3.3, 0.0, Limits(max_overshoot_pct=1.0), parents=[-1, 0, 0], receivers=rx)[2]
    single = choose([50.0], [1e-9], 0.1e-9, 10.0, 3.3, 2e-12, Limits(max_overshoot_pct=1.0))[2]
    for c in multi + single:
        got = c.receiver_results()
        assert c._violations is None          # no words needed for them
        assert len(got) == (2 if c in multi else 1)
        assert all(m is r["metrics"] and ok == r["meets"] for (m, ok), r in zip(got, c.receivers))
    assert any(not ok for c in multi for _, ok in c.receiver_results())
    given = Candidate("x", "x", {}, 0.0, receivers=[{"receiver": "a", "metrics": {"v": 1}, "meets": True}])
    assert given.receiver_results() == [({"v": 1}, True)]
    assert Candidate("x", "x", {}, 0.0).receiver_results() == []


def test_load_set_columns_with_absent_parts_as_nan():
    ls = LoadSet.of([Load(cap=2e-12), Load(cap=1e-12, end_ohm=50.0, end_volts=1.65),
                     Load(cap=3e-12, end_ohm=47.0, end_cap=1e-10)])
    np.testing.assert_array_equal(ls.cap, [2e-12, 1e-12, 3e-12])
    np.testing.assert_array_equal(ls.end_ohm, [np.nan, 50.0, 47.0])
    np.testing.assert_array_equal(ls.end_volts, [0.0, 1.65, 0.0])
    np.testing.assert_array_equal(ls.end_cap, [np.nan, np.nan, 1e-10])
    assert all(a.dtype == np.float64 and a.shape == (3,) for a in (ls.cap, ls.end_ohm, ls.end_volts, ls.end_cap))
    empty = LoadSet.of([])
    assert len(empty) == 0 and empty.end_cap.shape == (0,)
