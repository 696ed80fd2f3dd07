"""`sicheck compare` (two reviews, or one trace list on two stackups) and the Markdown summaries."""

from __future__ import annotations

import json
import re

from hypothesis import given
from hypothesis import strategies as st
from openpyxl import load_workbook

from sicheck.compare import compare
from sicheck.reports.markdown import md

from test_signoff import RULES, TRACES   # the same small board (mils, semicolons, hostile names)

THIN = "thickness = 0.2\ner = 4.3"        # the dielectric under L1 in the tests' four-layer stackup


def _two_reviews(run, board, tmp_path, old_clk, new_clk):
    paths = []
    for clk, name in ((old_clk, "old.json"), (new_clk, "new.json")):
        tr, st_, rl = board(TRACES.format(clk=clk), rules=RULES)
        js = tmp_path / name
        run("review", tr, "--stackup", st_, "--rules", rl, "--solver", "formula", "--json", js)
        paths.append(js)
    return paths


def test_compare_two_revisions(run, board, tmp_path):
    old, new = _two_reviews(run, board, tmp_path, 12, 30)
    js, xl, mdp = tmp_path / "c.json", tmp_path / "c.xlsx", tmp_path / "c.md"
    code, out, err = run("compare", old, new, "--json", js, "--out", xl, "--markdown", mdp)
    assert code == 1, err                       # a 30 mil CLK misses its 50 ohm target: a new error
    c = json.loads(js.read_text())
    assert c["introduces_error"] and [n["net"] for n in c["nets"]] == ["CLK"]
    what = {x["what"]: x for x in c["nets"][0]["changes"]}
    # a wider microstrip has a lower Z0 (Hammerstad & Jensen 1980): the move is large and negative
    assert what["Z on L1"]["change_pct"] < -20 and what["Z on L1"]["old"] > what["Z on L1"]["new"]
    assert "finding added" in what and "delay" in what
    assert [f["key"] for f in c["findings_added"] if f["severity"] == "error"] == ["z0-target|CLK|L1|w0.762mm"]
    rows = list(load_workbook(xl)["Compare"].iter_rows(min_row=2, values_only=True))
    assert {r[0] for r in rows} == {"CLK"} and any(r[1] == "Z on L1" for r in rows)
    assert "introduces an error finding" in mdp.read_text()
    # the other way round the error is resolved and the change passes
    code, out, _ = run("compare", new, old, "--json", js)
    assert code == 0 and len(json.loads(js.read_text())["findings_resolved"]) == 2
    # above the threshold only: the 3 % delay move goes, the 40 % impedance move stays
    run("compare", old, new, "--json", js, "--threshold-pct", "10")
    what = {x["what"] for x in json.loads(js.read_text())["nets"][0]["changes"]}
    assert "Z on L1" in what and "delay" not in what


def test_compare_what_if_two_stackups(run, board, tmp_path):
    tr, st_a, rl = board(TRACES.format(clk=12), rules=RULES)
    st_b = tmp_path / "thin.toml"
    text = st_a.read_text()
    assert THIN in text
    st_b.write_text(text.replace(THIN, "thickness = 0.1\ner = 4.3", 1))
    js = tmp_path / "c.json"
    code, out, err = run("compare", tr, "--stackup", st_a, "--stackup", st_b, "--rules", rl, "--solver", "formula",
                         "--json", js)
    assert code == 1, err
    c = json.loads(js.read_text())
    nets = {n["net"]: {x["what"]: x for x in n["changes"]} for n in c["nets"]}
    # halving the height to the plane lowers a microstrip's Z0 (Hammerstad & Jensen 1980); L3 is untouched
    assert nets["CLK"]["Z on L1"]["change_pct"] < -10 and nets["SLOW1"]["Z on L1"]["change_pct"] < -10
    assert not any(k.startswith("Z on L3") for ch in nets.values() for k in ch)
    assert c["nets"][0]["net"] == "CLK" and c["nets"][0]["introduces_error"]


def test_compare_bad_inputs(run, tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text('{"nets": [], ')
    good = tmp_path / "good.json"
    good.write_text('{"nets": [], "findings": []}')
    for args, words in ((("compare", good), "two review JSON"), (("compare", bad, good), "bad.json, line 1"),
                        (("compare", good, good, "--out", tmp_path / "x.csv"), ".xlsx"),
                        (("compare", good, "--stackup", good), "two --stackup"),
                        (("compare", good, good, "--threshold-pct", "-1"), "--threshold-pct"),
                        (("compare", good, tmp_path / "none.json"), "not found")):
        code, _, err = run(*args)
        assert code == 2 and words in err and "Traceback" not in err
    code, out, _ = run("compare", good, good)
    assert code == 0 and "0 of 0 nets changed" in out


def _review(nets, findings=(), z=None):
    segs = [{"net": n, "layer": "L1", "length_mm": 10.0, "z0_ohm": z.get(n, 50.0) if z else 50.0} for n in nets]
    return {"nets": [{"net": n, "electrical": "lumped", "termination": "not-needed", "delay_ps": 100.0,
                      "loss_db": 0.1} for n in nets], "segments": segs, "findings": list(findings)}


def test_compare_orders_by_how_much_nets_moved():
    old = _review(["A", "B", "C", "D"])
    new = _review(["A", "B", "C", "E"], findings=[{"key": "k|C", "rule": "k", "severity": "error", "net": "C",
                                                   "message": "m"}], z={"A": 52.0, "B": 60.0})
    c = compare(old, new, 2.0)
    # an added error first; then by size of move: a net gone or added counts as 100 %, then B (18 %), then A (4 %)
    assert [r.net for r in c.nets] == ["C", "D", "E", "B", "A"]
    assert c.exit_code == 1 and c.nets[0].introduces_error
    assert compare(old, new, 5.0).nets[-1].net == "B"       # A's 4 % is below a 5 % threshold


@given(st.lists(st.floats(1, 1000), min_size=1, max_size=5), st.floats(0, 60))
def test_a_review_compared_with_itself_has_no_changes_and_moves_follow_the_threshold(zs, pct):
    nets = [f"N{i}" for i in range(len(zs))]
    r = _review(nets, z=dict(zip(nets, zs)))
    assert compare(r, r, pct).nets == [] and compare(r, r).exit_code == 0
    moved = _review(nets, z={n: z * 1.5 for n, z in zip(nets, zs)})   # 1.5x: a move of 33.3 % of the larger
    assert bool(compare(r, moved, pct).nets) == (pct < 100 / 3 - 1e-9)


@given(st.text(max_size=30))
def test_markdown_text_cannot_break_a_table_or_become_markup(text):
    s = md(text)
    assert "\n" not in s and "\r" not in s
    assert re.search(r"(?<!\\)[|<>`*_\[\]]", s.replace("\\\\", "")) is None


def test_review_markdown_summary(run, board, tmp_path):
    tr, st_, rl = board(TRACES.format(clk=30), rules=RULES)
    w = tmp_path / "w.toml"
    w.write_text('[[waiver]]\nrule = "zdiff-target"\nnet = "RX*"\nreason = "<b>coupon</b> | 104 ohm"\nby = "@lab"\n')
    mdp = tmp_path / "summary.md"
    code, out, err = run("review", tr, "--stackup", st_, "--rules", rl, "--solver", "formula", "--waivers", w,
                         "--markdown", mdp)
    assert code == 1, err
    text = mdp.read_text()
    assert "**The review fails** (exit code 1): 2 error finding(s) not waived." in text
    assert "| error | 3 | 1 |" in text and "### Waived findings" in text
    waived_row = [ln for ln in text.splitlines() if "zdiff" in ln and "coupon" in ln][0]
    assert len(re.findall(r"(?<!\\)\|", waived_row)) == 9          # 8 cells: no border comes from the text
    assert "<b>" not in text and "\\+5V\\_SENSE" in text
    code, _, err = run("review", tr, "--stackup", st_, "--rules", rl, "--markdown", tr)
    assert code == 2 and "overwrite" in err


def test_what_if_names_the_stackup_a_trace_list_does_not_fit(run, board, tmp_path):
    tr, st_a, rl = board(TRACES.format(clk=12), rules=RULES)
    st_b = tmp_path / "renamed.toml"
    st_b.write_text(st_a.read_text().replace('name = "L3"', 'name = "IN2"'))
    code, _, err = run("compare", tr, "--stackup", st_a, "--stackup", st_b, "--rules", rl, "--solver", "formula")
    assert code == 2 and "layer 'L3'" in err and "renamed.toml" in err and "column 'layer'" in err
