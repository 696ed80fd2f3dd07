"""Waveforms on branched nets (termination_choice.choose with a tree; waveform_review with from/to nodes).

Outside reference: ngspice (general-purpose circuit simulator) with lossless T elements, the same
tolerances as the chain tests in tests/test_transient.py (metrics within 0.5 % of the swing and 5 ps).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from ngspice_ref import needs_ngspice, transient
from sicheck.physics.termination_choice import Limits, choose
from sicheck.physics.transient import receiver_metrics


# A T with a stub at mid-trunk: driver -> 20 mm -> M -> 20 mm -> T; T -> 30 mm -> U2.1 (50 ohm) and
# T -> 30 mm -> U3.1 (60 ohm), 3 pF each; M -> 10 mm -> an open test pad. About 6.1 ps/mm.
Z = [50.0, 50.0, 50.0, 60.0, 50.0]
TD = [122e-12, 122e-12, 183e-12, 183e-12, 61e-12]
PARENTS = [-1, 0, 1, 1, 0]
RX = [(2, 3e-12, "U2.1"), (3, 3e-12, "U3.1")]
SWING, RISE, RDRV = 3.3, 0.3e-9, 25.0


def spice_tree(tmp_path, r_series: float, end: str, t_end: float, step: float):
    """ngspice on the same T; returns (t, v(rx1), v(rx2)). `end`: extra elements at rx1 (the main path's end)."""
    drive = f"R1 src d {RDRV}\nRs d a {r_series}" if r_series else f"R1 src a {RDRV}"
    body = f"""V1 src 0 PWL(0 0 {RISE / 0.8:.6e} {SWING})
{drive}
T1 a 0 m 0 Z0=50 TD=122p
T2 m 0 t 0 Z0=50 TD=122p
T3 t 0 rx1 0 Z0=50 TD=183p
T4 t 0 rx2 0 Z0=60 TD=183p
T5 m 0 tp 0 Z0=50 TD=61p
Rleak tp 0 1e12
C1 rx1 0 3p
C2 rx2 0 3p
{end}"""
    t, (v1, v2) = transient(tmp_path, "T with a mid-trunk stub", body, step, t_end, ("rx1", "rx2"))
    return t, v1, v2


@needs_ngspice
def test_t_with_stub_each_receiver_against_ngspice(tmp_path):
    none, rec, cands = choose(Z, TD, RISE, RDRV, SWING, 0.0, Limits(), parents=PARENTS, receivers=RX)
    assert [r["receiver"] for r in none.receivers] == ["U2.1", "U3.1"]
    series = next(c for c in cands if c.scheme == "series")
    checked = [(none, 0.0, ""), (series, series.series_ohm, "")]
    par = next((c for c in cands if c.scheme == "parallel"), None)
    if par is not None:     # a far-end part sits at the main path's end only
        checked.append((par, 0.0, f"Rt rx1 vt {par.end_ohm}\nVt vt 0 {SWING / 2}"))
    ramp = RISE / 0.8
    for cand, rs, end in checked:
        t_end = cand.receivers[0]["metrics"]["window_ns"] * 1e-9
        t, v1, v2 = spice_tree(tmp_path, rs, end, t_end, ramp / 400)
        for rx, v_ref in zip(cand.receivers, (v1, v2)):
            ours = rx["metrics"]
            ref = receiver_metrics(t, v_ref, ours["v_final"], ramp)
            for k in ("v_max", "ringback"):
                assert ours[k] == pytest.approx(ref[k], abs=0.005 * SWING), (cand.scheme, rx["receiver"], k)
            for k in ("flight_ns", "settle_ns"):
                assert ours[k] == pytest.approx(ref[k], abs=0.005), (cand.scheme, rx["receiver"], k)
        # the candidate reports its worst receiver, and meets only when every receiver does
        assert cand.metrics is cand.receivers[cand.worst]["metrics"]
        assert cand.meets == all(r["meets"] for r in cand.receivers)


def test_branch_receivers_differ_and_chain_is_unchanged():
    none, _, _ = choose(Z, TD, RISE, RDRV, SWING, 0.0, Limits(), parents=PARENTS, receivers=RX)
    a, b = (r["metrics"]["v_max"] for r in none.receivers)
    assert abs(a - b) > 0.002          # different branch impedances: different waveforms (8 mV here)
    # a chain given as a tree equals the chain
    c1, _, _ = choose([50.0, 60.0], [0.3e-9, 0.2e-9], RISE, RDRV, SWING, 2e-12, Limits())
    c2, _, _ = choose([50.0, 60.0], [0.3e-9, 0.2e-9], RISE, RDRV, SWING, 0.0, Limits(), parents=[-1, 0],
                      receivers=[(1, 2e-12, "U9.1")])
    assert c1.metrics == c2.metrics


@settings(max_examples=12, deadline=None)
@given(st.permutations(range(len(Z))))
def test_shuffled_lines_give_the_same_result(perm):
    # the same tree with its lines numbered in another order (as rows listed in another order)
    new_of = {old: k for k, old in enumerate(perm)}
    z = [Z[o] for o in perm]
    td = [TD[o] for o in perm]
    parents = [-1 if PARENTS[o] < 0 else new_of[PARENTS[o]] for o in perm]
    rx = [(new_of[i], c, n) for i, c, n in RX]
    ref = choose(Z, TD, RISE, RDRV, SWING, 0.0, Limits(), parents=PARENTS, receivers=RX)
    got = choose(z, td, RISE, RDRV, SWING, 0.0, Limits(), parents=parents, receivers=rx)
    for a, b in zip(ref[0].receivers + ref[1].receivers, got[0].receivers + got[1].receivers):
        for k in ("v_max", "ringback", "settle_ns", "flight_ns"):
            assert b["metrics"][k] == pytest.approx(a["metrics"][k], rel=1e-7, abs=1e-9)
    assert got[1].text == ref[1].text


HEAD = "net,layer,length,width,rise_time,from,to,driver,load_pf,driver_ohm\n"
ROWS = ["BUS,L1,20mm,0.3mm,300ps,U1.1,M,U1.1,,10",
        "BUS,L1,20mm,0.3mm,300ps,M,T,,,",
        "BUS,L1,30mm,0.3mm,300ps,T,U2.1,,3,",
        "BUS,L1,30mm,0.25mm,300ps,T,U3.1,,5,",
        "BUS,L1,10mm,0.3mm,300ps,M,TP7,,,"]


def test_review_every_receiver_in_json_and_order_does_not_matter(run, board, tmp_path):
    def review(lines):
        tr, stk = board(HEAD + "\n".join(lines) + "\n")
        js = tmp_path / "r.json"
        code, _, err = run("review", tr, "--stackup", stk, "--json", js)
        assert code in (0, 1), err
        return json.loads(js.read_text())["nets"][0]
    fwd = review(ROWS)
    rev = []
    for line in reversed(ROWS):
        c = line.split(",")
        c[5], c[6] = c[6], c[5]
        rev.append(",".join(c))
    back = review(rev)
    rx = {r["receiver"]: r for r in fwd["receivers"]}
    assert set(rx) == {"U2.1", "U3.1"} and rx["U3.1"]["load_pf"] == 5.0 and rx["U2.1"]["load_pf"] == 3.0
    assert fwd["simulation"]["topology"]["open_ends"] == ["TP7"]
    # the net's metrics are its worst receiver's
    assert fwd["before"]["overshoot_pct"] in [r["before"]["overshoot_pct"] for r in fwd["receivers"]]
    for k in ("receivers", "recommended_termination", "before", "after", "length_mm", "delay_ps"):
        assert fwd[k] == back[k], k
