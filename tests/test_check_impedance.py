"""Impedance checks on hand-made tables (no solver). Naming: test_<rule>_passes / _fails / _off / _param."""

from __future__ import annotations

from check_tables import cls, findings, rules, segments

CLK = cls("CLK", ["CLK*"], z0=50.0)


def test_z0_target_passes_within_tolerance():
    seg = segments({"net": "CLK1", "net_class": "CLK", "z0": 54.0})
    assert findings(seg, rules([CLK]), "z0-target") == []


def test_z0_target_fails_outside_tolerance():
    seg = segments({"net": "CLK1", "net_class": "CLK", "z0": 57.0, "row": 7, "layer": "TOP"})
    (f,) = findings(seg, rules([CLK]), "z0-target")
    assert (f.rule, f.severity, f.net, f.layer, f.row) == ("z0-target", "error", "CLK1", "TOP", 7)
    assert f.value == 57.0 and abs(f.limit - 55.0) < 1e-9 and f.unit == "ohm"
    assert "+14.0 %" in f.message
    assert f.key == "z0-target|CLK1|TOP|w0.150mm"


def test_z0_target_key_is_stable_across_revisions():
    a = findings(segments({"net": "CLK1", "net_class": "CLK", "z0": 60.0, "row": 3}), rules([CLK]), "z0-target")
    b = findings(segments({"net": "X", "z0": 50}, {"net": "CLK1", "net_class": "CLK", "z0": 61.0, "row": 30}),
                 rules([CLK]), "z0-target")
    assert a[0].key == b[0].key and a[0].row != b[0].row


def test_z0_target_off():
    seg = segments({"net": "CLK1", "net_class": "CLK", "z0": 70.0})
    assert findings(seg, rules([CLK], severity={"z0-target": "off"}), "z0-target") == []


def test_z0_target_param_class_tolerance_and_severity():
    seg = segments({"net": "CLK1", "net_class": "CLK", "z0": 57.0})
    wide = cls("CLK", ["CLK*"], z0=50.0, tolerance_pct=20.0)
    assert findings(seg, rules([wide]), "z0-target") == []
    assert findings(seg, rules([CLK], tolerance_pct=15.0), "z0-target") == []
    (f,) = findings(seg, rules([CLK], severity={"z0-target": "warning"}), "z0-target")
    assert f.severity == "warning"


def test_z0_target_param_short_segments_summarised_once_per_net():
    # 1 mm at eps_eff 4 is 6.7 ps, below 0.1 x 500 ps; 50 mm is not
    seg = segments({"net": "CLK1", "net_class": "CLK", "z0": 70.0, "length_mm": 1.0},
                   {"net": "CLK1", "net_class": "CLK", "z0": 65.0, "length_mm": 2.0},
                   {"net": "CLK1", "net_class": "CLK", "z0": 60.0, "length_mm": 50.0})
    fs = findings(seg, rules([CLK]), "z0-target")
    assert sorted(f.severity for f in fs) == ["error", "info"]
    info = next(f for f in fs if f.severity == "info")
    assert info.message.startswith("2 segment(s) shorter than 0.1 x Tr") and info.value == 70.0
    assert len(findings(seg, rules([CLK], ignore_shorter_than_tr=0.0), "z0-target")) == 3


def test_zdiff_target_passes():
    seg = segments({"net": "D_P", "pair": "D_N", "net_class": "LV", "zdiff": 104.0})
    assert findings(seg, rules([cls("LV", zdiff=100.0)]), "zdiff-target") == []


def test_zdiff_target_fails_once_per_pair():
    seg = segments({"net": "D_P", "pair": "D_N", "net_class": "LV", "zdiff": 120.0},
                   {"net": "D_N", "pair": "D_P", "net_class": "LV", "zdiff": 120.0})
    (f,) = findings(seg, rules([cls("LV", zdiff=100.0)]), "zdiff-target")
    assert f.net == "D_P/D_N" and f.key.startswith("zdiff-target|D_N/D_P|") and f.unit == "ohm"


def test_zdiff_target_off():
    seg = segments({"net": "D_P", "pair": "D_N", "net_class": "LV", "zdiff": 130.0})
    assert findings(seg, rules([cls("LV", zdiff=100.0)], severity={"zdiff-target": "off"}), "zdiff-target") == []


def test_zdiff_target_param_tolerance():
    seg = segments({"net": "D_P", "pair": "D_N", "net_class": "LV", "zdiff": 112.0})
    assert findings(seg, rules([cls("LV", zdiff=100.0, tolerance_pct=15.0)]), "zdiff-target") == []
    assert len(findings(seg, rules([cls("LV", zdiff=100.0)]), "zdiff-target")) == 1
