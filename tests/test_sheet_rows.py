"""Table rows generated as sheet XML (sheet_rows) read back by two independent readers (openpyxl and
calamine) exactly as written: values, number formats, fills, row heights, text-only cells."""

from __future__ import annotations

import math

from hypothesis import given, settings
from hypothesis import strategies as st
from openpyxl import load_workbook

from sicheck.reports.sheet_rows import column_letters
from sicheck.reports.workbook import Book, _Sheet

COLS = [("Name", None, 12), ("Value [mm]", "0.000", 9), ("Note", None, -20), ("Flag", None, 5)]


def _write(path, rows, fills=None):
    book = Book(path)
    sh = _Sheet(book, "Table", COLS)
    sh.header()
    for k, r in enumerate(rows):
        sh.row(list(r), fill=(fills or {}).get(k), fill_cols=(0, 1))
    sh.finish()
    book.close()


def test_column_letters():
    assert column_letters(28)[:3] == ["A", "B", "C"]
    assert column_letters(28)[25:] == ["Z", "AA", "AB"]
    assert column_letters(703)[-1] == "AAA"


def test_values_formats_fills_and_heights(tmp_path):
    path = tmp_path / "t.xlsx"
    long_note = "word " * 40
    rows = [("  lead & trail  ", 1.25, "a<b>c", True),
            ("=SUM(A1)", -0.5, long_note, False),
            ("plain", float("nan"), None, None),
            ("x\x07y", 1e-300, "", 3)]
    _write(path, rows, fills={1: "#FCE8B2"})
    ws = load_workbook(path)["Table"]
    assert ws["A1"].value == "Name"
    assert ws["A2"].value == "  lead & trail  " and ws["C2"].value == "a<b>c" and ws["D2"].value is True
    assert ws["B2"].value == 1.25 and ws["B2"].number_format == "0.000"
    assert ws["A3"].value == "=SUM(A1)" and ws["A3"].data_type == "s" and ws["A3"].quotePrefix
    assert ws["A3"].fill.fgColor.rgb.endswith("FCE8B2") and ws["B3"].fill.fgColor.rgb.endswith("FCE8B2")
    assert ws["B3"].number_format == "0.000"            # the fill keeps the column's number format
    assert ws["A2"].fill.fgColor.rgb in (None, "00000000")
    assert ws.row_dimensions[3].height > 15            # the long note wraps: the row is taller
    assert ws["B4"].value is None                        # NaN is an empty cell
    assert ws["A5"].value == "x\ufffdy" and ws["B5"].value == 1e-300 and ws["D5"].value == 3
    assert ws.max_row == 5


@settings(max_examples=25, deadline=None)
@given(st.lists(st.tuples(st.text(st.characters(codec=None, exclude_categories=()), max_size=30), st.floats(allow_nan=False, allow_infinity=False)),
                min_size=1, max_size=20))
def test_round_trip_any_text_and_number(tmp_path_factory, data):
    from python_calamine import CalamineWorkbook
    path = tmp_path_factory.mktemp("rt") / "t.xlsx"
    _write(path, [(s, x, None, None) for s, x in data])
    ws = load_workbook(path)["Table"]
    cal = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("Table").to_python()
    for k, (s, x) in enumerate(data, start=2):
        want = None
        if s:
            want = "".join("\ufffd" if (ord(ch) < 32 and ch not in "\t\n") or ord(ch) == 127
                           or 0xD800 <= ord(ch) <= 0xDFFF or ch in "\ufffe\uffff" else ch for ch in s)
        got = ws.cell(k, 1).value
        assert got == want, (s, got)
        assert ws.cell(k, 2).value == x or math.isclose(ws.cell(k, 2).value, x, rel_tol=0, abs_tol=0)
        assert float(cal[k - 1][1]) == x
