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
    assert f.net == "D_P & D_N" and f.key.startswith("zdiff-target|D_N & D_P|") and f.unit == "ohm"


def test_zdiff_target_off():
    seg = segments({"net": "D_P", "pair": "D_N", "net_class": "LV", "zdiff": 130.0})
    assert findings(seg, rules([cls("LV", zdiff=100.0)], severity={"zdiff-target": "off"}), "zdiff-target") == []


def test_zdiff_target_param_tolerance():
    seg = segments({"net": "D_P", "pair": "D_N", "net_class": "LV", "zdiff": 112.0})
    assert findings(seg, rules([cls("LV", zdiff=100.0, tolerance_pct=15.0)]), "zdiff-target") == []
    assert len(findings(seg, rules([cls("LV", zdiff=100.0)]), "zdiff-target")) == 1


def _step_net(z_second, length_mm=50.0, **kw):
    return segments({"net": "A", "layer": "TOP", "z0": 50.0, "length_mm": length_mm, **kw},
                    {"net": "A", "layer": "IN3", "z0": z_second, "length_mm": length_mm, **kw})


def test_z_step_passes_small_step():
    assert findings(_step_net(54.0), rules(), "z-step") == []


def test_z_step_fails_on_transmission_line_with_layers_in_order():
    (f,) = findings(_step_net(60.0), rules(), "z-step")
    assert f.layer == "TOP → IN3" and f.message.startswith("Z0 changes 20 %")
    assert (f.value, f.limit, f.unit, f.severity) == (20.0, 10.0, "%", "warning")
    assert f.key == "z-step|A|TOP → IN3" and f.row == 3


def test_z_step_fails_once_per_pair_naming_zdiff():
    rows = []
    for net, partner in (("D_P", "D_N"), ("D_N", "D_P")):
        rows += [{"net": net, "pair": partner, "layer": "TOP", "zdiff": 100.0},
                 {"net": net, "pair": partner, "layer": "IN3", "zdiff": 85.0}]
    (f,) = findings(segments(*rows), rules(), "z-step")
    assert f.message.startswith("Zdiff changes 18 %") and "pair" in f.message and f.key.startswith("z-step|D_N & D_P|")


def test_z_step_passes_on_lumped_net():
    # 2 mm pieces: 27 ps of a 500 ps edge, lumped; the same 20 % step is not reported
    assert findings(_step_net(60.0, length_mm=2.0), rules(), "z-step") == []


def test_z_step_off():
    assert findings(_step_net(60.0), rules(severity={"z-step": "off"}), "z-step") == []


def test_z_step_param_z_step_pct():
    assert findings(_step_net(60.0), rules(z_step_pct=25.0), "z-step") == []


def test_no_target_fails_for_transmission_line_without_target():
    seg = segments({"net": "S1", "net_class": "SLOW", "length_mm": 100.0},
                   {"net": "S2", "net_class": "SLOW", "length_mm": 120.0})
    (f,) = findings(seg, rules([cls("SLOW")]), "no-target")
    assert f.net == "S2, S1" and "class 'SLOW'" in f.message and f.key == "no-target|SLOW" and f.value == 2


def test_no_target_passes_with_target_or_lumped():
    seg = segments({"net": "S1", "net_class": "SLOW", "length_mm": 100.0})
    assert findings(seg, rules([cls("SLOW", z0=50.0)]), "no-target") == []
    assert findings(segments({"net": "S1", "net_class": "SLOW", "length_mm": 3.0}), rules([cls("SLOW")]),
                    "no-target") == []


def test_no_target_off():
    seg = segments({"net": "S1", "net_class": "SLOW", "length_mm": 100.0})
    assert findings(seg, rules([cls("SLOW")], severity={"no-target": "off"}), "no-target") == []
