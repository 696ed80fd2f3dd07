"""The waveform stage's per-net inputs worked out over all nets at once (waveform_review._Chains,
SegmentLosses.of) give, to the last bit, what the same operations give net by net."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hst

from sicheck.physics.causal_line import LineLoss
from sicheck.physics.loss import NP_TO_DB, RHO_COPPER
from sicheck.waveform_review import IN_ORDER_MAX, SegmentLosses, _Chains

# values of very different sizes and signs (and -0.0): where the order of the additions shows
values = hst.one_of(hst.floats(-1e6, 1e6, allow_nan=False), hst.sampled_from([0.0, -0.0, 1e-12, 1e12, 0.1, 0.7]))
nets = hst.lists(hst.lists(values, min_size=1, max_size=3 * IN_ORDER_MAX), min_size=1, max_size=12)


def _chains(parts):
    """A segment table in shuffled order and the chains of the nets' segments in it."""
    flat = [v for p in parts for v in p]
    perm = np.random.default_rng(len(flat)).permutation(len(flat))
    table = np.empty(len(flat))
    table[perm] = flat
    ixs, k = [], 0
    for p in parts:
        ixs.append(perm[k:k + len(p)])
        k += len(p)
    return table, ixs, _Chains(ixs)


def _same(a, b):
    return a == b and math.copysign(1.0, a) == math.copysign(1.0, b)


@settings(max_examples=300, deadline=None)
@given(nets)
def test_net_sums_are_numpys_own_sums(parts):
    # the reference is numpy's sum of each net's values, as the stage took it before (a.sum() per net)
    table, ixs, ch = _chains(parts)
    got = ch.sums(table[ch.cat]).tolist()
    want = [float(table[ix].sum()) for ix in ixs]
    assert all(_same(g, w) for g, w in zip(got, want)), (got, want)


def test_numpy_adds_short_arrays_in_order():
    # what _Chains.sums relies on for nets of up to IN_ORDER_MAX segments: numpy's sum of so few values is
    # 0.0 + a0 + a1 + ... in order. Values chosen so that another order gives another last bit.
    rng = np.random.default_rng(5)
    for n in range(1, IN_ORDER_MAX + 1):
        for _ in range(500):
            a = rng.uniform(0, 1, n) * 10.0 ** rng.integers(-6, 7, n)
            s = 0.0
            for v in a.tolist():
                s += v
            assert a.sum() == s


@settings(max_examples=200, deadline=None)
@given(hst.lists(hst.lists(hst.booleans(), min_size=1, max_size=9), min_size=1, max_size=12))
def test_net_tests_match_per_net_ones(parts):
    flat = np.array([v for p in parts for v in p], dtype=float)
    table, ixs, ch = _chains(parts)
    mask = table.astype(bool)[ch.cat]
    assert ch.first_true(mask).tolist() == [int(np.argmax(table.astype(bool)[ix])) for ix in ixs]
    assert ch.any(mask).tolist() == [bool(np.any(table.astype(bool)[ix])) for ix in ixs]
    assert ch.all(mask).tolist() == [bool(np.all(table.astype(bool)[ix])) for ix in ixs]
    assert [p.tolist() for p in ch.split(table[ch.cat])] == [table[ix].tolist() for ix in ixs]
    assert sorted(ch.cat.tolist()) == list(range(len(flat)))


def test_no_nets():
    ch = _Chains([])
    assert ch.sums(np.zeros(0)).tolist() == [] and ch.any(np.zeros(0, bool)).tolist() == []


def test_segment_losses_match_the_formula_segment_by_segment():
    # reference: the module doc's formulas for one segment in plain Python floats (R at f0 = 2 Z alpha_c
    # length; tan d = alpha_d length / (pi f0 delay), at most 0.5; R_dc = rho length / area)
    rng = np.random.default_rng(3)
    n = 200
    z, td, ln = rng.uniform(30, 120, n), rng.uniform(1e-11, 1e-9, n), rng.uniform(1e-3, 0.1, n)
    f = rng.choice([1e8, 1.25e9, 5e9], n)
    a_c, a_d = rng.uniform(0, 30, n), rng.uniform(0, 30, n)
    a_c[::7] = np.nan                  # no loss data for some segments
    a_d[::7] = np.nan
    area = rng.uniform(1e-9, 1e-8, n)
    area[::5] = np.nan
    for area_given in (area, [None if math.isnan(a) else a for a in area.tolist()]):
        sl = SegmentLosses(z, td, ln, f, a_c, a_d, area_given)
        segments = rng.integers(0, n, 300)
        z_odd = rng.uniform(20, 60, 300)
        for zs in (None, z_odd):
            got = sl.of(segments, zs)
            for k, j in enumerate(segments.tolist()):
                ac = (0.0 if math.isnan(a_c[j]) else float(a_c[j])) / NP_TO_DB
                ad = (0.0 if math.isnan(a_d[j]) else float(a_d[j])) / NP_TO_DB
                r_dc = 0.0 if math.isnan(area[j]) else RHO_COPPER * float(ln[j]) / float(area[j])
                zj = float(z[j] if zs is None else zs[k])
                want = (None if ac == 0.0 and ad == 0.0 and r_dc == 0.0 else
                        LineLoss(f_ref=float(f[j]), r_ac=2.0 * zj * ac * float(ln[j]),
                                 tan_delta=min(ad * float(ln[j]) / (math.pi * float(f[j]) * float(td[j])), 0.5),
                                 r_dc=r_dc))
                assert got[k] == want


def _job(i, z=50.0):
    from sicheck.physics.termination_choice import Limits
    return (i, (np.array([z]), np.array([1e-9]), 0.5e-9, 15.0, 3.3, 2e-12, Limits(), None, [None], None, None, None))


def test_pool_takes_jobs_as_they_are_made(monkeypatch):
    # the first chunk is simulated while later jobs are still being prepared; results come in the jobs' order,
    # the same as without the pool
    import multiprocessing

    from sicheck import waveform_review as wr
    monkeypatch.setenv("SICHECK_WORKERS", "2")
    monkeypatch.setattr(wr, "POOL_MIN_NETS", 2)
    monkeypatch.setattr(wr, "CHUNK_MIN", 2)
    workers_seen = []

    def jobs():
        for i in range(8):
            if i == 4:                      # two chunks (of 2) handed out by now
                workers_seen.append(len(multiprocessing.active_children()))
            yield _job(i, 30.0 + 10 * i)

    pooled = list(wr.run_jobs(jobs(), 8))
    assert workers_seen[0] >= 1
    serial = wr._choose_chunk([_job(i, 30.0 + 10 * i) for i in range(8)])
    assert [i for i, _ in pooled] == list(range(8))
    assert [r.metrics for _, r in pooled] == [r.metrics for _, r in serial]
    assert [r.part for _, r in pooled] == [r.part for _, r in serial]


def test_pool_error_reaches_the_caller(monkeypatch):
    import multiprocessing

    from sicheck import waveform_review as wr
    monkeypatch.setenv("SICHECK_WORKERS", "2")
    monkeypatch.setattr(wr, "POOL_MIN_NETS", 2)
    monkeypatch.setattr(wr, "CHUNK_MIN", 2)
    jobs = [_job(i) for i in range(6)]
    jobs[3] = (3, (None,) + jobs[3][1][1:])          # not a number: a bug, not a net that cannot be simulated
    with pytest.raises(TypeError):
        list(wr.run_jobs(iter(jobs), len(jobs)))
    assert not multiprocessing.active_children()


def test_a_chunk_leaves_the_garbage_collector_as_it_found_it():
    # the collector is off while a chunk is simulated (no cycles are made): on again after it, after a bug's
    # exception too, and left off when the caller had it off
    import gc

    from sicheck import waveform_review as wr
    bad = (0, (None,) + _job(0)[1][1:])
    try:
        for was_on in (True, False):
            (gc.enable if was_on else gc.disable)()
            assert isinstance(wr._choose_chunk([_job(0)])[0][1], wr.Outcome)
            assert gc.isenabled() == was_on
            with pytest.raises(TypeError):
                wr._choose_chunk([bad])
            assert gc.isenabled() == was_on
    finally:
        gc.enable()
