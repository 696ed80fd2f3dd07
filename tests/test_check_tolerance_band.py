"""tolerance-band on hand-made tables: the band columns are given, no solver."""

from __future__ import annotations

import numpy as np
import pytest
from check_tables import cls, findings, rules, segments


def _with_band(seg, lo, hi, rss=1.0):
    seg = seg.copy()
    paired = seg["pair"] != ""
    for name, v in (("min", lo), ("max", hi), ("rss", rss)):
        seg[f"z_{name}_ohm"] = np.where(paired, np.nan, v)
        seg[f"zdiff_{name}_ohm"] = np.where(paired, v, np.nan)
    return seg


def _clock(**params):
    return cls("CLOCK", ["CLK*"], z0=50, **params)


def test_tolerance_band_passes_when_the_band_is_inside():
    seg = _with_band(segments({"net": "CLK_A", "net_class": "CLOCK", "z0": 50.0}), 46.0, 54.0)
    assert findings(seg, rules([_clock()]), "tolerance-band") == []


def test_tolerance_band_fails_once_per_cross_section():
    seg = _with_band(segments({"net": "CLK_A", "net_class": "CLOCK", "z0": 52.0, "layer": "IN3", "row": 7},
                              {"net": "CLK_B", "net_class": "CLOCK", "z0": 52.0, "layer": "IN3", "row": 8}),
                     47.0, 57.5, 3.0)
    (f,) = findings(seg, rules([_clock()]), "tolerance-band")
    assert (f.severity, f.net, f.layer, f.row, f.unit) == ("warning", "CLK_A, CLK_B", "IN3", 7, "ohm")
    assert (f.value, f.limit) == (57.5, pytest.approx(55.0))
    assert f.key == "tolerance-band|CLOCK|IN3|w0.150mm" and "2 net(s)" in f.message


def test_tolerance_band_fails_for_a_pair_once_with_zdiff():
    seg = _with_band(segments({"net": "D_P", "pair": "D_N", "net_class": "LVDS", "zdiff": 98.0},
                              {"net": "D_N", "pair": "D_P", "net_class": "LVDS", "zdiff": 98.0}), 85.0, 105.0)
    (f,) = findings(seg, rules([cls("LVDS", ["D_*"], zdiff=100)]), "tolerance-band")
    assert f.net == "D_P & D_N" and f.value == 85.0 and f.message.startswith("Zdiff band 85.0-105.0")


def test_tolerance_band_passes_when_the_nominal_misses_too():
    seg = _with_band(segments({"net": "CLK_A", "net_class": "CLOCK", "z0": 58.0}), 52.0, 64.0)
    assert findings(seg, rules([_clock()]), "tolerance-band") == []


def test_tolerance_band_off_and_its_parameters():
    seg = _with_band(segments({"net": "CLK_A", "net_class": "CLOCK", "z0": 52.0}), 47.0, 57.5)
    assert findings(seg, rules([_clock()], severity={"tolerance-band": "off"}), "tolerance-band") == []
    assert findings(seg, rules([_clock(tolerance_pct=20)]), "tolerance-band") == []
    assert findings(seg, rules([_clock()], ignore_shorter_than_tr=50.0), "tolerance-band") == []
