"""Receivers terminated on the die (sicheck/on_die.py, physics/termination_choice.py `on_die`).

Outside reference: ngspice (general-purpose circuit simulator) with a lossless T element, compared with
the tolerances of the waveform tests in tests/test_transient.py (metrics within 0.5 % of the swing and
5 ps). The on-die equivalence is checked inside the engine: an on-die termination must give the same
waveform as the chooser's own external termination of the same value at the receiver.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from ngspice_ref import needs_ngspice, ramp_run
from sicheck.errors import InputError
from sicheck.physics.termination_choice import Limits, choose
from sicheck.physics.transient import receiver_metrics
from sicheck.rules import load_rule_sets, load_rules

KEYS_V = ("v_max", "ringback")
KEYS_T = ("flight_ns", "settle_ns")


def _same(a: dict, b: dict, swing: float):
    for k in KEYS_V:
        assert a[k] == pytest.approx(b[k], abs=0.005 * swing), k
    for k in KEYS_T:
        assert a[k] == pytest.approx(b[k], abs=0.005), k


def test_on_die_equals_external_parallel_termination_single_line():
    # A settling limit nothing meets makes the chooser simulate its parallel terminations too.
    lim = Limits(max_settle_ns=1.0)
    _, _, cands = choose([50.0], [1e-9], 0.3e-9, 10.0, 3.3, 2e-12, lim)
    parallel = [c for c in cands if c.scheme == "parallel"]
    assert len(parallel) == 3
    for p in parallel:
        before, after, od = choose([50.0], [1e-9], 0.3e-9, 10.0, 3.3, 2e-12, lim, on_die=(p.end_ohm, 1.65, "on die"))
        assert before.scheme == "on-die"
        _same(before.metrics, p.metrics, 3.3)
        # only series parts at the driver are offered beside it, never a second parallel termination
        assert {c.scheme for c in od} <= {"on-die", "series"}


def test_on_die_equals_differential_resistor_for_a_pair():
    _, _, cands = choose([48.0], [1e-9], 0.25e-9, 25.0, 0.35, 2e-12, Limits(), zdiff=96.0)
    for d in (c for c in cands if c.scheme == "differential"):
        before, _, _ = choose([48.0], [1e-9], 0.25e-9, 25.0, 0.35, 2e-12, Limits(), zdiff=96.0,
                              on_die=(d.end_ohm / 2, 0.0, "on die"))
        _same(before.metrics, d.metrics, 0.35)


def test_on_die_met_needs_no_part_and_unmet_gets_a_series_part():
    before, after, cands = choose([50.0], [1e-9], 0.3e-9, 25.0, 3.3, 2e-12, Limits(), on_die=(50.0, 0.0, "od"))
    assert after is before and after.scheme == "on-die" and after.meets and len(cands) == 1
    # a strong driver into a 100 ohm on-die load on a 40 ohm line rings: a series part adds to it
    before, after, cands = choose([40.0], [1e-9], 0.3e-9, 10.0, 3.3, 2e-12, Limits(), on_die=(100.0, 0.0, "od"))
    assert not before.meets and after.scheme == "series" and after.meets
    assert "with the on-die termination" in after.text


@needs_ngspice
def test_on_die_single_line_against_ngspice(tmp_path):
    # DDR3-like data line: 34 ohm driver, 50 ohm 1 ns line, 60 ohm on the die to 0.75 V, 2 pF.
    swing, rise = 1.5, 0.3e-9
    ramp = rise / 0.8
    before, _, _ = choose([50.0], [1e-9], rise, 34.0, swing, 2e-12, Limits(), on_die=(60.0, 0.75, "od"))
    ours = before.metrics
    t_end = ours["window_ns"] * 1e-9
    t, v = ramp_run(tmp_path, "R1 src a 34\nT1 a 0 rx 0 Z0=50 TD=1n\nRodt rx vt 60\nVt vt 0 0.75\nC1 rx 0 2p", swing, ramp,
                    t_end, ramp / 400)
    ref = receiver_metrics(t, v, ours["v_final"], ramp)
    _same(ours, ref, swing)
    # DC: the divider 0.75 + (1.5 - 0.75) x 60 / 94
    assert ours["v_final"] == pytest.approx(0.75 + 0.75 * 60 / 94, rel=1e-3)


# ---------------------------------------------------------------- rules keys

def test_shipped_interface_classes_load():
    rules = load_rule_sets(["rules/default.toml", "rules/interfaces.toml"])
    usb = rules.class_named("USB2_HS")
    assert rules.value("on_die_ohm", usb) == 90 and rules.value("driver_on_die_ohm", usb) == 45
    ddr = rules.class_named("DDR3_DQ")
    assert rules.value("on_die_to", ddr) == 0.75
    assert rules.value("on_die_to", rules.class_named("LVDS_ON_DIE")) == 0.0     # default: ground


def test_interfaces_file_loads_from_the_cli(run):
    code, out, err = run("rules", "--rules", "rules/interfaces.toml")
    assert code == 0, err
    assert "USB2_HS" in out and "on_die_ohm" in out


@pytest.mark.parametrize("text,key", [
    ("on_die_ohm = -5", "on_die_ohm"),
    ("on_die_ohm = 0.2", "on_die_ohm"),
    ('on_die_ohm = "100"', "on_die_ohm"),
    ("on_die_to = 400", "on_die_to"),
    ("driver_on_die_ohm = 1e6", "driver_on_die_ohm"),
])
def test_bad_on_die_values_name_file_line_and_key(tmp_path, run, text, key):
    p = tmp_path / "r.toml"
    p.write_text(f'[[net_class]]\nname = "A"\nmatch = ["A*"]\n{text}\n')
    with pytest.raises(InputError) as e:
        load_rules(p)
    assert e.value.key == key and e.value.line == 4 and e.value.file == str(p)
    code, _, err = run("rules", "--rules", p)
    assert code == 2 and "r.toml" in err and key in err and "Traceback" not in err


# ---------------------------------------------------------------- end to end

TRACES = """\
Net;Layer;Length [mil];Width [mil];Rise Time;Pair;Gap [mil];Net Class
LNK_P;L1;6000;5;150ps;LNK_N;6;
ODT_P;L1;6000;5;150ps;ODT_N;6;
"DQ;0";L1;5000;10;200ps;;;
HOT1;L1;5000;10;200ps;;;
"""
RULES = """\
[[net_class]]
name = "LINK"
match = ["LNK_*"]
zdiff = 100
[[net_class]]
name = "ODT PAIR"
match = ["ODT_*"]
zdiff = 100
on_die_ohm = 100
driver_on_die_ohm = 50
[[net_class]]
name = "DQ"
match = ["DQ*"]
z0 = 50
on_die_ohm = 51
on_die_to = 0.75
driver_on_die_ohm = 40
swing = "1.5V"
[[net_class]]
name = "STRONG"
match = ["HOT*"]
z0 = 50
on_die_ohm = 200
driver_on_die_ohm = 8
"""


def test_review_proposes_no_external_part_for_on_die_classes(run, board, tmp_path):
    tr, st, rp = board(TRACES, rules=RULES)
    js = tmp_path / "r.json"
    code, out, err = run("review", tr, "--stackup", st, "--rules", "rules/default.toml", "--rules", rp,
                         "--json", js)
    assert code in (0, 1), err
    data = json.loads(js.read_text())
    nets = {n["net"]: n for n in data["nets"]}
    # the plain pair gets its resistor across the receiver; the on-die ones get no part
    assert nets["LNK_P"]["termination_scheme"] == "differential" and nets["LNK_P"]["on_die"] is None
    for net in ("ODT_P", "DQ;0"):
        n = nets[net]
        assert n["on_die"] and n["termination_scheme"] == "on-die", n
        assert n["recommended_termination"].startswith("no external part: terminated on the die"), n
        assert n["meets_limits"] is True
        assert n["series_ohm"] is None and "terminated on the die" in n["advice"]
    assert nets["ODT_P"]["on_die"] == "on-die 100 ohm differential"
    assert "to 0.75 V" in nets["DQ;0"]["recommended_termination"]
    sim = nets["DQ;0"]["simulation"]
    assert sim["driver_ohm"] == {"value": 40.0, "source": "net class 'DQ' driver_on_die_ohm"}
    assert sim["on_die"]["ohm"] == 51 and sim["on_die"]["to_v"] == 0.75
    assert nets["ODT_P"]["simulation"]["on_die"]["simulated_ohm"] == 50      # odd mode: half
    lengths = [f for f in data["findings"] if f["rule"] == "electrical-length"]
    assert any("terminated on the die" in f["message"] for f in lengths)
    assert not any("across the receiver" in f["message"] for f in lengths if "ODT" in f["net"])
    # limits not met with the on-die termination: a series part at the driver on top of it, said so
    hot = nets["HOT1"]
    assert hot["termination_scheme"] == "series" and "with the on-die termination" in hot["recommended_termination"]
    assert "only a series part at the driver" in hot["assumptions"]


def test_on_die_sits_at_every_receiver_of_a_tree():
    # driver -> 20 mm trunk -> T -> two 30 mm branches; on-die 50 ohm at both receivers
    z, td, parents = [50.0, 50.0, 50.0], [120e-12, 180e-12, 180e-12], [-1, 0, 0]
    rx = [(1, 2e-12, "U2.1"), (2, 2e-12, "U3.1")]
    before, _, _ = choose(z, td, 0.3e-9, 25.0, 3.3, 0.0, Limits(), parents=parents, receivers=rx,
                          on_die=(50.0, 0.0, "od"))
    # DC: the driver into two 50 ohm terminations in parallel, 3.3 x 25 / (25 + 25) at each receiver
    for r in before.receivers:
        assert r["metrics"]["v_final"] == pytest.approx(3.3 * 25 / 50, rel=1e-3)
