"""electrical-length on hand-made tables (no solver).

1 mm at eps_eff 4 is 6.67 ps (TD = length * sqrt(eps_eff) / c); the edge is 500 ps.
"""

from __future__ import annotations

from check_tables import findings, rules, segments


def test_electrical_length_passes_on_lumped_net():
    assert findings(segments({"net": "A", "length_mm": 10.0}), rules(), "electrical-length") == []


def test_electrical_length_fails_when_termination_required():
    (f,) = findings(segments({"net": "A", "length_mm": 60.0, "row": 4}), rules(), "electrical-length")
    assert f.severity == "warning" and f.row == 4 and f.unit == "x Tr" and f.limit == 0.5
    assert abs(f.value - 0.060 * 2 / 299_792_458.0 / 500e-12) < 1e-9
    assert "termination required" in f.message and f.key == "electrical-length|A"


def test_electrical_length_recommended_is_info():
    (f,) = findings(segments({"net": "A", "length_mm": 25.0}), rules(), "electrical-length")
    assert f.severity == "info" and "termination recommended" in f.message and abs(f.limit - 1 / 6) < 1e-12


def test_electrical_length_pair_once():
    seg = segments({"net": "D_P", "pair": "D_N", "length_mm": 60.0}, {"net": "D_N", "pair": "D_P", "length_mm": 61.0})
    (f,) = findings(seg, rules(), "electrical-length")
    assert f.net == "D_N & D_P" and f.key == "electrical-length|D_N & D_P"


def test_electrical_length_off():
    assert findings(segments({"net": "A", "length_mm": 60.0}), rules(severity={"electrical-length": "off"}),
                    "electrical-length") == []


def test_electrical_length_params():
    seg = segments({"net": "A", "length_mm": 60.0})         # TD/Tr = 0.80
    assert findings(seg, rules(required_min_td_over_tr=0.9), "electrical-length")[0].severity == "info"
    assert findings(seg, rules(lumped_max_td_over_tr=0.85, required_min_td_over_tr=0.9), "electrical-length") == []
