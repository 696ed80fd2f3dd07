"""The review workbook as a file: text-only cells from hostile names, print set-up, output-path checks,
and the terminal summary at 80 columns."""

from __future__ import annotations

import csv
import io
import os
import re
import zipfile

import pytest
from openpyxl import load_workbook

from sicheck.reports.workbook import MAX_TEXT, clean_text

HYPERLINK = '=HYPERLINK("http://example.invalid","x")'
LONG = "LONG_" + "x" * 2000
HOSTILE = [HYPERLINK, "+SUM(A1:A9)", "-2+3", "@cmd", "CTRL\x07BELL\x1bESC", "Ω_Netz_äö_漢字", LONG, "sheet!A1",
           "\tTAB"]
# each hostile name drives a long, fast line so that it is simulated and charted on the Waveforms sheet
STACKUP_NAME = '=1+1 "board"'


def _board_csv() -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["net", "layer", "length", "width", "rise_time", "driver_ohm", "net_class"])
    for k, name in enumerate(HOSTILE):
        w.writerow([name, "L3", f"{120 + 5 * k}mm", "0.15mm", "250ps", "12", "=EVIL" if k == 0 else ""])
    w.writerow(["QUIET", "L1", "10mm", "0.3mm", "5ns", "", ""])
    return buf.getvalue()


RULES = """\
[[net_class]]
name = "=EVIL"
match = ["nothing-matches-this"]
z0 = 50
"""


@pytest.fixture
def hostile_review(run, board, tmp_path):
    from conftest import FOUR_LAYER
    tr, st, rl = board(_board_csv(), stackup=FOUR_LAYER.replace('name = "test 4-layer"', f"name = '{STACKUP_NAME}'"),
                       rules=RULES)
    out, js = tmp_path / "hostile.xlsx", tmp_path / "hostile.json"
    code, stdout, err = run("review", tr, "--stackup", st, "--rules", rl, "--solver", "formula", "--out", out,
                            "--json", js)
    assert code in (0, 1), err
    return out


def test_clean_text_is_the_one_text_path():
    assert clean_text("=1+1") == ("=1+1", True)
    assert clean_text("@x")[1] and clean_text("+x")[1] and clean_text("-x")[1]
    assert clean_text("plain") == ("plain", False)
    s, _ = clean_text("a\x00b\x1fc\x7fd\ne\tf")
    assert s == "a\ufffdb\ufffdc\ufffdd\ne\tf"          # newline and tab are text; other controls are not
    s, _ = clean_text("y" * (MAX_TEXT + 500))
    assert len(s) == MAX_TEXT and s.endswith("[truncated]")


def test_every_cell_of_every_sheet_is_text_or_number(hostile_review):
    """Hostile names reach every sheet (Summary, Findings, Nets, Segments, Rules, Waveforms) as text only."""
    path = hostile_review
    wb = load_workbook(path)
    assert {"Summary", "Findings", "Nets", "Segments", "Stackup", "Rules", "Waveforms"} <= set(wb.sheetnames)
    seen = set()
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.value is None:
                    continue
                assert c.data_type in ("s", "n", "b"), (ws.title, c.coordinate, c.value)   # never 'f'
                if isinstance(c.value, str):
                    assert not re.search("[\x00-\x08\x0b-\x1f\x7f]", c.value), (ws.title, c.coordinate)
                    if c.value.startswith(("=", "+", "-", "@")):
                        assert c.quotePrefix, (ws.title, c.coordinate, c.value)
                    seen.add((ws.title, c.value))
    for sheet in ("Nets", "Segments", "Findings"):
        assert (sheet, HYPERLINK) in seen and (sheet, "Ω_Netz_äö_漢字") in seen and (sheet, LONG) in seen
    assert ("Summary", STACKUP_NAME) in seen
    assert ("Rules", "class =EVIL") in seen
    assert any(t == "Waveforms" and v.startswith(HYPERLINK) for t, v in seen)
    assert ("Segments", "CTRL\ufffdBELL\ufffdESC") in seen

    # the raw parts: no formula element in any sheet; chart formulas only reference our own cells
    with zipfile.ZipFile(path) as z:
        for name in z.namelist():
            xml = z.read(name).decode("utf-8")
            if name.startswith("xl/worksheets/sheet"):
                assert "<f>" not in xml and "<f " not in xml, name
            if name.startswith("xl/charts/chart"):
                refs = re.findall(r"<c:f>(.*?)</c:f>", xml)
                assert refs, name
                for f in refs:
                    assert re.fullmatch(r"Waveforms!\$[A-Z]+\$\d+(:\$[A-Z]+\$\d+)?", f), f

    # charts carry no user text: no title (the text cell above names the chart); series names are our own words
    ws = wb["Waveforms"]
    assert len(ws._charts) >= len(HOSTILE) - 1
    for ch in ws._charts:
        assert ch.title is None or ch.title.tx is None
        for ser in ch.series:
            assert ser.tx.v in ("unterminated", "terminated")
    headings = [c.value for c in ws["A"] if isinstance(c.value, str)]
    assert any(h.startswith(HYPERLINK + ":") for h in headings)

    # a second, independent reader sees the same text
    from python_calamine import CalamineWorkbook
    rows = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("Segments").to_python()
    names = {r[1] for r in rows[1:]}
    assert HYPERLINK in names and LONG in names and "Ω_Netz_äö_漢字" in names


def test_every_sheet_prints_landscape_fitted_with_repeated_headers(hostile_review):
    wb = load_workbook(hostile_review)
    for ws in wb.worksheets:
        assert ws.page_setup.orientation == "landscape", ws.title
        assert ws.sheet_properties.pageSetUpPr.fitToPage, ws.title
        # fitToWidth absent means 1 (the file format's default); fitToHeight 0: as many pages tall as needed
        assert int(ws.page_setup.fitToWidth or 1) >= 1 and int(ws.page_setup.fitToHeight) == 0, ws.title
    for name in ("Findings", "Nets", "Segments", "Stackup", "Rules"):
        ws = wb[name]
        assert ws.print_title_rows == "$1:$1", name
        assert ws.freeze_panes == "A2" and ws.auto_filter.ref, name
        # widths: wider sheets go over more pages wide (key column repeated) instead of shrinking
        total = sum(ws.column_dimensions[k].width for k in ws.column_dimensions)
        pages = int(ws.page_setup.fitToWidth or 1)
        assert total / pages <= 250, (name, total, pages)
        if pages > 1:
            assert ws.print_title_cols, name
    # Findings: the message wraps in a column of sane width, the disposition has its drop-down
    f = wb["Findings"]
    hdr = [c.value for c in f[1]]
    col = hdr.index("Finding") + 1
    letter = f.cell(1, col).column_letter
    assert 40 <= f.column_dimensions[letter].width <= 80
    assert f.cell(2, col).alignment.wrap_text
    assert any("accept" in dv.formula1 for dv in f.data_validations.dataValidation)
    # Summary: each label has its value beside it on the same row
    s = wb["Summary"]
    kv = {r[0].value: r[1].value for r in s.iter_rows(min_row=2) if r[0].value}
    assert kv["Board stackup"] == STACKUP_NAME and isinstance(kv["Segments"], (int, float))
    assert s.column_dimensions["A"].width + s.column_dimensions["B"].width <= 130


def test_workbook_name_must_end_in_xlsx(run, board, tmp_path):
    tr, st = board("net,layer,length,width,rise_time\nA,L1,10mm,0.3mm,5ns\n")
    code, out, err = run("review", tr, "--stackup", st, "--out", tmp_path / "review.csv")
    assert code == 2 and ".xlsx" in err and "Traceback" not in err
    assert not (tmp_path / "review.csv").exists()
    code, out, err = run("review", tr, "--stackup", st, "--out", tmp_path / "review.XLSX")
    assert code == 0, err


@pytest.mark.parametrize("option", ["--out", "--json"])
def test_unwritable_output_fails_before_the_work(run, board, tmp_path, monkeypatch, option):
    import sicheck.review
    tr, st = board("net,layer,length,width,rise_time\nA,L1,10mm,0.3mm,5ns\n")

    def must_not_run(*a, **k):
        raise AssertionError("the review ran although its output cannot be written")
    monkeypatch.setattr(sicheck.review, "build_review", must_not_run)
    # a path under a regular file cannot be written, even by root
    blocker = tmp_path / "plain-file"
    blocker.write_text("x")
    name = "r.xlsx" if option == "--out" else "r.json"
    code, out, err = run("review", tr, "--stackup", st, option, blocker / name)
    assert code == 2 and option in err and "Traceback" not in err and "internal error" not in err
    code, out, err = run("review", tr, "--stackup", st, option, tmp_path / "missing" / name)
    assert code == 2 and "does not exist" in err


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0,
                    reason="root writes into read-only folders; the path-under-a-file test covers this case")
def test_read_only_folder(run, board, tmp_path):
    tr, st = board("net,layer,length,width,rise_time\nA,L1,10mm,0.3mm,5ns\n")
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        code, out, err = run("review", tr, "--stackup", st, "--out", ro / "r.xlsx")
        assert code == 2 and "cannot write" in err and "Traceback" not in err
    finally:
        ro.chmod(0o755)


def test_terminal_summary_reads_at_80_columns(run, board, monkeypatch):
    monkeypatch.setenv("COLUMNS", "80")
    rows = ["net,layer,length,width,rise_time,driver_ohm,pair,gap"]
    for k in range(6):
        rows.append(f"VERY_LONG_DIFFERENTIAL_LANE_NAME_{k}_P,L3,{150 + 10 * k}mm,0.1mm,200ps,,"
                    f"VERY_LONG_DIFFERENTIAL_LANE_NAME_{k}_N,0.15mm")
        rows.append(f"CLOCK_OUTPUT_{k},L3,{120 + 10 * k}mm,0.15mm,300ps,15,,")
    tr, st = board("\n".join(rows) + "\n")
    code, out, err = run("review", tr, "--stackup", st, "--solver", "formula")
    assert code in (0, 1), err
    lines = out.splitlines()
    assert lines[0].strip(), "no blank line at the top"
    assert all(len(l.rstrip()) <= 80 for l in lines)
    start = next(i for i, l in enumerate(lines) if l.startswith("Nets that need termination"))
    body = lines[start + 3:]
    end = next(i for i, l in enumerate(body) if not l.strip() or l.startswith("req:"))
    body = body[:end]
    starts = [i for i, l in enumerate(body) if l[:1].strip()]     # a row starts with its net name
    assert len(starts) == 10
    gaps = [b - a for a, b in zip(starts, starts[1:] + [len(body)])]
    assert max(gaps) <= 2, body
