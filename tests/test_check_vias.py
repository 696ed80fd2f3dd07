"""via-stub on hand-made tables and a hand-made stackup (tests/via_boards.py); no solver.

Outside source: the quarter-wave open stub, f = c / (4 L sqrt(er)) (a textbook transmission-line result).
Worked example computed from it: a 1.2 mm stub in er 4 resonates at 299792458 / (4 * 1.2e-3 * 2) = 31.23 GHz.
"""

from __future__ import annotations

import math

import pytest
from check_tables import rules, segments
from hypothesis import given
from hypothesis import strategies as hs
from via_boards import stackup, via_findings

from sicheck.physics.via_stub import barrel_delay, quarter_wave_resonance, weighted_er
from sicheck.via_table import transition, via_table

C0 = 299_792_458.0
F_WORKED = C0 / (4 * 1.2e-3 * 2.0)          # 31.228 GHz


def test_worked_example_quarter_wave_stub():
    assert float(quarter_wave_resonance(1.2e-3, 4.0)) == pytest.approx(31.228e9, rel=1e-4)
    assert math.isinf(float(quarter_wave_resonance(0.0, 4.0)))


@given(hs.floats(1e-5, 5e-3), hs.floats(1.0, 12.0))
def test_resonance_is_a_quarter_wavelength_in_the_dielectric(length, er):
    f = float(quarter_wave_resonance(length, er))
    assert 4 * length * math.sqrt(er) * f == pytest.approx(C0, rel=1e-12)


@given(hs.lists(hs.tuples(hs.floats(1e-6, 1e-3), hs.floats(1.0, 12.0)), min_size=1, max_size=6))
def test_weighted_er_lies_between_its_layers(pieces):
    t, e = zip(*pieces)
    assert min(e) - 1e-9 <= weighted_er(t, e) <= max(e) + 1e-9


def test_through_via_stub_from_stackup_positions():
    t = transition(stackup(), "TOP", "IN1")
    assert t.stub_length == pytest.approx(1.2e-3, rel=1e-9) and t.stub_to == "BOT" and t.stub_er == pytest.approx(4.0)
    assert t.stub_resonance == pytest.approx(F_WORKED, rel=1e-9)
    # barrel from the middle of TOP to the middle of IN1: 17.5 + 100 + 35 + 100 + 17.5 um, in er 4
    assert t.barrel_length == pytest.approx(0.27e-3) and t.barrel_delay == pytest.approx(0.27e-3 * 2 / C0)


def test_stub_er_weights_the_dielectrics_by_thickness():
    st = stackup()
    # swap the last dielectric to er 3: (0.3 * 4 + 0.3 * 4 + 0.495 * 3) / 1.095 (copper carries no weight)
    from dataclasses import replace
    layers = list(st.layers)
    layers[9] = replace(layers[9], er=3.0)
    st3 = replace(st, layers=tuple(layers))
    t = transition(st3, "TOP", "IN1")
    assert t.stub_er == pytest.approx((0.3 * 4 + 0.3 * 4 + 0.495 * 3) / 1.095)
    assert t.stub_resonance == pytest.approx(C0 / (4 * 1.2e-3 * math.sqrt(t.stub_er)))


def test_blind_and_backdrilled_construction():
    blind = transition(stackup('[vias]\nkind = "blind"\n'), "TOP", "IN1")
    assert blind.stub_length == 0 and math.isinf(blind.stub_resonance)
    # blind from the top joining IN1 and IN2 leaves the barrel above IN1 (TOP's top face down to IN1's top face)
    b2 = transition(stackup('[vias]\nkind = "blind"\n'), "IN1", "IN2")
    assert b2.stub_length == pytest.approx(0.27e-3) and b2.stub_to == "TOP"
    bd = transition(stackup('[vias]\nkind = "backdrilled"\nstub = "0.2mm"\n'), "TOP", "IN1")
    assert bd.stub_length == pytest.approx(0.2e-3)
    # components on the bottom: drilled from the top, the stub below IN1 stays
    bd_b = transition(stackup('[vias]\nkind = "backdrilled"\ncomponent_side = "bottom"\nstub = "0.2mm"\n'),
                      "TOP", "IN1")
    assert bd_b.stub_length == pytest.approx(1.2e-3)


def test_vias_are_layer_changes_and_escapes():
    seg = segments({"net": "A", "layer": "TOP", "row": 2}, {"net": "A", "layer": "IN1", "row": 3},
                   {"net": "B", "layer": "IN2", "row": 4}, {"net": "C", "layer": "BOT", "row": 5})
    v = via_table(seg, stackup())
    a = v[v["net"] == "A"]
    assert list(a["how"]) == ["layer change", "escape"] and list(a["row"]) == [3, 3]
    b = v[v["net"] == "B"]
    assert list(b["how"]) == ["escape", "escape"] and set(b["from_layer"]) == {"TOP", "IN2"}
    assert v[v["net"] == "C"].empty          # an outer layer: no via


def test_export_via_column_adds_vias_without_delay():
    seg = segments({"net": "A", "layer": "IN2", "row": 2}, {"net": "B", "layer": "TOP", "row": 3})
    seg["vias"] = [2.0, 1.0]
    v = via_table(seg, stackup())
    ex = v[v["how"] == "export"]
    assert list(ex["count"]) == [2, 1] and list(ex["barrel_delay"]) == [0.0, 0.0]
    assert math.isinf(ex[ex["net"] == "B"]["stub_resonance"].iloc[0])     # on the component side: counted only


def test_barrel_delay_is_added_to_the_net():
    from sicheck.review import _net_table
    from sicheck.via_table import via_delay_per_row
    seg = segments({"net": "A", "layer": "TOP", "length_mm": 10.0}, {"net": "A", "layer": "BOT", "length_mm": 10.0})
    plain = _net_table(seg, rules())["delay"].iloc[0]
    seg["via_delay"] = via_delay_per_row(seg, via_table(seg, stackup()))
    with_via = _net_table(seg, rules())["delay"].iloc[0]
    # TOP middle to BOT middle: 1.47 mm of barrel (0.0175 + 0.1 + 0.035 + 0.1 + 0.035 + 0.3 + 0.035 + 0.3 + 0.035
    # + 0.495 + 0.0175 mm) in er 4: 9.81 ps
    assert with_via - plain == pytest.approx(1.47e-3 * 2.0 / C0, rel=1e-9)


def _fast(freq_ghz):
    return segments({"net": "SER_P", "layer": "TOP", "row": 2, "freq": freq_ghz * 1e9},
                    {"net": "SER_P", "layer": "IN1", "row": 3, "freq": freq_ghz * 1e9},
                    {"net": "SER_P", "layer": "TOP", "row": 4, "freq": freq_ghz * 1e9})


def test_via_stub_passes_below_a_third_of_resonance():
    assert via_findings(_fast(10.0), rules(), stackup(), "via-stub") == []     # 3 x 10 GHz < 31.2 GHz


def test_via_stub_fails_on_worked_example():
    (f,) = via_findings(_fast(12.0), rules(), stackup(), "via-stub")          # 36 GHz > 31.2 GHz
    assert f.severity == "warning" and f.layer == "TOP → IN1" and f.row == 3 and f.unit == "GHz"
    assert f.value == pytest.approx(F_WORKED * 1e-9) and f.limit == pytest.approx(36.0)
    assert "1.20 mm stub to BOT" in f.message and "31.2 GHz" in f.message and "2 through vias" in f.message
    assert "Back-drill" in f.message and "blind via" in f.message and "nearer BOT" in f.message
    assert f.key == "via-stub|SER_P|TOP → IN1"


def test_via_stub_passes_when_backdrilled():
    st = stackup('[vias]\nkind = "backdrilled"\nstub = "0.25mm"\n')              # 150 GHz
    assert via_findings(_fast(12.0), rules(), st, "via-stub") == []


def test_via_stub_passes_with_blind_vias():
    assert via_findings(_fast(12.0), rules(), stackup('[vias]\nkind = "blind"\n'), "via-stub") == []


def test_via_stub_fails_on_escape_via_of_inner_net():
    seg = segments({"net": "D", "layer": "IN1", "row": 7, "freq": 12e9})
    (f,) = via_findings(seg, rules(), stackup(), "via-stub")
    assert f.layer == "TOP → IN1 (escape via)" and "2 through vias" in f.message and f.row == 7


def test_via_stub_pair_reported_once():
    seg = segments({"net": "S_P", "pair": "S_N", "layer": "TOP", "freq": 12e9},
                   {"net": "S_P", "pair": "S_N", "layer": "IN1", "freq": 12e9},
                   {"net": "S_N", "pair": "S_P", "layer": "TOP", "freq": 12e9},
                   {"net": "S_N", "pair": "S_P", "layer": "IN1", "freq": 12e9})
    fs = via_findings(seg, rules(), stackup(), "via-stub")
    assert [f.net for f in fs] == ["S_P & S_N"] and "2 through vias" in fs[0].message   # one layer change + escape


def test_via_stub_off():
    assert via_findings(_fast(12.0), rules(severity={"via-stub": "off"}), stackup(), "via-stub") == []


def test_via_stub_min_resonance_ratio():
    assert via_findings(_fast(12.0), rules(min_resonance_ratio=2.0), stackup(), "via-stub") == []   # 24 GHz
    (f,) = via_findings(_fast(8.0), rules(min_resonance_ratio=4.0), stackup(), "via-stub")          # 32 GHz
    assert f.limit == pytest.approx(32.0)


def test_via_stub_without_stackup_finds_nothing():
    from check_tables import findings
    assert findings(_fast(12.0), rules(), "via-stub") == []


@given(hs.lists(hs.sampled_from(["TOP", "IN1", "IN2", "BOT"]), min_size=1, max_size=8),
       hs.sampled_from(["through", "blind", "backdrilled"]), hs.sampled_from(["top", "bottom"]))
def test_via_table_invariants(layers, kind, side):
    extra = '\nstub = "0.1mm"' if kind == "backdrilled" else ""
    st = stackup(f'[vias]\nkind = "{kind}"\ncomponent_side = "{side}"{extra}\n')
    v = via_table(segments(*[{"net": "N", "layer": l, "row": 2 + i} for i, l in enumerate(layers)]), st)
    comp = "TOP" if side == "top" else "BOT"
    changes = sum(a != b for a, b in zip(layers, layers[1:]))
    escapes = (layers[0] in ("IN1", "IN2")) + (layers[-1] in ("IN1", "IN2"))
    assert (v["how"] == "layer change").sum() == changes and (v["how"] == "escape").sum() == escapes
    assert set(v.loc[v["how"] == "escape", "from_layer"]) | set(v.loc[v["how"] == "escape", "to_layer"]) <= \
        {comp, "IN1", "IN2"}
    board = 1.505e-3                       # first copper's top face to last copper's bottom face
    assert ((v["stub_length"] >= 0) & (v["stub_length"] <= board)).all()
    assert ((v["barrel_delay"] > 0) & (v["barrel_delay"] <= board * 2 / C0 + 1e-18)).all()
    if kind == "backdrilled":             # the drilled side keeps at most the stackup's stub
        far = "BOT" if side == "top" else "TOP"
        assert (v.loc[v["stub_to"] == far, "stub_length"] <= 0.1e-3 + 1e-12).all()


def test_via_stub_fails_on_a_blind_via_stub_with_advice_for_blind_vias():
    seg = segments({"net": "B", "layer": "IN1", "row": 2, "freq": 50e9}, {"net": "B", "layer": "IN2", "row": 3,
                                                                          "freq": 50e9})
    fs = via_findings(seg, rules(), stackup('[vias]\nkind = "blind"\n'), "via-stub")
    f = next(f for f in fs if f.layer == "IN1 → IN2")        # 0.27 mm above IN1 to TOP: 138.8 GHz < 3 x 50 GHz
    assert "blind via" in f.message and "stub to TOP" in f.message and "Back-drill" not in f.message
