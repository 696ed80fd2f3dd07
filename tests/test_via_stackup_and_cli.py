"""The stackup's [vias] table and plane nets (errors with file, line and key), the `vias` trace-list column,
and an end-to-end review of a small board made here (mils, semicolons, a hostile net name)."""

from __future__ import annotations

import json

import pytest
from via_boards import stackup_text

from sicheck.errors import InputError
from sicheck.stackup import load_stackup


def _write(tmp_path, text):
    p = tmp_path / "s.toml"
    p.write_text(text, encoding="utf-8")
    return p


def test_vias_table_read(tmp_path):
    st = load_stackup(_write(tmp_path, stackup_text('\n[vias]\nkind = "backdrilled"\ncomponent_side = "bottom"\n'
                                                    'stub = "8mil"\n')))
    assert (st.vias.kind, st.vias.component_side) == ("backdrilled", "bottom")
    assert st.vias.stub == pytest.approx(8 * 25.4e-6)
    plain = load_stackup(_write(tmp_path, stackup_text()))
    assert (plain.vias.kind, plain.vias.component_side, plain.vias.stub) == ("through", "top", None)


def test_bare_stub_takes_the_file_units(tmp_path):
    st = load_stackup(_write(tmp_path, stackup_text('\n[vias]\nkind = "backdrilled"\nstub = 0.15\n')))
    assert st.vias.stub == pytest.approx(0.15e-3)


@pytest.mark.parametrize("table,key,words", [
    ('[vias]\nkind = "stacked"\n', "kind", "kind must be one of through, blind, backdrilled"),
    ('[vias]\ncomponent_side = "left"\n', "component_side", "component_side must be top or bottom"),
    ('[vias]\nkind = "backdrilled"\n', "kind", "needs stub"),
    ('[vias]\nkind = "through"\nstub = "0.2mm"\n', "stub", "only to kind = \"backdrilled\""),
    ('[vias]\nkind = "backdrilled"\nstub = "5mm"\n', "stub", "implausibly large"),
    ('[vias]\nkind = "backdrilled"\nstub = "-0.1mm"\n', "stub", "must not be negative"),
    ('[vias]\nkind = "backdrilled"\nstub = "fast"\n', "stub", "stub:"),
    ('[vias]\ndrill = "0.2mm"\n', "drill", "unknown key 'drill'"),
])
def test_vias_table_errors_name_file_line_and_key(tmp_path, table, key, words):
    text = stackup_text("\n" + table)
    p = _write(tmp_path, text)
    with pytest.raises(InputError) as ei:
        load_stackup(p)
    e = ei.value
    assert words in str(e) and e.file == str(p) and e.key == key
    lines = text.splitlines()
    assert lines[e.line - 1].startswith(f"{key} =") or (key == "kind" and lines[e.line - 1].startswith("kind ="))


def test_vias_not_a_table(tmp_path):
    text = 'vias = "through"\n' + stackup_text()
    with pytest.raises(InputError, match="must be a table") as ei:
        load_stackup(_write(tmp_path, text))
    assert ei.value.line == 1 and ei.value.key == "vias"


def test_plane_net_errors(tmp_path):
    with pytest.raises(InputError, match="net must be the name") as ei:
        load_stackup(_write(tmp_path, stackup_text().replace('net = "GND"', 'net = 5')))
    assert ei.value.key == "net" and ei.value.line == 17
    with pytest.raises(InputError, match="unknown key 'net' for a signal layer") as ei:
        load_stackup(_write(tmp_path, stackup_text().replace('name = "TOP"', 'name = "TOP"\nnet = "X"')))
    assert ei.value.line == 7


def test_vias_column_must_be_whole_numbers(run, board):
    tr, st = board("Net;Layer;Length [mm];Width [mm];Rise Time;Vias\nA;TOP;10;0,15;100ps;1,5\n",
                   stackup=stackup_text())
    code, _, err = run("review", tr, "--stackup", st, "--solver", "formula")
    assert code == 2 and "row 2" in err and "column 'Vias'" in err and "whole number" in err
    tr, st = board("Net;Layer;Length [mm];Width [mm];Rise Time;Vias\nA;TOP;10;0,15;100ps;-1\n", stackup=stackup_text())
    code, _, err = run("review", tr, "--stackup", st, "--solver", "formula")
    assert code == 2 and "must not be negative" in err and "Traceback" not in err


BOARD_MIL = stackup_text('\n[vias]\nkind = "through"\n')

TRACES = """\
Net;Layer;Length [mil];Width [mil];Rise Time;Net Class;Vias
=SER+1;TOP;200;4,5;30ps;;
=SER+1;IN1;1500;4;30ps;;
=SER+1;TOP;150;4,5;30ps;;1
SLOW;TOP;400;6;2ns;;
SLOW;BOT;600;6;2ns;;
"""


def test_end_to_end_review_reports_vias_and_return_paths(run, board, tmp_path):
    tr, st = board(TRACES, stackup=BOARD_MIL)
    js, xl = tmp_path / "out.json", tmp_path / "out.xlsx"
    code, out, err = run("review", tr, "--stackup", st, "--solver", "formula", "--json", js, "--out", xl)
    assert code in (0, 1), err
    from openpyxl import load_workbook
    rows = list(load_workbook(xl, read_only=True)["Nets"].iter_rows(values_only=True))
    head = next(r for r in rows if r and r[0] == "Net")
    iv = head.index("Vias")
    assert {r[0]: r[iv] for r in rows if r and r[0] in ("=SER+1", "SLOW")} == {"=SER+1": 3, "SLOW": 1}
    data = json.loads(js.read_text(encoding="utf-8"))
    nets = {n["net"]: n for n in data["nets"]}
    ser, slow = nets["=SER+1"], nets["SLOW"]
    # two layer changes plus one via the export counts on row 4 (taken as an escape-type via from TOP, here
    # on TOP itself: counted, no stub)
    assert ser["vias"] == 3 and slow["vias"] == 1
    assert ser["via_stub_resonance_ghz"] == pytest.approx(31.23, abs=0.01)      # the 1.2 mm stub in er 4
    assert slow["via_stub_resonance_ghz"] is None                             # TOP -> BOT: no stub
    rules_found = {(f["rule"], f["net"], f["layer"]): f for f in data["findings"]}
    stub = rules_found[("via-stub", "=SER+1", "TOP → IN1")]
    assert stub["severity"] == "warning" and stub["row"] == 3 and stub["unit"] == "GHz"
    rp = rules_found[("return-path", "SLOW", "TOP → BOT")]
    assert rp["severity"] == "warning" and "GNDP (GND)" in rp["message"] and "PWR (P3V3)" in rp["message"]
    assert ("return-path", "", "BOT") in rules_found                         # BOT references only P3V3
    # the barrel's delay is in the net's delay: SLOW's segments alone are shorter
    seg_delay = sum(s["delay_ps"] for s in data["segments"] if s["net"] == "SLOW")
    assert slow["delay_ps"] - seg_delay == pytest.approx(1.47e-3 * 2 / 299_792_458.0 * 1e12, rel=1e-3)


def test_vias_follow_the_tree_when_rows_name_nodes(run, board, tmp_path):
    # TOP trunk to V1, then two branches on IN1: one via at V1 (shared), an escape via at each receiver
    traces = ("net,layer,length,width,rise_time,from,to,load_pf\n"
              "ADDR,TOP,20mm,0.15mm,100ps,U1.1,V1,\n"
              "ADDR,IN1,30mm,0.15mm,100ps,V1,U2.1,2\n"
              "ADDR,IN1,25mm,0.15mm,100ps,V1,U3.1,2\n")
    tr, st = board(traces, stackup=stackup_text())
    js = tmp_path / "t.json"
    code, _, err = run("review", tr, "--stackup", st, "--solver", "formula", "--json", js)
    assert code in (0, 1), err
    (net,) = json.loads(js.read_text(encoding="utf-8"))["nets"]
    assert net["vias"] == 3            # rows in series would give 2 (TOP -> IN1, one escape at the last row)


def test_demo_board_shows_the_via_and_return_path_findings(tmp_path):
    # the demo board (not designed by these tests): its uplink dives TOP -> IN3 through through-vias, its
    # SPI_DAC_SCK changes from TOP (over GND) to BOT (over +3V3)
    from sicheck.resources import demo_dir
    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.traces import read_traces
    d = demo_dir()
    rv = build_review(read_traces(d / "traces.csv"), load_stackup(d / "stackup.toml"), load_rules(d / "rules.toml"),
                      waveforms=False)
    got = {(f.rule, f.net, f.layer, f.severity) for f in rv.findings if f.rule in ("via-stub", "return-path")}
    from sicheck.checks.engine import pair_label
    assert ("via-stub", pair_label("UPLINK_TX_P", "UPLINK_TX_N"), "TOP → IN3", "warning") in got
    assert ("return-path", "SPI_DAC_SCK", "TOP → BOT", "warning") in got
    assert ("return-path", "", "BOT", "info") in got
    assert any(r == "return-path" and s == "info" and n for r, n, _, s in got)      # GND on two planes
