"""Sign-off across revisions: --previous (workbook and JSON), --waivers, `sicheck waivers`.

Boards are made here (mils, semicolons, hostile names); the closed-form solver keeps each review fast.
Expected statuses follow from the board: widening CLK from 12 to 30 mil on the microstrip layer moves
its Z0 off the 50 ohm target (Z0 falls as width grows, Hammerstad & Jensen 1980) and raises eps_eff, so
its delay and TD/Tr move by a few %.
"""

from __future__ import annotations

import datetime as dt
import json
import tomllib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from openpyxl import load_workbook

from sicheck.errors import InputError
from sicheck.findings import Finding
from sicheck.signoff import Prior, moved_pct, read_previous, sign_off, status_of
from sicheck.waivers import Waiver, apply, glob_match, load_waivers, toml_string, waivers_toml

TRACES = """\
Net;Layer;Length;Width;Rise Time;Pair;Gap;Net Class
SLOW1;L1;800mil;12mil;5ns;;;
CLK;L1;4800mil;{clk}mil;300ps;;;
=SUM(A1);L3;200mil;6mil;1ns;;;
+5V_SENSE;L3;1200mil;6mil;300ps;;;
RX_P;L3;6000mil;4mil;200ps;RX_N;8mil;
"""
RULES = """\
[severity]
tolerance-band = "off"    # the fabrication band's findings are not what these tests count
[[net_class]]
name = "CLK"
match = ["CLK", "+5V*"]
z0 = 50
[[net_class]]
name = "DIFF"
match = ["RX_*"]
zdiff = 100
"""
K_CLK_Z = "z0-target|CLK|L1|w0.762mm"          # only at 30 mil
K_CLK_MODEL = "model-accuracy|L1|w0.762mm"     # only at 30 mil (a wide microstrip outside a formula's range)
K_CLK_LEN = "electrical-length|CLK"
K_5V_Z = "z0-target|+5V_SENSE|L3|w0.152mm"
K_RX_Z = "zdiff-target|RX_N & RX_P|L3|w0.102mm,gap0.203mm"


@pytest.fixture
def review(run, board, tmp_path):
    """review(clk_mils, *extra args) -> (exit code, stdout, stderr); the board is rewritten each time."""
    def go(clk: int, *args):
        tr, st_, rl = board(TRACES.format(clk=clk), rules=RULES)
        return run("review", tr, "--stackup", st_, "--rules", rl, "--solver", "formula", *args)
    return go


def _rows(path, sheet="Findings"):
    ws = load_workbook(path)[sheet]
    header = [c.value for c in ws[1]]
    return ws, header, [dict(zip(header, [c.value for c in r])) for r in ws.iter_rows(min_row=2)]


DECISIONS = {  # key -> (disposition, reviewer, comment); hostile texts on purpose
    K_CLK_Z: ("accept", "=SUM(A1)", "+5V budget holds; =HYPERLINK(\"http://x\")"),
    K_CLK_LEN: ("fix", "B. Ortega", "-terminate at the driver"),
    K_RX_Z: ("waive", "@lab", "coupon measured 104 ohm"),
}


def _expect_round_trip(findings: list[dict], resolved: list[dict]):
    status = {f["key"]: f["status"] for f in findings}
    assert {k for k, s in status.items() if s == "new"} == set()
    assert {k for k, s in status.items() if s == "changed"} == {K_CLK_LEN}
    assert {k for k, s in status.items() if s == "unchanged"} == {
        K_5V_Z, K_RX_Z, "electrical-length|+5V_SENSE", "electrical-length|RX_N & RX_P",
        "model-accuracy|L3|w0.1016mmg0.2032mm", "waveform|RX_N & RX_P"}
    assert {r["key"] for r in resolved} == {K_CLK_Z, K_CLK_MODEL}
    by_key = {f["key"]: f for f in findings}
    for k in (K_CLK_LEN, K_RX_Z):        # carried whatever the status
        assert (by_key[k]["disposition"], by_key[k]["reviewer"], by_key[k]["comment"]) == DECISIONS[k]
    assert by_key[K_5V_Z]["disposition"] is None
    gone = {r["key"]: r for r in resolved}[K_CLK_Z]
    assert (gone["disposition"], gone["reviewer"], gone["comment"]) == DECISIONS[K_CLK_Z]
    clk = by_key[K_CLK_LEN]
    assert clk["previous_value"] != clk["value"] and moved_pct(clk["previous_value"], clk["value"]) > 1.0


def test_round_trip_through_signed_workbook(review, tmp_path):
    v1 = tmp_path / "v1.xlsx"
    assert review(30, "--out", v1)[0] == 1
    ws, header, _ = _rows(v1)
    col = {h: i + 1 for i, h in enumerate(header)}
    seen = set()
    for r in range(2, ws.max_row + 1):
        key = ws.cell(r, col["Key"]).value
        if key in DECISIONS:
            seen.add(key)
            for h, v in zip(("Disposition", "Reviewer", "Comment"), DECISIONS[key]):
                ws.cell(r, col[h]).value = v      # openpyxl stores "=SUM(A1)" as a formula, as a user might
    assert seen == set(DECISIONS)
    signed = tmp_path / "v1-signed.xlsx"
    ws.parent.save(signed)
    v2, js = tmp_path / "v2.xlsx", tmp_path / "v2.json"
    code, out, err = review(12, "--previous", signed, "--out", v2, "--json", js)
    assert code == 1, err
    assert "0 new, 1 changed, 6 unchanged, 2 resolved" in out
    data = json.loads(js.read_text())
    _expect_round_trip(data["findings"], data["resolved"])
    assert data["signoff"]["carried"] == 2 and data["signoff"]["change_pct"] == 1.0
    # the new workbook: decisions where they were left, as text (never a formula), statuses beside them
    ws2, _, rows = _rows(v2)
    mine = {r["Key"]: r for r in rows}
    assert mine[K_RX_Z]["Disposition"] == "waive" and mine[K_RX_Z]["Status"] == "unchanged"
    assert mine[K_CLK_LEN]["Status"] == "changed" and mine[K_CLK_LEN]["Previous value"] > mine[K_CLK_LEN]["Value"]
    _, _, changes = _rows(v2, "Changes")
    assert [(c["Status"], c["Key"]) for c in changes] == [
        ("changed", K_CLK_LEN), ("resolved", K_CLK_Z), ("resolved", K_CLK_MODEL)]
    ch = load_workbook(v2)["Changes"]
    hostile = [c for row in ch.iter_rows(min_row=2) for c in row if c.value == "=SUM(A1)"]
    assert hostile and all(c.data_type == "s" for c in hostile)
    summary = {r[0].value: r[1].value for r in load_workbook(v2)["Summary"].iter_rows() if r[0].value}
    assert summary["Since the previous review"].startswith("0 new, 1 changed, 6 unchanged, 2 resolved")
    assert summary["Resolved findings (Changes sheet)"] == 2


def test_round_trip_through_json(review, run, tmp_path):
    v1 = tmp_path / "v1.json"
    review(30, "--json", v1)
    data = json.loads(v1.read_text())
    for f in data["findings"]:
        assert f["disposition"] is None          # there to be filled in
        if f["key"] in DECISIONS:
            f["disposition"], f["reviewer"], f["comment"] = DECISIONS[f["key"]]
    v1.write_text(json.dumps(data))
    code, text, err = run("waivers", v1)          # a signed JSON gives the same waivers as a signed workbook
    assert code == 0, err
    assert {w["key"] for w in tomllib.loads(text)["waiver"]} == {K_CLK_Z, K_RX_Z}
    v2 = tmp_path / "v2.json"
    code, _, err = review(12, "--previous", v1, "--json", v2)
    assert code == 1, err
    d2 = json.loads(v2.read_text())
    _expect_round_trip(d2["findings"], d2["resolved"])


def test_change_threshold_is_the_stated_one(review, tmp_path):
    v1, v2 = tmp_path / "v1.json", tmp_path / "v2.json"
    review(30, "--json", v1)
    clk = {f["key"]: f for f in json.loads(v1.read_text())["findings"]}[K_CLK_LEN]["value"]
    review(12, "--previous", v1, "--json", v2, "--change-pct", "50")
    f2 = {f["key"]: f for f in json.loads(v2.read_text())["findings"]}[K_CLK_LEN]
    assert moved_pct(clk, f2["value"]) < 50 and f2["status"] == "unchanged"


WAIVE_ALL = """\
[[waiver]]
key = "z0-target|CLK|L1|w0.762mm"
reason = "short stub at the connector"
by = "A. Reviewer"
until = 2999-12-31

[[waiver]]
rule = "z0-target"
net = "+5v*"
layer = "l3"
reason = "sense line, DC only"
by = "=cmd"

[[waiver]]
rule = "zdiff-target"
net = "RX_? & RX_?"
reason = "coupon 104 ohm"
by = "lab"

[[waiver]]
rule = "loss-budget"
net = "NOPE*"
reason = "left over"
by = "x"
"""


def test_waived_errors_pass_and_keep_their_severity(review, tmp_path):
    w = tmp_path / "w.toml"
    w.write_text(WAIVE_ALL)
    js = tmp_path / "r.json"
    code, out, err = review(30, "--waivers", w, "--json", js)
    assert code == 0, err
    assert "waived: 3 findings" in out
    assert "waived error z0-target +5V_SENSE (L3): =cmd: sense line, DC only" in out
    d = json.loads(js.read_text())
    errors = [f for f in d["findings"] if f["severity"] == "error"]
    assert len(errors) == 3 and all(f["waived"] for f in errors)
    assert {f["key"] for f in errors} == {K_CLK_Z, K_5V_Z, K_RX_Z}
    unused = [f for f in d["findings"] if f["rule"] == "waiver-unused"]
    assert len(unused) == 1 and unused[0]["severity"] == "info" and "waiver 4 (line 20)" in unused[0]["message"]
    assert d["summary"]["exit_code"] == 0 and d["summary"]["findings"]["error"] == 3


def test_expired_waiver_is_an_error(review, tmp_path):
    w = tmp_path / "w.toml"
    w.write_text(WAIVE_ALL.replace("2999-12-31", "2020-01-31"))
    js = tmp_path / "r.json"
    code, _, err = review(30, "--waivers", w, "--json", js)
    assert code == 1, err
    d = json.loads(js.read_text())
    exp = [f for f in d["findings"] if f["rule"] == "waiver-expired"]
    assert len(exp) == 1 and exp[0]["severity"] == "error" and "2020-01-31" in exp[0]["message"]
    clk = {f["key"]: f for f in d["findings"]}[K_CLK_Z]
    assert clk["waived"] is None                       # the expired waiver covers nothing


def test_waivers_command_reproduces_the_sign_off(review, run, tmp_path):
    v1 = tmp_path / "v1.xlsx"
    review(30, "--out", v1)
    wb = load_workbook(v1)
    ws = wb["Findings"]
    header = [c.value for c in ws[1]]
    col = {h: i + 1 for i, h in enumerate(header)}
    for r in range(2, ws.max_row + 1):
        key = ws.cell(r, col["Key"]).value
        if key in DECISIONS:
            for h, v in zip(("Disposition", "Reviewer", "Comment"), DECISIONS[key]):
                ws.cell(r, col[h]).value = v
    signed = tmp_path / "signed.xlsx"
    wb.save(signed)
    code, text, err = run("waivers", signed, "--until", "2999-01-01")
    assert code == 0, err
    parsed = tomllib.loads(text)["waiver"]
    assert {(w["key"], w["by"], w["reason"]) for w in parsed} == {
        (k, v[1], v[2]) for k, v in DECISIONS.items() if v[0] in ("accept", "waive")}
    assert all(w["until"] == dt.date(2999, 1, 1) for w in parsed)
    wt = tmp_path / "w.toml"
    wt.write_text(text)
    js = tmp_path / "r.json"
    code, _, err = review(30, "--waivers", wt, "--json", js)
    assert code == 1, err          # the +5V_SENSE error was not signed off
    waived = {f["key"] for f in json.loads(js.read_text())["findings"] if f.get("waived")}
    assert waived == {K_CLK_Z, K_RX_Z}
    # an accepted row without a reviewer: the row and column are named
    ws.cell(2, col["Disposition"]).value = "accept"
    ws.cell(2, col["Reviewer"]).value = None
    wb.save(signed)
    code, _, err = run("waivers", signed)
    assert code == 2 and "row 2" in err and "column 'Reviewer'" in err


@pytest.mark.parametrize("text, where", [
    ('[[waiver]]\nkey = "z0-target|A|L1"\nby = "x"\n', "line 1: waiver 1: 'reason' is missing"),
    ('[[waiver]]\nrule = "z0-target"\nnet = "A"\nreason = "r"\nby = "x"\n\n[[waiver]]\nrule = "nope"\n'
     'net = "A"\nreason = "r"\nby = "x"\n', "line 8, key 'rule': waiver 2: 'nope' is not a check"),
    ('[[waiver]]\nkey = "z0-target|A"\nnet = "A"\nreason = "r"\nby = "x"\n', "line 3, key 'net'"),
    ('[[waiver]]\nkey = "z0-target|A"\nreason = "r"\nby = "x"\nuntil = "soon"\n', "line 5, key 'until'"),
    ('[[waiver]]\nkey = "z0-target|A"\nreason = ""\nby = "x"\n', "line 3, key 'reason'"),
    ('[[waiver]]\nkey = "z0-target|A"\nreason = "r"\nby = "x"\ncolour = 1\n', "line 5, key 'colour'"),
    ('[[waiver]]\nrule = "z0-target"\nreason = "r"\nby = "x"\n', "line 1: waiver 1: 'net' is missing"),
    ('waiver = 3\n', "line 1, key 'waiver'"),
    ('[[waiver]]\nkey = "z0-target|A"\nreason = "r\n', "line 3"),
    ('[[waivers]]\nkey = "z0-target|A"\n', "line 1, key 'waivers'"),
    ('[[waiver]]\nkey = "waiver-expired|z0-target|A"\nreason = "r"\nby = "x"\n', "line 2, key 'key'"),
    ('[[waiver]]\nkey = "zo-target|A"\nreason = "r"\nby = "x"\n', "line 2, key 'key': waiver 1: the key's rule"),
])
def test_malformed_waiver_files_name_file_line_and_key(tmp_path, text, where):
    p = tmp_path / "w.toml"
    p.write_text(text)
    with pytest.raises(InputError) as e:
        load_waivers(p)
    assert str(e.value).startswith(f"{p}, {where}")


def test_malformed_waiver_file_exits_2(review, tmp_path):
    p = tmp_path / "w.toml"
    p.write_text('[[waiver]]\nkey = "z0-target|A"\nreason = "r"\nby = 5\n')
    code, _, err = review(12, "--waivers", p)
    assert code == 2 and "line 4, key 'by'" in err and "Traceback" not in err


def test_previous_review_errors_name_the_place(review, tmp_path):
    v1 = tmp_path / "v1.xlsx"
    review(12, "--out", v1)
    wb = load_workbook(v1)
    ws = wb["Findings"]
    col = {c.value: c.column for c in ws[1]}
    ws.cell(3, col["Disposition"]).value = "maybe"
    wb.save(v1)
    code, _, err = review(12, "--previous", v1)
    assert code == 2 and "row 3" in err and "column 'Disposition'" in err
    ws.delete_cols(col["Key"])
    wb.save(v1)
    code, _, err = review(12, "--previous", v1)
    assert code == 2 and "column 'Key'" in err
    bad = tmp_path / "old.json"
    bad.write_text('{"findings": [{"key": "a"}, {"key": "a"}]}')
    code, _, err = review(12, "--previous", bad)
    assert code == 2 and "appears twice" in err
    bad.write_text('{"findings": [\n{"key": ')
    code, _, err = review(12, "--previous", bad)
    assert code == 2 and "line 2" in err
    code, _, err = review(12, "--previous", bad, "--out", bad.with_suffix(".xlsx"), "--change-pct", "150")
    assert code == 2 and "--change-pct" in err


# ---- invariants of matching and statuses ------------------------------------------------------------

NAMES = st.text(st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=20)


@given(NAMES)
def test_a_literal_net_name_matches_itself_and_star_matches_all(name):
    literal = name.replace("*", "").replace("?", "")
    if literal:
        assert glob_match(literal, literal)
        assert not glob_match(literal, literal + "x")
    assert glob_match("*", name)
    assert glob_match("?" * len(name), name)


@given(st.lists(st.tuples(st.sampled_from(["z0-target", "loss-budget"]), NAMES), min_size=1, max_size=6,
                unique=True), st.integers(0, 5))
def test_a_key_waiver_covers_exactly_its_finding(pairs, pick):
    fs = [Finding(rule=r, severity="error", net=n, layer="L1", message="m", key=f"{r}|{n}|L1") for r, n in pairs]
    target = fs[pick % len(fs)]
    w = Waiver(index=1, line=1, reason="r", by="b", key=target.key)
    covered, notes = apply(fs, [w], dt.date(2026, 1, 1))
    assert set(covered) == {target.key} and notes == []
    _, so = sign_off(fs, waivers=[w], waivers_source="w.toml", today=dt.date(2026, 1, 1))
    assert so.waived_keys == {target.key}


@given(NAMES)
def test_waiver_text_survives_toml(text):
    d = {"key": f"z0-target|{text}", "disposition": "accept", "reviewer": text, "comment": text, "net": text}
    parsed = tomllib.loads(waivers_toml([d]))["waiver"][0]
    assert parsed["key"] == d["key"] and parsed["by"] == text and parsed["reason"] == text
    assert tomllib.loads(f"x = {toml_string(text)}")["x"] == text


@settings(max_examples=200)
@given(st.floats(-1e6, 1e6), st.floats(-1e6, 1e6), st.floats(0, 50))
def test_status_is_symmetric_and_follows_the_threshold(a, b, pct):
    assert moved_pct(a, b) == moved_pct(b, a)
    assert (moved_pct(a, b) == 0) == (a == b)
    f = Finding(rule="r", severity="error", net="n", layer="", message="", key="k", value=b)
    s = status_of(Prior(key="k", severity="error", value=a), f, pct)
    assert s == ("changed" if moved_pct(a, b) > pct else "unchanged")
    assert status_of(Prior(key="k", severity="warning", value=a), f, pct) == "changed"


def test_read_previous_refuses_other_files(tmp_path):
    p = tmp_path / "old.csv"
    p.write_text("x")
    with pytest.raises(InputError, match="workbook"):
        read_previous(p)
    with pytest.raises(InputError, match="not found"):
        read_previous(tmp_path / "none.json")


def test_readme_waiver_example_is_a_valid_waiver_file(tmp_path):
    from pathlib import Path
    readme = (Path(__file__).parent.parent / "README.md").read_text(encoding="utf-8")
    block = readme.split("```toml\n# waivers.toml\n", 1)[1].split("```", 1)[0]
    p = tmp_path / "w.toml"
    p.write_text(block)
    ws = load_waivers(p)
    assert [w.key is not None for w in ws] == [True, False] and ws[0].until == dt.date(2027, 6, 30)


def test_rule_waiver_matches_a_pair_in_either_order_and_one_of_its_layers():
    f = Finding(rule="zdiff-target", severity="error", net="RX_P & RX_N", layer="L1 > L3", message="m",
                key="zdiff-target|RX_N & RX_P|short")
    for net, layer, hit in (("RX_N & RX_P", None, True), ("rx_p & rx_n", "l3", True), ("RX_? & RX_?", "L1", True),
                            ("RX_P", None, False), ("RX_*", "L2", False)):
        w = Waiver(index=1, line=1, reason="r", by="b", rule="zdiff-target", net=net, layer=layer)
        assert w.matches(f) is hit, (net, layer)
    assert not Waiver(index=1, line=1, reason="r", by="b", rule="z0-target", net="*").matches(f)


@pytest.fixture(scope="module")
def small_review(tmp_path_factory):
    """One review built in-process (closed forms, no waveforms), to write workbooks from."""
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    from conftest import FOUR_LAYER
    d = tmp_path_factory.mktemp("small")
    (d / "t.csv").write_text(TRACES.format(clk=30))
    (d / "s.toml").write_text(FOUR_LAYER)
    (d / "r.toml").write_text(RULES)
    rs = load_rule_sets([d / "r.toml"])
    return build_review(read_traces(d / "t.csv", {}, dict(rs.columns), None), load_stackup(d / "s.toml"), rs,
                        waveforms=False), d


TEXT = st.text(st.characters(blacklist_categories=("Cs", "Cc")), max_size=40).map(str.strip)


@settings(max_examples=25, deadline=None)
@given(TEXT, TEXT)
def test_decisions_survive_our_workbook_as_text(small_review, reviewer, comment):
    """Whatever a reviewer typed (=SUM(A1), +5V, @x) is written back as text and read back unchanged."""
    from sicheck.reports.workbook import write_workbook
    from sicheck.signoff import Mark, SignOff
    rv, d = small_review
    k = rv.findings[0].key
    rv.signoff = SignOff(previous="old.xlsx", marks={k: Mark(status="unchanged", disposition="waive",
                                                             reviewer=reviewer, comment=comment)})
    try:
        write_workbook(rv, d / "w.xlsx")
    finally:
        rv.signoff = None
    back = {p.key: p for p in read_previous(d / "w.xlsx")}
    assert (back[k].disposition, back[k].reviewer, back[k].comment) == ("waive", reviewer, comment)
    for p, f in zip(back.values(), rv.findings):         # values read back as written (the next status)
        assert p.key == f.key and (p.value is None) == (f.value is None)
        assert p.value is None or p.value == pytest.approx(f.value, rel=1e-12)
    ws = load_workbook(d / "w.xlsx")["Findings"]
    assert all(c.data_type != "f" for row in ws.iter_rows() for c in row)
