"""Many nets at once (physics/chain_batch.py, termination_choice.choose_many) against one net at a time.

The batched engine does line_network's mathematics on many nets together; the references are
line_network.simulate_network (itself checked against ngspice and exact results in test_transient.py)
and, directly, ngspice's lossless T element on the chains of test_transient's cases, all batched in one
call with their different edges and windows.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hst

from sicheck.physics import chain_batch, termination_choice
from sicheck.physics.causal_line import ConstantRG, Line, LineLoss, per_delay, per_delay_lines
from sicheck.physics.chain_batch import plain_chain, samples_needed, simulate_many
from sicheck.physics.line_network import Network, Series, Simulation, settle_window
from sicheck.physics.termination_choice import Limits, choose, choose_many
from sicheck.physics.transient import Load, LoadSet
from ngspice_ref import needs_ngspice
from ngspice_ref import ramp_run as ngspice_run
from test_transient import LOSSLESS_CASES, compare

LOADS = [Load(cap=2e-12), Load(), Load(cap=1e-12, end_ohm=50.0, end_volts=1.65),
         Load(cap=2e-12, end_ohm=55.0, end_cap=120e-12), Load(cap=3e-12, end_ohm=47.0, end_volts=0.0)]


def chain_sim(z, td, losses, rs, loads, swing=3.3, rise=0.3e-9, t_end=None):
    net, end = Network.chain([Line(a, b, lo) for a, b, lo in zip(z, td, losses)])
    return Simulation(net, [end], swing, rise, np.asarray(rs, dtype=float), {end: LoadSet.of(loads)}, t_end)


def assert_same(got: dict, ref: dict, swing: float):
    assert got.keys() == ref.keys()
    for node in ref:
        for a, b in zip(got[node], ref[node]):
            assert a.t.shape == b.t.shape
            assert np.max(np.abs(a.v_rx - b.v_rx)) < 1e-6 * abs(swing)
            for k in ("v_max", "ringback", "flight_ns", "settle_ns", "v_final"):
                assert a.metrics[k] == pytest.approx(b.metrics[k], abs=1e-6, nan_ok=True), k
            assert a.metrics["settled_in_window"] == b.metrics["settled_in_window"]


losses_st = hst.one_of(
    hst.none(),
    hst.builds(lambda f, rac, tand, rdc: LineLoss(f_ref=f, r_ac=rac, tan_delta=tand, r_dc=rdc),
               hst.sampled_from([0.5e9, 2e9, 10e9]), hst.sampled_from([0.0, 0.5, 3.0, 12.0]),
               hst.sampled_from([0.0, 0.005, 0.02]), hst.sampled_from([0.0, 0.2, 1.0, 5.0])))


def _split(z, td, lo, parts):
    """One uniform line as ``parts`` sections end to end (the loss scaled with each piece's share)."""
    share = np.linspace(1.0, 2.0, parts) / np.linspace(1.0, 2.0, parts).sum()
    return [Line(z, td * f, None if lo is None else LineLoss(f_ref=lo.f_ref, r_ac=lo.r_ac * f, tan_delta=lo.tan_delta,
                                                               r_dc=lo.r_dc * f)) for f in share]


@pytest.mark.parametrize("lo", [None, LineLoss(f_ref=1e9, r_ac=3.0, tan_delta=0.02, r_dc=0.4)])
def test_sections_of_one_cross_section_end_to_end_are_one_line(lo):
    # the batched engine joins them into one uniform line; simulate_network keeps every section
    lines = _split(45.0, 0.6e-9, lo, 3) + _split(70.0, 0.25e-9, lo, 2) + [Line(45.0, 0.2e-9, lo)]
    net, end = Network.chain(lines)
    sims = [Simulation(net, [end], 3.3, 0.2e-9, np.array([20.0, 45.0]), {end: LoadSet.of([Load(cap=2e-12)])})]
    assert len(chain_batch._uniform_runs(lines)) == 3
    assert_same(simulate_many(sims)[0], sims[0].run(), 3.3)


def test_cross_sections_beyond_the_shape_cache_are_worked_out_again(monkeypatch):
    # a board of many cross-sections: K and M are kept for a record group's batches only up to a bound, then
    # dropped and worked out again for each batch; the answers must not change
    rng = np.random.default_rng(4)
    sims = [chain_sim([float(rng.uniform(40, 60)) for _ in range(3)], [2e-10, 3e-10, 1e-10],
                      [LineLoss(f_ref=1e9, r_ac=float(rng.uniform(0.5, 3.0)), tan_delta=0.02, r_dc=0.3)] * 3,
                      [25.0, 47.0], [LOADS[0]], rise=0.25e-9, t_end=6e-9) for _ in range(12)]
    monkeypatch.setattr(chain_batch, "GROUP_BINS", 3000)        # a few nets per batch
    monkeypatch.setattr(chain_batch, "SHAPE_CACHE_BINS", 1)     # dropped at every batch
    for sim, got in zip(sims, simulate_many(sims)):
        assert_same(got, sim.run(), sim.swing)


@settings(max_examples=40, deadline=None)
@given(hst.lists(hst.tuples(hst.floats(20, 120), hst.floats(5e-12, 2e-9), losses_st), min_size=1, max_size=4))
def test_line_shapes_for_many_sections_equal_one_by_one(spec):
    lines = [Line(z, td, lo) for z, td, lo in spec] + [Line(50.0, 1e-9, ConstantRG(r=2.0, g=1e-4))]
    s = 1e8 + 1j * np.linspace(0.0, 2e11, 300)
    k, m = per_delay_lines(lines, s)
    for i, x in enumerate(lines):
        k1, m1 = per_delay(x, s)
        assert np.allclose(k[i], k1, rtol=1e-12, atol=0) and np.allclose(m[i], m1, rtol=1e-12, atol=0)


@settings(max_examples=25, deadline=None)
@given(hst.lists(hst.tuples(hst.lists(hst.tuples(hst.floats(25, 110), hst.floats(10e-12, 1.5e-9), losses_st),
                                      min_size=1, max_size=5),
                            hst.lists(hst.tuples(hst.floats(5, 80), hst.sampled_from(range(len(LOADS)))),
                                      min_size=1, max_size=4),
                            hst.sampled_from([0.15e-9, 0.3e-9, 1e-9]), hst.booleans()),
                 min_size=1, max_size=6))
def test_batched_chains_equal_one_at_a_time(nets):
    sims = []
    for lines, cands, rise, windowed in nets:
        z, td, lo = zip(*lines)
        rs, li = zip(*cands)
        sims.append(chain_sim(z, td, lo, rs, [LOADS[i] for i in li], rise=rise,
                              t_end=(3 * sum(td) + 8 * rise) if windowed else None))
    got = simulate_many(sims)
    for sim, g in zip(sims, got):
        assert_same(g, sim.run(), sim.swing)


def test_what_is_not_a_plain_chain_runs_as_before():
    # a tree (a stub at the middle node), a series part, and a load along the way: simulate_network's own answer
    tree = Network()
    mid = tree.add(0, Line(50.0, 0.3e-9))
    end = tree.add(mid, Line(55.0, 0.4e-9))
    stub = tree.add(mid, Line(60.0, 0.1e-9))
    parted, p_end = Network.chain([Line(50.0, 0.3e-9), Series(ohm=22.0), Line(50.0, 0.2e-9)])
    chain, c_end = Network.chain([Line(50.0, 0.3e-9), Line(50.0, 0.2e-9)])
    sims = [Simulation(tree, [end, stub], 3.3, 0.3e-9, np.array([20.0]), {end: LoadSet.of([Load(cap=2e-12)])}),
            Simulation(parted, [p_end], 3.3, 0.3e-9, np.array([20.0, 40.0]), {p_end: LoadSet.of([Load()])}),
            Simulation(chain, [c_end], 3.3, 0.3e-9, np.array([20.0]),
                       {1: LoadSet.of([Load(cap=1e-12)]), c_end: LoadSet.of([Load()])})]
    assert all(plain_chain(s) is None for s in sims)
    for sim, got in zip(sims, simulate_many(sims)):
        assert_same(got, sim.run(), sim.swing)


def test_one_impossible_simulation_does_not_stop_the_others():
    ok = chain_sim([50.0], [1e-9], [None], [20.0], [Load(cap=2e-12)])
    huge = chain_sim([50.0], [1e-6], [None], [20.0], [Load(cap=2e-12)], rise=1e-12)   # millions of samples
    bad = chain_sim([50.0], [1e-9], [None], [20.0], [Load()], rise=-1.0)
    got = simulate_many([ok, huge, bad, ok])
    assert isinstance(got[1], ValueError) and "time samples" in str(got[1])
    assert isinstance(got[2], ValueError) and "rise time" in str(got[2])
    assert_same(got[0], ok.run(), 3.3)
    assert_same(got[3], ok.run(), 3.3)
    assert samples_needed(huge) == 0 and samples_needed(ok) > 0


@needs_ngspice
def test_batched_chains_against_ngspice(tmp_path):
    # Reference: ngspice's lossless T element (test_transient's cases that are plain chains), step ramp/400;
    # tolerances of issue 8 (metrics 0.5 % of the swing and 5 ps, samples 1 % of the swing).
    swing, t_end = 3.3, 30e-9
    cases = [c for c in LOSSLESS_CASES if all(isinstance(e, Line) for e in c[1])]
    assert len(cases) >= 5
    sims = []
    for _, chain, rs, load, _, rise in cases:
        net, end = Network.chain(chain)
        sims.append(Simulation(net, [end], swing, rise, np.array([rs]), {end: LoadSet.of([load])}, t_end))
    got = simulate_many(sims)
    for k, (name, _, _, _, body, rise) in enumerate(cases):
        run = tmp_path / f"c{k}"
        run.mkdir()
        t_ref, v_ref = ngspice_run(run, body, swing, rise / 0.8, t_end, rise / 0.8 / 400)
        compare(got[k][sims[k].receivers[0]][0], t_ref, v_ref, swing, upto=t_end * 0.95)


def _nets():
    lossy = [LineLoss(f_ref=1e9, r_ac=2.0, tan_delta=0.015, r_dc=0.4), LineLoss(f_ref=1e9, r_ac=1.0, tan_delta=0.01)]
    lim = Limits()
    return [
        ((30.0, 50.0, 60.0), (0.2e-9, 0.5e-9, 0.3e-9), 0.3e-9, 15.0, 3.3, 2e-12, lim), {"losses": [lossy[0], None, lossy[1]]},
        ((50.0,), (1e-9,), 0.3e-9, 25.0, 3.3, 2e-12, lim), {},
        ((30.0,), (1e-9,), 0.3e-9, 45.0, 3.3, 2e-12, Limits(max_overshoot_pct=5)), {},
        ((48.0,), (1e-9,), 0.25e-9, 25.0, 0.35, 2e-12, lim), {"zdiff": 96.0},
        ((50.0,), (1e-9,), 0.3e-9, 10.0, 3.3, 2e-12, lim), {"on_die": (50.0, 1.65, "on die")},
        ((50.0, 55.0, 60.0), (0.3e-9, 0.2e-9, 0.1e-9), 0.3e-9, 20.0, 3.3, 0.0, lim),
        {"parents": [-1, 0, 0], "receivers": [(1, 2e-12, "U2"), (2, 3e-12, "U3")]},
        ((50.0, 55.0), (30e-12, 300e-12), 0.2e-9, 10.0, 3.3, 3e-12, lim), {"parts": {0: Series(ohm=22.0)}},
        ((50.0,), (1e-6,), 1e-12, 25.0, 3.3, 2e-12, lim), {},            # needs too many samples: an error
        ((60.0, 40.0), (0.7e-9, 0.8e-9), 1e-9, 8.0, 1.8, 4e-12, lim), {"keep_waves": True},
    ]


@pytest.mark.parametrize("budget", [chain_batch.RESULT_SAMPLES, 1])
def test_many_nets_choose_as_one_at_a_time(monkeypatch, budget):
    monkeypatch.setattr(termination_choice, "RESULT_SAMPLES", budget)   # 1: one net per engine call
    flat = _nets()
    nets = [(flat[i], flat[i + 1]) for i in range(0, len(flat), 2)]
    got = choose_many(nets)
    for (args, kw), g in zip(nets, got):
        try:
            ref = choose(*args, **kw)
        except ValueError as e:
            assert isinstance(g, ValueError) and str(g) == str(e)
            continue
        assert [c.text for c in g[2]] == [c.text for c in ref[2]]
        assert g[1].text == ref[1].text and g[1].meets == ref[1].meets
        for a, b in zip(g[2], ref[2]):
            for k in ("overshoot_pct", "ringback_pct", "settle_ns", "flight_ns"):
                assert a.metrics[k] == pytest.approx(b.metrics[k], abs=1e-6, nan_ok=True)
            assert (a.wave is None) == (b.wave is None)
    assert sum(isinstance(g, ValueError) for g in got) == 1


def test_sections_of_one_cross_section_share_their_shape():
    # Nets routed on two cross-sections, lengths all different: the loss per unit delay is the cross-section's,
    # so the batch works K and M out once per cross-section; the waveforms must be those of one net at a time.
    rng = np.random.default_rng(5)
    xsec = [(48.0, 6.0e-9, 2.2, 0.4), (55.0, 6.8e-9, 3.1, 0.9)]     # Z, s/m, R(f0) per ns, R dc per ns
    sims = []
    for _ in range(12):
        z, td, lo = [], [], []
        for k in rng.integers(0, 2, int(rng.integers(1, 5))):
            zk, per_m, r_ns, rdc_ns = xsec[k]
            d = per_m * rng.uniform(0.005, 0.06)
            z.append(zk)
            td.append(d)
            lo.append(LineLoss(f_ref=1.3e9, r_ac=r_ns * d / 1e-9, tan_delta=0.018, r_dc=rdc_ns * d / 1e-9))
        sims.append(chain_sim(z, td, lo, [15.0, 33.0], [Load(cap=2e-12), Load(cap=2e-12)], rise=0.4e-9,
                              t_end=3 * sum(td) + 4e-9))
    for sim, got in zip(sims, simulate_many(sims)):
        assert_same(got, sim.run(), sim.swing)


def test_what_is_kept_of_a_network_follows_its_edges():
    # The engines keep what they take from a network's edges alone (Network.memo: the chain's runs, DC resistance
    # and front, settle_window's part) for the net's later stages. A network grown after a simulation, and a
    # window asked for another edge, must give what a network built anew gives.
    lo = LineLoss(f_ref=1e9, r_ac=2.0, tan_delta=0.02, r_dc=0.4)
    net, end = Network.chain([Line(50.0, 0.4e-9, lo)])
    loads = LoadSet.of([Load(cap=2e-12)])
    simulate_many([Simulation(net, [end], 3.3, 0.3e-9, np.array([20.0]), {end: loads})])
    far = net.add(end, Line(70.0, 0.3e-9))
    fresh, fresh_end = Network.chain([Line(50.0, 0.4e-9, lo), Line(70.0, 0.3e-9)])
    rs = np.array([20.0, 45.0])
    got = simulate_many([Simulation(net, [far], 3.3, 0.3e-9, rs, {far: loads})])[0][far]
    ref = simulate_many([Simulation(fresh, [fresh_end], 3.3, 0.3e-9, rs, {fresh_end: loads})])[0][fresh_end]
    for a, b in zip(got, ref):
        assert np.array_equal(a.v_rx, b.v_rx) and a.metrics == b.metrics
    sim = Simulation(net, [far], 3.3, 0.3e-9, rs, {far: loads})
    assert np.array_equal(sim.estimated_window, settle_window(fresh, rs, {fresh_end: loads}, 0.3e-9 / 0.8))
    for ramp in (0.3e-9, 1.1e-9, 0.3e-9):
        assert np.array_equal(settle_window(net, rs, {far: loads}, ramp),
                              settle_window(Network.chain([Line(50.0, 0.4e-9, lo), Line(70.0, 0.3e-9)])[0], rs,
                                            {far: loads}, ramp))


def _window_as_written(lines, before_ohm, rs, cols, ramp):
    """settle_window's estimate (its docstring) written out with the builtins, per candidate."""
    total = sum(x.delay for x in lines)
    z_min = min(x.z0 for x in lines)
    atten = sum(x.loss.r_ac / (2.0 * x.z0) + np.pi * x.loss.f_ref * x.delay * x.loss.tan_delta
                for x in lines if x.loss is not None)
    out = []
    for i, r in enumerate(rs):
        r = r + before_ohm
        g_end = 1.0
        for c in cols:
            if c[1][i] == c[1][i]:
                g_end = abs((c[1][i] - lines[-1].z0) / (c[1][i] + lines[-1].z0))
        gamma = max(abs((r - lines[0].z0) / (r + lines[0].z0)) * g_end, 0.3)
        trips = 4.0 if gamma >= 1.0 else min(max(math.log(0.05 / 4.0) / math.log(gamma) + 2.0, 4.0), 400.0)
        tau = max([0.0] + [c[0][i] * min(z_min, r) for c in cols])
        tau_end = max([0.0] + [c[2][i] * (c[1][i] + max(r, z_min)) for c in cols if c[2][i] == c[2][i]
                               and c[1][i] == c[1][i]])
        out.append(ramp + trips * 2.0 * total * (1.0 + min(atten, 2.0)) + max(12.0 * tau, 6.0 * tau_end) + 4.0 * ramp)
    return out


@settings(max_examples=60, deadline=None)
@given(hst.lists(hst.tuples(hst.floats(20, 120), hst.floats(5e-12, 2e-9), losses_st), min_size=1, max_size=4),
       hst.sampled_from([0.0, 22.0]),
       hst.lists(hst.sampled_from([5.0, 25.0, 49.0, 50.0, 1e6, float("nan")]) | hst.floats(1.0, 200.0),
                 min_size=1, max_size=5),
       hst.lists(hst.sampled_from(range(len(LOADS))), min_size=1, max_size=2), hst.booleans())
def test_window_estimate_as_written(spec, before_ohm, rs, loads, per_candidate):
    # ties with the least Z, a driver far above it (no decay), NaN, a series part before the first line, one
    # load row for all or one per candidate, a second load node
    lines = [Line(z, td, lo) for z, td, lo in spec]
    parts = [Series(ohm=before_ohm)] if before_ohm else []
    net, end = Network.chain(parts + lines)
    m = len(rs)
    sets = {end - k: LoadSet.of([LOADS[i]] * (m if per_candidate else 1)) for k, i in enumerate(loads)}
    cols = [[(getattr(ls, f).tolist() * m)[:m] for f in ("cap", "end_ohm", "end_cap")] for ls in sets.values()]
    got = settle_window(net, np.array(rs), sets, 0.3e-9).tolist()
    want = _window_as_written(lines, before_ohm, rs, cols, 0.3e-9)
    assert [x if x == x else "nan" for x in got] == [x if x == x else "nan" for x in want]
