"""Termination chosen by simulation, the `wave` command, and the waveform stage of `review`."""

import json

import numpy as np

import pytest
from openpyxl import load_workbook

from sicheck.physics import eseries
from sicheck.physics.termination_choice import Limits, choose


def test_series_value_follows_z0_minus_driver():
    # Series (source) termination Rs = Z0 - Rdrv (Johnson & Graham 1993, ch. 6); the chooser simulates the
    # E24 values around it and picks one of them.
    z0, rd = 50.0, 15.0
    none, rec, cands = choose([z0], [1e-9], 0.5e-9, rd, 3.3, 0.0, Limits())
    assert not none.meets and "overshoot" in none.violations[0]
    assert rec.scheme == "series" and rec.meets
    near = eseries.nearest(z0 - rd)
    assert rec.series_ohm in (near, *[c.series_ohm for c in cands if c.scheme == "series"])
    assert abs(rec.series_ohm - (z0 - rd)) / (z0 - rd) < 0.15
    assert rec.metrics["overshoot_pct"] < none.metrics["overshoot_pct"]


def test_strong_driver_with_low_impedance_line_uses_end_termination():
    # Driver impedance above Z0: no series part possible; an end termination must do it.
    none, rec, cands = choose([30.0], [1e-9], 0.3e-9, 45.0, 3.3, 2e-12, Limits(max_overshoot_pct=5))
    assert rec.scheme in ("rc", "parallel", "thevenin")
    assert all(c.scheme != "series" for c in cands)


def test_short_net_needs_nothing():
    none, rec, _ = choose([50.0], [50e-12], 1e-9, 25.0, 3.3, 2e-12, Limits())
    assert rec.scheme == "none" and rec.meets


def test_pair_gets_differential_resistor():
    none, rec, _ = choose([48.0], [1e-9], 0.25e-9, 25.0, 0.35, 2e-12, Limits(), zdiff=96.0)
    assert rec.scheme == "differential" and rec.end_ohm in (82.0, 91.0, 100.0, 110.0)


def test_wave_json(run):
    code, out, err = run("wave", "--z0", "50", "--delay", "1ns", "--driver-ohm", "15", "--swing", "3.3V",
                         "--rise", "0.5ns", "--series-ohm", "35", "--json")
    assert code == 0, err
    d = json.loads(out)
    for key in ("v_final", "v_max", "overshoot_pct", "ringback", "settle_ns", "flight_ns"):
        assert key in d
    # series-matched (15 + 35 = 50 ohm) into an open end: a clean full step at the receiver
    # (within the engine's sampling error at the ramp's kinks, 0.25 % of the swing; see line_network.py)
    assert d["overshoot_pct"] == pytest.approx(0.0, abs=0.3)
    assert d["v_final"] == pytest.approx(3.3)
    assert d["flight_ns"] == pytest.approx(1.0, abs=0.02)


def test_wave_parallel_end_and_errors(run, tmp_path):
    png = tmp_path / "w.png"
    code, out, err = run("wave", "--z0", "50", "--delay", "1ns", "--driver-ohm", "15", "--swing", "3.3",
                         "--rise", "500ps", "--end-ohm", "50", "--end-volts", "1.65V", "--plot", png)
    assert code == 0, err and png.exists()
    code, out, err = run("wave", "--z0", "50", "--delay", "-1ns", "--driver-ohm", "15", "--swing", "3.3",
                         "--rise", "500ps")
    assert code == 2 and "--delay" in err
    code, out, err = run("wave", "--z0", "50", "--delay", "1", "--driver-ohm", "15", "--swing", "3.3",
                         "--rise", "500ps")
    assert code == 2 and "no unit" in err


TRACES = """\
net,layer,length,width,rise_time,driver_ohm,pair,gap
CLK,L3,150mm,0.15mm,300ps,15,,
SHORT,L3,5mm,0.15mm,300ps,15,,
RX_P,L3,150mm,0.1mm,200ps,,RX_N,0.15mm
"""


def test_review_simulates_flagged_nets(run, board, tmp_path):
    tr, st = board(TRACES)
    js, out = tmp_path / "r.json", tmp_path / "r.xlsx"
    code, stdout, err = run("review", tr, "--stackup", st, "--solver", "formula", "--json", js, "--out", out)
    d = json.loads(js.read_text())
    nets = {n["net"]: n for n in d["nets"]}
    clk = nets["CLK"]
    assert clk["termination"] == "required"
    assert "series" in clk["recommended_termination"]
    assert clk["before"]["overshoot_pct"] > clk["after"]["overshoot_pct"] == clk["overshoot_pct"]
    assert clk["settle_ns"] == clk["after"]["settle_ns"]
    assert nets["SHORT"]["recommended_termination"] is None          # lumped: not simulated
    rx = nets["RX_P"]
    assert "across the receiver" in rx["recommended_termination"]
    assert "assumed driver" in rx["assumptions"]                    # driver impedance came from the rules
    wb = load_workbook(out)
    assert "Waveforms" in wb.sheetnames and len(wb["Waveforms"]._charts) >= 1
    hdr = [c.value for c in wb["Nets"][1]]
    assert "Overshoot before [%]" in hdr and "Simulated termination" in hdr


def test_wave_thevenin_equals_its_equivalent(run):
    # A Thevenin pair (100 ohm up to 3.3 V, 100 ohm down) is the same load as 50 ohm to 1.65 V.
    base = ["wave", "--z0", "50", "--delay", "1ns", "--driver-ohm", "15", "--swing", "3.3V", "--rise", "0.5ns", "--json"]
    a = json.loads(run(*base, "--end-up", "100", "--end-down", "100")[1])
    b = json.loads(run(*base, "--end-ohm", "50", "--end-volts", "1.65V")[1])
    assert a["v_final"] == pytest.approx(b["v_final"]) and a["v_max"] == pytest.approx(b["v_max"])
    assert a["v_final"] == pytest.approx((3.3 / 15 + 1.65 / 50) / (1 / 15 + 1 / 50))   # DC divider


WAVE = ["wave", "--z0", "50", "--delay", "1ns", "--driver-ohm", "15", "--swing", "3.3V", "--rise", "0.3ns",
        "--series-ohm", "35", "--json"]


def test_wave_loss_options(run):
    lossless = json.loads(run(*WAVE)[1])
    assert lossless["loss_included"] is False
    code, out, err = run(*WAVE, "--loss", "4dB@1GHz")
    assert code == 0, err
    lossy = json.loads(out)
    assert lossy["loss_included"] is True
    line = lossy["lines"][0]
    assert line["dielectric_share"] == 0.5 and line["rdc_ohm"] == 0.0
    # low-loss line (any transmission-line text): 2 dB of conductor loss is R = 2 Z0 alpha l; 2 dB of
    # dielectric loss is tan d = alpha l / (pi f TD)
    np_half = 2.0 / (20.0 / 2.302585092994046)
    assert line["r_ac_ohm"] == pytest.approx(2 * 50 * np_half, rel=1e-9)
    assert line["tan_delta"] == pytest.approx(np_half / (3.141592653589793 * 1e9 * 1e-9), rel=1e-9)
    # a lossy line slows and rounds the edge: later 50 % point, later settling, no overshoot beyond the lossless one
    assert lossy["flight_ns"] > lossless["flight_ns"]
    assert lossy["settle_ns"] > lossless["settle_ns"]
    assert lossy["v_max"] <= lossless["v_max"] + 1e-3
    # a DC resistance with a resistive end: the divider (exact at DC)
    code, out, err = run(*WAVE, "--loss", "4dB@1GHz", "--rdc", "5", "--end-ohm", "100")
    assert json.loads(out)["v_final"] == pytest.approx(3.3 * 100 / (15 + 35 + 5 + 100), rel=1e-6)


def test_wave_loss_per_line_and_errors(run):
    chain = ["wave", "--z0", "50", "--delay", "0.5ns", "--z0", "60", "--delay", "0.3ns", "--driver-ohm", "25",
             "--swing", "1.8", "--rise", "200ps", "--json"]
    code, out, err = run(*chain, "--loss", "2dB@2GHz", "--loss", "1dB@2GHz", "--dielectric-share", "0.3",
                         "--dielectric-share", "0.7", "--rdc", "1")
    assert code == 0, err
    lines = json.loads(out)["lines"]
    assert [l["dielectric_share"] for l in lines] == [0.3, 0.7] and [l["rdc_ohm"] for l in lines] == [1.0, 1.0]
    code, out, err = run(*chain, "--loss", "2dB@2GHz")
    assert code == 2 and "one --loss per --z0" in err
    code, out, err = run(*chain, "--loss", "2dB", "--loss", "1dB@2GHz")
    assert code == 2 and "DB@FREQ" in err
    code, out, err = run(*chain, "--loss", "2dB@2GHz", "--loss", "1dB@2GHz", "--dielectric-share", "1.5")
    assert code == 2 and "between 0 and 1" in err
    code, out, err = run(*chain, "--rdc", "1")
    assert code == 2 and "--loss" in err
    code, out, err = run(*WAVE[:-1], "--rise", "1fs")
    assert code == 2 and "1 ps" in err


def test_review_simulates_every_flagged_net_with_loss(run, board, tmp_path):
    rows = ["net,layer,length,width,rise_time,driver_ohm"]
    rows += [f"D{i},L3,{80 + i}mm,0.15mm,300ps,{'' if i % 2 else 20}" for i in range(12)]
    tr, st, rl = board("\n".join(rows) + "\n", rules="[waveform]\nmax_nets = 5\n")
    js = tmp_path / "r.json"
    code, stdout, err = run("review", tr, "--stackup", st, "--solver", "formula", "--json", js)
    nets = json.loads(js.read_text())["nets"]
    assert all(n["recommended_termination"] for n in nets)          # every one, no 500-net cap by default
    for n in nets:
        assert n["loss_included"] is True and "simulated with loss" in n["assumptions"]
        sim = n["simulation"]
        assert sim["loss"]["included"] and sim["loss"]["insertion_loss_db"] == pytest.approx(n["loss_db"], rel=1e-3)
        assert sim["loss"]["dc_resistance_ohm"] > 0
        assert sim["rise_time_ps"]["value"] == pytest.approx(300.0)
        assert sim["rise_time_ps"]["source"].startswith("trace list")
        i = int(n["net"][1:])
        if i % 2:
            assert sim["driver_ohm"] == {"value": 25.0, "source": "rules [waveform] driver_ohm"}
        else:
            assert sim["driver_ohm"] == {"value": 20.0, "source": "trace list"}
        assert sim["load_pf"]["source"] == "rules [waveform] load_pf"
    # the old max_nets key is still accepted and, when given, limits the check (the longest first)
    code, stdout, err = run("review", tr, "--stackup", st, "--solver", "formula", "--json", js, "--rules", rl)
    d = json.loads(js.read_text())
    simulated = [n for n in d["nets"] if n["recommended_termination"]]
    assert len(simulated) == 5 and min(n["length_mm"] for n in simulated) == pytest.approx(87.0, abs=0.01)
    assert any(f["rule"] == "waveform" and "max_nets = 5" in f["message"] for f in d["findings"])


def test_review_reports_a_net_it_cannot_simulate(run, board, tmp_path, monkeypatch):
    # A simulation that would need more samples than allowed is refused with a message; the net keeps its
    # first-order advice and the review says which and why (no crash, no memory blow-up).
    from sicheck.physics import line_network
    monkeypatch.setattr(line_network, "MAX_SAMPLES", 300)
    tr, st = board(TRACES)
    js = tmp_path / "r.json"
    code, stdout, err = run("review", tr, "--stackup", st, "--solver", "formula", "--json", js)
    assert code in (0, 1), err
    d = json.loads(js.read_text())
    clk = {n["net"]: n for n in d["nets"]}["CLK"]
    assert clk["recommended_termination"] is None and clk["assumptions"].startswith("not simulated: ")
    assert "time samples" in clk["assumptions"]
    msgs = [f["message"] for f in d["findings"] if f["rule"] == "waveform"]
    assert any("were not simulated" in m and "CLK could not be" in m for m in msgs)


def test_process_pool_gives_the_same_review(run, board, tmp_path, monkeypatch):
    # Large boards spread the nets over processes; the answers must not depend on it.
    from sicheck import waveform_review
    rows = ["net,layer,length,width,rise_time,driver_ohm,pair,gap"]
    rows += [f"S{i},L3,{60 + 7 * i}mm,0.15mm,{200 + 50 * i}ps,{10 + 5 * i},," for i in range(8)]
    rows += ["P_P,L3,120mm,0.1mm,200ps,,P_N,0.15mm"]
    tr, st = board("\n".join(rows) + "\n")
    out = {}
    for label, n_workers, pool_min in (("serial", "1", 10 ** 6), ("pool", "2", 1)):
        monkeypatch.setenv("SICHECK_WORKERS", n_workers)
        monkeypatch.setattr(waveform_review, "POOL_MIN_NETS", pool_min)
        js = tmp_path / f"{label}.json"
        code, _, err = run("review", tr, "--stackup", st, "--solver", "formula", "--json", js)
        assert code in (0, 1), err
        out[label] = {n["net"]: n for n in json.loads(js.read_text())["nets"]}
    assert out["serial"] == out["pool"]
    assert all(n["recommended_termination"] for n in out["pool"].values())


def test_charted_waveforms_do_not_depend_on_the_process_pool(board, monkeypatch):
    # Workers send back waveforms only for their own worst nets; the review's charts (the CHARTS worst by
    # unterminated overshoot, equal nets included) must be those of a serial run.
    from sicheck import waveform_review
    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    rows = ["net,layer,length,width,rise_time,driver_ohm"]
    rows += [f"S{i},L3,{60 + 5 * (i % 9)}mm,0.15mm,{200 + 40 * (i % 7)}ps,{5 + 3 * (i % 5)}" for i in range(40)]
    tr, st = board("\n".join(rows) + "\n")
    charts = {}
    for label, n_workers, pool_min in (("serial", "1", 10 ** 6), ("pool", "2", 1)):
        monkeypatch.setenv("SICHECK_WORKERS", n_workers)
        monkeypatch.setattr(waveform_review, "POOL_MIN_NETS", pool_min)
        monkeypatch.setattr(waveform_review, "CHUNK_MIN", 3)       # many small chunks
        rv = build_review(read_traces(tr), load_stackup(st), load_rules(None))
        charts[label] = rv.waves
    assert list(charts["serial"]) == list(charts["pool"]) and len(charts["serial"]) == waveform_review.CHARTS
    for net, (b, a, vf) in charts["serial"].items():
        b2, a2, vf2 = charts["pool"][net]
        assert vf == vf2 and np.array_equal(b[1], b2[1]) and np.array_equal(a[1], a2[1])
