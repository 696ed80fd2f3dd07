"""pair-mismatch on hand-made tables (no solver)."""

from __future__ import annotations

from check_tables import findings, rules, segments


def _pair(p_rows, n_rows):
    rows = [{"net": "D_P", "pair": "D_N", **r} for r in p_rows] + [{"net": "D_N", "pair": "D_P", **r} for r in n_rows]
    for i, r in enumerate(rows):
        r.setdefault("row", 2 + i)
    return segments(*rows)


def test_pair_mismatch_passes_when_legs_alike():
    seg = _pair([{"layer": "TOP", "gap_mm": 0.1, "zdiff": 100.0}], [{"layer": "TOP", "gap_mm": 0.1, "zdiff": 100.0}])
    assert findings(seg, rules(), "pair-mismatch") == []
    # one leg listed (the other mirrored): nothing to compare
    assert findings(segments({"net": "D_P", "pair": "D_N"}), rules(), "pair-mismatch") == []
    # gaps within 1 % are the same gap (round-off in an export)
    seg = _pair([{"gap_mm": 0.1000}], [{"gap_mm": 0.1005}])
    assert findings(seg, rules(), "pair-mismatch") == []


def test_pair_mismatch_fails_on_different_layers():
    seg = _pair([{"layer": "TOP", "zdiff": 108.0, "length_mm": 40.0}],
                [{"layer": "IN3", "zdiff": 99.0, "length_mm": 40.0}])
    (f,) = findings(seg, rules(), "pair-mismatch")
    assert f.severity == "warning" and f.net == "D_P & D_N" and f.row == 2
    assert "D_P on TOP (Zdiff 108.0 ohm" in f.message and "D_N on IN3 (Zdiff 99.0 ohm" in f.message
    assert f.value == 9.0 and f.unit == "ohm" and f.key == "pair-mismatch|D_N & D_P|layers"


def test_pair_mismatch_fails_on_different_gaps_and_reports_once():
    seg = _pair([{"layer": "IN3", "gap_mm": 0.10, "zdiff": 108.0}], [{"layer": "IN3", "gap_mm": 0.15, "zdiff": 117.0}])
    (f,) = findings(seg, rules(), "pair-mismatch")
    assert "D_P 0.100 mm (Zdiff 108.0 ohm), D_N 0.150 mm (Zdiff 117.0 ohm)" in f.message
    assert f.layer == "IN3" and f.key == "pair-mismatch|D_N & D_P|IN3|gap"


def test_pair_mismatch_off():
    seg = _pair([{"layer": "TOP"}], [{"layer": "IN3"}])
    assert findings(seg, rules(severity={"pair-mismatch": "off"}), "pair-mismatch") == []
