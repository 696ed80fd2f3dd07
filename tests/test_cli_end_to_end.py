"""End-to-end: the CLI as a user runs it, on the demo board and on boards made here."""

import json
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest
from openpyxl import load_workbook

TRACES = """\
Net,Layer,Length [mm],Width [mm],Rise Time,Pair,Gap [mm],Net Class
SLOW1,L1,20,0.3,5ns,,,
CLK,L1,120,0.3,300ps,,,
=cmd|' /C calc'!A0,L3,5,0.15,1ns,,,
+PLUS,L3,5,0.15,1ns,,,
@AT,L3,5,0.15,1ns,,,
MID,L3,30,0.15,1ns,,,
RX_P,L3,150,0.1,200ps,RX_N,0.2,
"""
RULES = """\
[[net_class]]
name = "CLK"
match = ["CLK"]
z0 = 50
[[net_class]]
name = "DIFF"
match = ["RX_*"]
zdiff = 100
"""


def test_demo_writes_workbook_in_current_folder(run, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    code, out, err = run("demo", "--json", "demo.json")
    assert code == 0, err
    wb_path = tmp_path / "sicheck-demo-review.xlsx"
    assert wb_path.exists()
    data = json.loads((tmp_path / "demo.json").read_text())
    s = data["summary"]
    assert s["nets"] >= 80
    # every classification appears on the demo board
    assert all(s["termination"][k] > 0 for k in ("not-needed", "recommended", "required"))
    assert s["findings"]["error"] > 0            # the demo breaks some targets on purpose
    kinds = {seg["kind"] for seg in data["segments"]}
    assert kinds == {"microstrip", "stripline"}
    assert any("zdiff_ohm" in seg for seg in data["segments"])
    for net in data["nets"]:
        assert set(("net", "length_mm", "delay_ps", "rise_time_ps", "electrical", "termination",
                    "series_ohm")) <= set(net)
        assert net["electrical"] in ("lumped", "transmission-line")
        assert net["termination"] in ("not-needed", "recommended", "required")
    for seg in data["segments"]:
        assert set(("net", "layer", "length_mm", "width_mm", "z0_ohm", "eps_eff", "delay_ps")) <= set(seg)
    for f in data["findings"]:
        assert set(("rule", "severity", "net", "message")) <= set(f)
    assert "Nets that need termination" in out


def test_demo_xlsx_trace_list_gives_same_results(run, tmp_path):
    from sicheck.resources import default_rules_path, demo_dir
    d = demo_dir()
    outs = []
    for name in ("traces.csv", "traces.xlsx"):
        j = tmp_path / f"{name}.json"
        code, _, err = run("review", d / name, "--stackup", d / "stackup.toml", "--rules", default_rules_path(),
                           "--rules", d / "rules.toml", "--json", j)
        assert code == 1, err
        outs.append(json.loads(j.read_text()))
    a, b = outs
    assert [n["delay_ps"] for n in a["nets"]] == [n["delay_ps"] for n in b["nets"]]
    assert a["summary"]["findings"] == b["summary"]["findings"]


def test_review_small_board_workbook_and_json(run, board, tmp_path):
    tr, st, rl = board(TRACES, rules=RULES)
    out, js = tmp_path / "review.xlsx", tmp_path / "review.json"
    code, stdout, err = run("review", tr, "--stackup", st, "--rules", rl, "--out", out, "--json", js)
    data = json.loads(js.read_text())
    assert code == (1 if data["summary"]["findings"]["error"] else 0)
    nets = {n["net"]: n for n in data["nets"]}
    assert nets["SLOW1"]["termination"] == "not-needed" and nets["SLOW1"]["electrical"] == "lumped"
    assert nets["CLK"]["termination"] == "required"
    assert nets["MID"]["termination"] == "recommended"
    assert nets["RX_N"]["listed_via_partner"] is True

    # openpyxl reads it back; text that looks like a formula stays text
    wb = load_workbook(out)
    assert {"Summary", "Findings", "Nets", "Segments", "Stackup", "Rules"} <= set(wb.sheetnames)
    seg = wb["Segments"]
    names = [c.value for c in seg["B"]][1:]
    assert "=cmd|' /C calc'!A0" in names and "+PLUS" in names and "@AT" in names
    for row in seg.iter_rows(min_row=2):
        cell = row[1]
        assert cell.data_type == "s"
    fnd = wb["Findings"]
    assert fnd.freeze_panes == "A2" and fnd.auto_filter.ref
    dv = fnd.data_validations.dataValidation
    assert dv and "accept" in dv[0].formula1 and "waive" in dv[0].formula1
    assert [c.value for c in fnd[1]][:8] == ["ID", "Severity", "Rule", "Net", "Layer", "Finding", "Trace row",
                                             "Disposition"]

    # a second reader (python-calamine) sees the same text and numbers
    from python_calamine import CalamineWorkbook
    cw = CalamineWorkbook.from_path(str(out))
    rows = cw.get_sheet_by_name("Segments").to_python()
    assert rows[0][8] == "Z0 [ohm]"
    by_net = {r[1]: r for r in rows[1:]}
    assert "=cmd|' /C calc'!A0" in by_net
    z_json = {s["net"]: s["z0_ohm"] for s in data["segments"]}
    assert by_net["CLK"][8] == pytest.approx(z_json["CLK"], rel=1e-5)


def test_exit_codes(run, board, tmp_path):
    tr, st = board("net,layer,length,width,rise_time\nA,L1,10mm,0.3mm,5ns\n")
    assert run("review", tr, "--stackup", st)[0] == 0
    tr, st, rl = board("net,layer,length,width,rise_time\nA,L1,10mm,0.05mm,5ns\n",
                       rules='[[net_class]]\nname="A"\nmatch=["A"]\nz0=50\n')
    assert run("review", tr, "--stackup", st, "--rules", rl)[0] == 1
    code, out, err = run("review", tr, "--stackup", tmp_path / "missing.toml")
    assert code == 2 and "not found" in err and "Traceback" not in err


@pytest.mark.parametrize("traces,words", [
    ("net,layer,length,width,rise_time\nA,L7,10mm,0.3mm,5ns\n", "row 2, column 'layer'"),
    ("net,layer,length,width,rise_time\nA,L1,ten,0.3mm,5ns\n", "row 2, column 'length'"),
    ("net,layer,length,width,rise_time\nA,L1,10,0.3mm,5ns\n", "has no unit"),
    ("net,layer,length,width,rise_time\nA,L1,10mm,0.3mm,-5ns\n", "must be positive"),
    ("net,layer,length,width,rise_time\nA,L1,10mm,0.3mm,5 lightyears\n", "unknown time unit"),
])
def test_bad_inputs_exit_2_with_location(run, board, traces, words):
    tr, st = board(traces)
    code, out, err = run("review", tr, "--stackup", st)
    assert code == 2
    assert words in err and str(tr) in err
    assert "Traceback" not in err


def test_never_overwrites_an_input(run, board):
    tr, st = board("net,layer,length,width,rise_time\nA,L1,10mm,0.3mm,5ns\n")
    before = tr.read_bytes()
    code, _, err = run("review", tr, "--stackup", st, "--json", tr)
    assert code == 2 and "overwrite" in err
    assert tr.read_bytes() == before


def test_map_option(run, board):
    tr, st = board("Signal,Layer,Routed Length [mm],Width [mm],Edge\nA,L1,10,0.3,5ns\n")
    code, out, err = run("review", tr, "--stackup", st, "--map", "Signal=net", "--map", "Routed Length=length",
                         "--map", "Edge=rise_time")
    assert code == 0, err


def test_rules_listing(run):
    code, out, err = run("rules")
    assert code == 0
    for rule in ("z0-target", "zdiff-target", "electrical-length", "z-step", "no-target", "model-accuracy"):
        assert rule in out
    assert "required_min_td_over_tr" in out


def test_line_json_microstrip(run):
    code, out, err = run("line", "microstrip", "--width", "3.08", "--thickness", "0", "--er", "2.2",
                         "--height", "1", "--json")
    assert code == 0, err
    d = json.loads(out)                                   # stdout is exactly one JSON object
    assert d["z0_ohm"] == pytest.approx(50.0, rel=0.01)  # textbook case (see test_microstrip_reference)
    for key in ("eps_eff", "delay_ps_per_mm", "l_nh_per_mm", "c_pf_per_mm", "model", "warnings"):
        assert key in d
    # Z0 = sqrt(L/C)
    assert (d["l_nh_per_mm"] * 1e-9 / (d["c_pf_per_mm"] * 1e-12)) ** 0.5 == pytest.approx(d["z0_ohm"], rel=1e-9)


def test_line_json_stripline_pair_with_units(run):
    code, out, err = run("line", "stripline", "--width", "4mil", "--thickness", "0.6mil", "--er", "3.8",
                         "--below", "5mil", "--above", "5mil", "--gap", "6mil", "--json")
    assert code == 0, err
    d = json.loads(out)
    assert d["zdiff_ohm"] == pytest.approx(2 * d["zodd_ohm"])
    assert d["zcommon_ohm"] == pytest.approx(d["zeven_ohm"] / 2)
    assert d["zodd_ohm"] < d["z0_ohm"] < d["zeven_ohm"]


def test_line_bad_input(run):
    code, out, err = run("line", "microstrip", "--width", "-1", "--thickness", "0", "--er", "4", "--height", "1")
    assert code == 2 and "--width" in err and out == ""


def test_version_is_fast():
    env = dict(os.environ)
    t0 = time.perf_counter()
    p = subprocess.run([sys.executable, "-c", "from sicheck.cli import main; main(['--version'])"],
                       capture_output=True, text=True, env=env)
    dt = time.perf_counter() - t0
    assert p.returncode == 0 and p.stdout.startswith("sicheck ")
    assert dt < 2.0      # generous bound for CI; the benchmark prints the real figure


def test_console_script_runs_outside_repo(tmp_path):
    exe = Path(sys.executable).parent / "sicheck"
    if not exe.exists():
        pytest.skip("console script not installed in this environment")
    p = subprocess.run([str(exe), "line", "stripline", "--width", "0.2", "--thickness", "0.035", "--er", "4",
                        "--height", "0.5", "--json"], capture_output=True, text=True, cwd=tmp_path)
    assert p.returncode == 0, p.stderr
    assert json.loads(p.stdout)["model"] == "cohn-wheeler"
