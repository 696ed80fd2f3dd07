"""Nets continuing through a part in series (trace-list columns continues / part; sicheck/series_parts.py).

Outside reference for the waveforms: ngspice (general-purpose circuit simulator) with lossless T
elements and an R or C element for the part, at the tolerances of the waveform tests
(tests/test_transient.py, tests/test_tree_waveforms.py: metrics within 0.5 % of the swing and 5 ps).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from ngspice_ref import needs_ngspice, ramp_run
from sicheck.errors import InputError
from sicheck.physics.causal_line import Line
from sicheck.physics.line_network import Network, Series, simulate_network
from sicheck.physics.transient import Load, LoadSet
from sicheck.physics.termination_choice import Limits, choose
from sicheck.physics.transient import receiver_metrics
from sicheck.series_parts import parse_part



def spice(tmp_path, body: str, vin: float, ramp: float, t_end: float) -> tuple[np.ndarray, np.ndarray]:
    return ramp_run(tmp_path, body, vin, ramp, t_end, ramp / 400)


def same_metrics(ours: dict, t, v, ramp, swing):
    ref = receiver_metrics(t, v, ours["v_final"], ramp)
    for k in ("v_max", "ringback"):
        assert ours[k] == pytest.approx(ref[k], abs=0.005 * swing), k
    for k in ("flight_ns", "settle_ns"):
        assert ours[k] == pytest.approx(ref[k], abs=0.005), k


@needs_ngspice
def test_series_resistor_then_line_against_ngspice(tmp_path):
    # driver 10 ohm -> 5 mm (30 ps, 50 ohm) -> 22 ohm -> 50 mm (300 ps, 55 ohm) -> 3 pF
    swing, rise = 3.3, 0.3e-9
    none, rec, cands = choose([50.0, 55.0], [30e-12, 300e-12], rise, 10.0, swing, 3e-12, Limits(),
                              parts={0: Series(ohm=22.0)})
    ramp = rise / 0.8
    for cand in {id(c): c for c in (none, rec)}.values():
        rs = cand.series_ohm or 0.0
        drive = f"R1 src d 10\nRx d a {rs}" if rs else "R1 src a 10"
        body = f"{drive}\nT1 a 0 m 0 Z0=50 TD=30p\nRp m n 22\nT2 n 0 rx 0 Z0=55 TD=300p\nC1 rx 0 3p"
        if cand.end_ohm is not None:
            body += f"\nRt rx vt {cand.end_ohm}\nVt vt 0 {swing / 2}"
        t, v = spice(tmp_path, body, swing, ramp, cand.metrics["window_ns"] * 1e-9)
        same_metrics(cand.metrics, t, v, ramp, swing)
    # the resistor is in the chain: it damps the ringing of the bare line
    bare, _, _ = choose([50.0, 55.0], [30e-12, 300e-12], rise, 10.0, swing, 3e-12, Limits())
    assert none.metrics["overshoot_pct"] < bare.metrics["overshoot_pct"] - 5


@needs_ngspice
def test_ac_coupled_line_into_100_ohm_against_ngspice(tmp_path):
    # driver 40 ohm -> 60 mm (360 ps, 50 ohm) -> 100 nF -> receiver 100 ohm to ground, 1 pF
    swing, rise, rdrv = 1.0, 60e-12, 40.0
    net = Network()
    end = net.add(0, Line(50.0, 360e-12))
    rx = net.add(end, Series(farad=100e-9, dc_open=False))
    wf = simulate_network(net, [rx], swing, rise, [rdrv], {rx: LoadSet.of([Load(cap=1e-12, end_ohm=100.0)])})[rx][0]
    ramp = rise / 0.8
    # ngspice: the capacitor straight into the receiver (a line after it leaves ngspice's matrix singular)
    t, v = spice(tmp_path, f"R1 src a {rdrv}\nT1 a 0 m 0 Z0=50 TD=360p\nCs m rx 100n\nC1 rx 0 1p\nRt rx 0 100",
                 swing, ramp, wf.metrics["window_ns"] * 1e-9)
    same_metrics(wf.metrics, t, v, ramp, swing)
    # within the window the capacitor passes the edge: the level is the resistive divider (exact)
    assert wf.v_final == pytest.approx(swing * 100 / (100 + rdrv), rel=1e-6)
    # a series capacitor in a chosen net: its level too (the 5 mm after it is part of the net)
    none, _, _ = choose([50.0, 50.0], [360e-12, 30e-12], rise, rdrv, swing, 1e-12, Limits(),
                        parts={0: Series(farad=100e-9, dc_open=False)})
    assert none.metrics["v_final"] == pytest.approx(swing, rel=1e-6)     # no resistor at the end: the swing


@pytest.mark.parametrize("text,ohm,farad", [("22ohm", 22.0, None), ("0ohm", 0.0, None), ("100nF", 0.0, 1e-7),
                                            ("1kohm", 1e3, None), ("4.7 uF", 0.0, 4.7e-6)])
def test_parse_part(text, ohm, farad):
    got = parse_part(text, "t.csv", 3)
    assert got[0] == pytest.approx(ohm) and (got[1] is None) == (farad is None)
    if farad is not None:
        assert got[1] == pytest.approx(farad)


@pytest.mark.parametrize("text,word", [("100", "unit"), ("22mm", "neither"), ("1F", "implausibly large"),
                                       ("-5ohm", "negative"), ("cap", "unit")])
def test_parse_part_errors(text, word):
    with pytest.raises(InputError) as e:
        parse_part(text, "t.csv", 7)
    assert word in str(e.value) and e.value.row == 7 and e.value.column == "part"


@settings(max_examples=30, deadline=None)
@given(st.floats(1.0, 9.99e3))
def test_parse_part_ohm_roundtrip(x):
    assert parse_part(f"{x:.6g}ohm", "t.csv", 2)[0] == pytest.approx(float(f"{x:.6g}"))


HEAD = "net;layer;length [mil];width [mil];rise_time;driver_ohm;load_pf;continues;part\n"
AC = ["TX;L1;2400;14;60ps;40;;TX_C;100nF",
      "TX_C;L1;193;14;60ps;;1;;"]
CK = ["CK_SRC;L1;300;14;300ps;10;;CK;22ohm",
      "CK;L1;2000;14;300ps;;3;;",
      "CK;L1;1000;14;300ps;;3;;"]


def review(run, board, tmp_path, lines, head=HEAD):
    tr, stk = board(head + "\n".join(lines) + "\n")
    js = tmp_path / "r.json"
    code, out, err = run("review", tr, "--stackup", stk, "--json", js)
    return code, out, err, (json.loads(js.read_text()) if code in (0, 1) else None)


def test_joined_nets_reviewed_once_end_to_end(run, board, tmp_path):
    # alone, the 4.9 mm piece after the capacitor gets its own termination proposal
    code, _, err, alone = review(run, board, tmp_path, [a.rsplit(";", 2)[0] + ";;" for a in AC])
    assert code in (0, 1), err
    piece = next(n for n in alone["nets"] if n["net"] == "TX_C")
    assert piece["termination"] != "not-needed" and piece["recommended_termination"] not in ("", "none")
    code, out, err, js = review(run, board, tmp_path, AC + CK)
    assert code in (0, 1), err
    nets = {n["net"]: n for n in js["nets"]}
    assert set(nets) == {"TX → TX_C", "CK_SRC → CK"}
    assert "TX → TX_C" in out
    # one electrical length: both sides (the part adds none); 2400 + 193 mil and 300 + 3000 mil
    assert nets["TX → TX_C"]["length_mm"] == pytest.approx(2593 * 0.0254, rel=1e-6)
    assert nets["CK_SRC → CK"]["length_mm"] == pytest.approx(3300 * 0.0254, rel=1e-6)
    sim = nets["CK_SRC → CK"]["simulation"]
    assert sim["series_parts"] == [{"after_row": 4, "ohm": 22.0, "farad": None}]
    assert nets["TX → TX_C"]["simulation"]["series_parts"][0]["farad"] == pytest.approx(1e-7)
    # every finding names the joined net, never a piece; each row keeps its routed net
    named = [n for f in js["findings"] if f["net"] for n in f["net"].split(", ")]
    assert named and all(n in nets for n in named)
    assert sum(f["rule"] == "electrical-length" and f["net"] == "TX → TX_C" for f in js["findings"]) == 1
    assert {s["routed_net"] for s in js["segments"]} == {"TX", "TX_C", "CK_SRC", "CK"}
    assert [s.get("part_after") for s in js["segments"] if s["routed_net"] == "CK_SRC"] == [{"ohm": 22.0}]


def test_joined_with_nodes_is_one_tree(run, board, tmp_path):
    head = "net;layer;length [mil];width [mil];rise_time;driver_ohm;load_pf;from;to;continues;part\n"
    lines = ["TX_C;L1;193;14;60ps;;1;C5.2;U2.1;;",        # listed first: the driver still comes from TX
             "TX;L1;1200;14;60ps;40;;U1.1;V1;;",
             "TX;L1;1200;14;60ps;;;V1;C5.1;TX_C;100nF"]
    code, _, err, js = review(run, board, tmp_path, lines, head)
    assert code in (0, 1), err
    (net,) = js["nets"]
    assert net["net"] == "TX_C → TX" or net["net"] == "TX → TX_C"
    assert net["net"] == "TX → TX_C"
    assert net["length_mm"] == pytest.approx(2593 * 0.0254, rel=1e-6)
    topo = net["simulation"]["topology"]
    assert topo["driver"] == "U1.1" and [r["receiver"] for r in net["receivers"]] == ["U2.1"]


@pytest.mark.parametrize("lines,row,column,word", [
    (["A;L1;1000;14;100ps;;;B;100nF", "B;L1;1000;14;100ps;;;A;0ohm"], 2, "continues", "loop"),
    (["A;L1;1000;14;100ps;;;NOPE;100nF"], 2, "continues", "not a net"),
    (["A;L1;1000;14;100ps;;;B;", "B;L1;1000;14;100ps;;;;"], 2, "part", "go together"),
    (["A;L1;1000;14;100ps;;;B;100", "B;L1;1000;14;100ps;;;;"], 2, "part", "unit"),
    (["A;L1;1000;14;100ps;;;B;22ohm", "A;L1;1000;14;100ps;;;;", "B;L1;1000;14;100ps;;;;"], 2, "continues",
     "not its last"),
    (["A;L1;1000;14;100ps;;;C;1nF", "B;L1;1000;14;100ps;;;C;1nF", "C;L1;1000;14;100ps;;;;"], 3, "continues",
     "both continue"),
])
def test_input_errors_name_row_and_column(run, board, tmp_path, lines, row, column, word):
    code, _, err, _ = review(run, board, tmp_path, lines)
    assert code == 2, err
    assert word in err and f"row {row}" in err and column in err, err


def test_part_on_the_driver_side_of_its_row_is_an_error(run, board, tmp_path):
    head = "net;layer;length [mil];width [mil];rise_time;driver_ohm;load_pf;from;to;driver;continues;part\n"
    lines = ["TX;L1;1200;14;60ps;40;;U1.1;V1;U1.1;;",
             "TX;L1;1200;14;60ps;;;C5.1;V1;;TX_C;100nF",      # 'to' is V1, toward the driver
             "TX_C;L1;193;14;60ps;;1;C5.2;U2.1;;;"]
    code, _, err, _ = review(run, board, tmp_path, lines, head)
    assert code == 2 and "row 3" in err and "toward the driver" in err, err


PLAIN = "net;layer;length [mil];width [mil];rise_time;driver_ohm;load_pf\n"


def test_series_part_table_in_the_rules(run, board, tmp_path):
    rules = '[[series_part]]\nfrom = "TX*"\nto = "{}_C"\npart = "100nF"\n'
    tr, stk, rp = board(PLAIN + "TX;L1;2400;14;60ps;40;\nTX_C;L1;193;14;60ps;;1\nRX;L1;900;14;60ps;40;1\n",
                        rules=rules)
    js = tmp_path / "r.json"
    code, _, err = run("review", tr, "--stackup", stk, "--rules", rp, "--json", js)
    assert code in (0, 1), err
    nets = {n["net"]: n for n in json.loads(js.read_text())["nets"]}
    assert set(nets) == {"TX → TX_C", "RX"}
    assert nets["TX → TX_C"]["simulation"]["series_parts"][0]["farad"] == pytest.approx(1e-7)


@pytest.mark.parametrize("table,key", [('from = "TX*"\nto = "{}_C"\n', "part"),
                                       ('from = "TX*"\nto = "{}_C"\npart = "100"\n', "part"),
                                       ('from = "TX*"\nto = "{}_C"\npart = "1nF"\nvalue = 3\n', "value")])
def test_series_part_table_errors(run, board, tmp_path, table, key):
    tr, stk, rp = board(PLAIN + "TX;L1;2400;14;60ps;40;\n", rules="[[series_part]]\n" + table)
    code, _, err = run("review", tr, "--stackup", stk, "--rules", rp)
    assert code == 2 and "rules.toml" in err and key in err, err
