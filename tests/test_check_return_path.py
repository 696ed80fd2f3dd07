"""return-path on hand-made tables and stackups (tests/via_boards.py); no solver.

The board: TOP over plane GNDP (net GND); IN1 and IN2 between GNDP and PWR (net P3V3); BOT over PWR only.
The rule (IPC-2141A; Johnson & Graham 1993): the return current follows its reference plane, so a layer
change needs a path between the planes before and after.
"""

from __future__ import annotations

from check_tables import rules, segments
from via_boards import stackup, via_findings


def _net(*layers, net="N", pair=""):
    return [{"net": net, "pair": pair, "layer": l, "row": 10 + i} for i, l in enumerate(layers)]


def test_return_path_passes_with_a_shared_plane():
    # TOP (GNDP) -> IN1 (GNDP, PWR): GNDP is on both sides
    assert via_findings(segments(*_net("TOP", "IN1", "TOP")), rules(), stackup(), "return-path") == []


def test_return_path_fails_across_a_power_plane():
    fs = via_findings(segments(*_net("TOP", "BOT")), rules(), stackup(), "return-path")
    f = next(f for f in fs if f.net == "N")
    assert f.severity == "warning" and f.layer == "TOP → BOT" and f.row == 11 and f.key == "return-path|N|TOP → BOT"
    assert "GNDP (GND)" in f.message and "PWR (P3V3)" in f.message and "stitching capacitor" in f.message


def test_return_path_same_net_on_different_planes_is_info():
    st = stackup(pwr_net="GND", pwr_name="GNDB")
    (f,) = via_findings(segments(*_net("TOP", "BOT")), rules(), st, "return-path")
    assert f.severity == "info" and "stitching via to GND" in f.message and "GNDB" in f.message


def test_return_path_plane_net_defaults_to_its_name():
    from sicheck.stackup import parse_stackup
    import tomllib
    from via_boards import stackup_text
    text = stackup_text().replace('net = "GND"\n', "").replace('net = "P3V3"\n', "")
    st = parse_stackup(tomllib.loads(text), text, "b.toml")
    assert {l.name: l.net for l in st.layers if l.type == "plane"} == {"GNDP": "GNDP", "PWR": "PWR"}
    assert st.layer("TOP").net is None


def test_return_path_power_only_layer_is_one_info_per_layer():
    seg = segments(*_net("BOT", net="A"), *_net("BOT", net="B"), *_net("TOP", net="C"))
    (f,) = via_findings(seg, rules(), stackup(), "return-path")
    assert f.severity == "info" and f.layer == "BOT" and f.key == "return-path|BOT"
    assert "only to power" in f.message and "2 nets" in f.message and "A, B" in f.message


def test_return_path_ground_named_plane_is_not_power_only():
    assert via_findings(segments(*_net("BOT")), rules(), stackup(pwr_net="VSS_ANALOG"), "return-path") == []


def test_return_path_escape_via_counts_as_a_layer_change():
    # an IN1-only net escapes from TOP at both ends: TOP -> IN1 shares GNDP, nothing to say
    assert via_findings(segments(*_net("IN1")), rules(), stackup(), "return-path") == []
    # components on the bottom: BOT (PWR) -> IN1 (GNDP, PWR) shares PWR (and BOT carries no segment)
    st = stackup('[vias]\ncomponent_side = "bottom"\n')
    assert [f.layer for f in via_findings(segments(*_net("IN1")), rules(), st, "return-path")] == []


def test_return_path_pair_once():
    seg = segments(*_net("TOP", "BOT", net="D_P", pair="D_N"), *_net("TOP", "BOT", net="D_N", pair="D_P"))
    fs = [f for f in via_findings(seg, rules(), stackup(), "return-path") if f.layer == "TOP → BOT"]
    assert [f.net for f in fs] == ["D_P & D_N"] and "(1 via)" in fs[0].message


def test_return_path_off():
    assert via_findings(segments(*_net("TOP", "BOT")), rules(severity={"return-path": "off"}), stackup(),
                        "return-path") == []
