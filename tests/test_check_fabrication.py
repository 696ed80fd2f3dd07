"""min-feature on hand-made tables (no solver)."""

from __future__ import annotations

from check_tables import findings, rules, segments


def test_min_feature_passes():
    assert findings(segments({"net": "A", "width_mm": 0.1}), rules(), "min-feature") == []


def test_min_feature_fails_on_width():
    (f,) = findings(segments({"net": "A", "width_mm": 0.05, "layer": "TOP", "row": 9}), rules(), "min-feature")
    assert (f.severity, f.row, f.value, f.limit, f.unit) == ("error", 9, 0.05, 0.075, "mm")
    assert "width 0.050 mm" in f.message and f.key == "min-feature|A|TOP|width0.050mm"


def test_min_feature_fails_on_gap_once_per_pair():
    seg = segments({"net": "D_P", "pair": "D_N", "gap_mm": 0.06}, {"net": "D_N", "pair": "D_P", "gap_mm": 0.06})
    (f,) = findings(seg, rules(), "min-feature")
    assert "gap 0.060 mm" in f.message and f.net == "D_P & D_N"


def test_min_feature_off():
    assert findings(segments({"net": "A", "width_mm": 0.05}), rules(severity={"min-feature": "off"}),
                    "min-feature") == []


def test_min_feature_param():
    assert findings(segments({"net": "A", "width_mm": 0.05}), rules(min_feature=40e-6), "min-feature") == []
