"""Review semantics: series segments, pairs, classes, findings."""

import numpy as np
import pytest

from conftest import FOUR_LAYER
from sicheck.errors import InputError
from sicheck.physics.constants import C0
from sicheck.review import build_review
from sicheck.rules import Rules, load_rules
from sicheck.stackup import load_stackup
from sicheck.traces import read_traces


def _review(tmp_path, csv, rules_text=None, stackup=FOUR_LAYER):
    (tmp_path / "s.toml").write_text(stackup, encoding="utf-8")
    (tmp_path / "t.csv").write_text(csv, encoding="utf-8")
    rules = Rules()
    if rules_text is not None:
        (tmp_path / "r.toml").write_text(rules_text, encoding="utf-8")
        rules = load_rules(tmp_path / "r.toml")
    return build_review(read_traces(tmp_path / "t.csv"), load_stackup(tmp_path / "s.toml"), rules)


def test_multi_segment_delay_is_sum_of_layer_delays(tmp_path):
    rv = _review(tmp_path, "net,layer,length,width,rise_time\nA,L1,10mm,0.3mm,1ns\nA,L3,20mm,0.15mm,1ns\n")
    seg = rv.segments
    # each segment on its own layer's velocity: TD = sum(length_i * sqrt(eps_i) / c), plus two via barrels
    # (L1 -> L3 and L3's escape back to L1), middle of L1's 1 oz to middle of L3's 0.5 oz copper, in er 4.3
    barrel = (35e-6 / 2 + 0.2e-3 + 35e-6 + 0.4e-3 + 17.5e-6 / 2) * np.sqrt(4.3) / C0
    expect = sum(seg["length"] * np.sqrt(seg["eps_eff"]) / C0) + 2 * barrel
    net = rv.nets.iloc[0]
    assert net["delay"] == pytest.approx(expect, rel=1e-12)
    assert seg["eps_eff"].iloc[1] == pytest.approx(4.3)            # homogeneous stripline: eps_eff = er
    assert net["delay"] != pytest.approx(30e-3 * np.sqrt(seg["eps_eff"].iloc[0]) / C0, rel=1e-3)
    assert net["layers"] == "L1 > L3" and net["segments"] == 2


def test_pair_listed_once_is_not_double_counted(tmp_path):
    rv = _review(tmp_path, "net,layer,length,width,rise_time,pair,gap\nD_P,L3,50mm,0.1mm,200ps,D_N,0.15mm\n",
                 rules_text='[[net_class]]\nname="LV"\nmatch=["D_*"]\nzdiff=100\n')
    assert len(rv.segments) == 1
    nets = rv.nets.set_index("net")
    assert set(nets.index) == {"D_P", "D_N"}
    assert nets.loc["D_N", "delay"] == pytest.approx(nets.loc["D_P", "delay"])
    assert bool(nets.loc["D_N", "mirrored"]) is True
    el = [f for f in rv.findings if f.rule == "electrical-length"]
    assert len(el) == 1                                            # one finding for the pair
    # the signal of a pair travels in the odd mode
    seg = rv.segments.iloc[0]
    assert seg["zdiff"] == pytest.approx(2 * seg["zodd"])


def test_pair_listed_on_both_nets(tmp_path):
    rv = _review(tmp_path, "net,layer,length,width,rise_time,pair,gap\nD_P,L3,50mm,0.1mm,200ps,D_N,0.15mm\n"
                           "D_N,L3,51mm,0.1mm,200ps,D_P,0.15mm\n",
                 rules_text='[[net_class]]\nname="LV"\nmatch=["D_*"]\nzdiff=150\n')
    assert len(rv.segments) == 2
    nets = rv.nets.set_index("net")
    assert nets.loc["D_N", "length"] == pytest.approx(51e-3)
    z = [f for f in rv.findings if f.rule == "zdiff-target"]
    assert len(z) == 1                                              # the pair's miss is reported once


def test_class_defaults_and_target_miss(tmp_path):
    rules = ('[[net_class]]\nname = "CLK"\nmatch = ["CLK*"]\nrise_time = "300ps"\nwidth = "0.15mm"\nz0 = 50\n'
             'driver_ohm = 15\n')
    rv = _review(tmp_path, "net,layer,length\nCLK0,L3,80mm\nCLKWIDE,L3,80mm\n".replace(
        "CLKWIDE,L3,80mm", "CLKWIDE,L3,80mm"), rules_text=rules)
    nets = rv.nets.set_index("net")
    assert nets.loc["CLK0", "rise_time"] == pytest.approx(300e-12)
    assert nets.loc["CLK0", "termination"] == "required"
    z = rv.segments["z0"].iloc[0]
    assert nets.loc["CLK0", "series_ohm"] is not None
    from sicheck.physics.eseries import nearest
    assert nets.loc["CLK0", "series_ohm"] == nearest(z - 15)
    miss = abs(z - 50) / 50 > 0.10
    assert any(f.rule == "z0-target" for f in rv.findings) == miss


def test_unknown_layer_and_class(tmp_path):
    with pytest.raises(InputError, match="not a signal layer") as ei:
        _review(tmp_path, "net,layer,length,width,rise_time\nA,L1,3mm,0.1mm,1ns\nB,L9,3mm,0.1mm,1ns\n")
    assert ei.value.row == 3 and ei.value.column == "layer"
    with pytest.raises(InputError, match="net class 'FAST' is not in the rules"):
        _review(tmp_path, "net,layer,length,width,rise_time,net_class\nA,L1,3mm,0.1mm,1ns,FAST\n")


def test_missing_rise_time_and_width(tmp_path):
    with pytest.raises(InputError, match="no rise time"):
        _review(tmp_path, "net,layer,length,width\nA,L1,3mm,0.1mm\n")
    with pytest.raises(InputError, match="no width"):
        _review(tmp_path, "net,layer,length,rise_time\nA,L1,3mm,1ns\n")


def test_rules_errors_name_line(tmp_path):
    p = tmp_path / "r.toml"
    p.write_text('[electrical]\nlumped_max_td_over_tr = 0.2\n\n[[net_class]]\nname = "X"\nzdif = 100\n')
    with pytest.raises(InputError, match="unknown key 'zdif'") as ei:
        load_rules(p)
    assert ei.value.line == 6
    p.write_text('[severity]\nz0-targte = "error"\n')
    with pytest.raises(InputError, match="unknown rule id") as ei:
        load_rules(p)
    assert ei.value.line == 2


def test_each_cross_section_solved_once(tmp_path):
    rows = "".join(f"N{i},L3,{10 + i}mm,0.1mm,1ns\n" for i in range(50))
    calls = []

    from sicheck.physics.formula import solve_formula

    def spy(xs):
        calls.append(len(xs))
        return solve_formula(xs)
    (tmp_path / "s.toml").write_text(FOUR_LAYER, encoding="utf-8")
    (tmp_path / "t.csv").write_text("net,layer,length,width,rise_time\n" + rows, encoding="utf-8")
    build_review(read_traces(tmp_path / "t.csv"), load_stackup(tmp_path / "s.toml"), Rules(), spy)
    # one unique cross-section: solved once, then at its eight fabrication-tolerance limits in one batched solve
    # (sicheck.physics.fab_band), then its two receded air-filled twins for conductor loss
    assert calls == [1, 8, 2]
