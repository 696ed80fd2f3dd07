"""Table rows generated as sheet XML (sheet_rows) read back by two independent readers (openpyxl and
calamine) exactly as written: values, number formats, fills, row heights, text-only cells."""

from __future__ import annotations

import math

import numpy as np

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


def _rows_xml_cell_by_cell(rows, n_cols, col_style, text_cell):
    """The row XML written one cell at a time, as sheet_rows did before it worked a column at a time:
    the reference the column-wise generator must match byte for byte."""
    from sicheck.reports.sheet_rows import _escape
    letters = column_letters(n_cols)
    styles = [f' s="{s}"' if s else "" for s in col_style]
    parts = []
    for r, values, height, over in rows:
        rs = str(r + 1)
        parts.append(f'<row r="{rs}" ht="{height:g}" customHeight="1">' if height else f'<row r="{rs}">')
        for j, v in enumerate(values):
            if v is None or (isinstance(v, str) and not v):
                continue
            if isinstance(v, str):
                text, style = text_cell(j, v, over)
                space = ' xml:space="preserve"' if (text[0].isspace() or text[-1].isspace()) else ""
                s = f' s="{style}"' if style else ""
                parts.append(f'<c r="{letters[j]}{rs}"{s} t="inlineStr"><is><t{space}>{_escape(text)}</t></is></c>')
                continue
            style = styles[j] if over is None or j not in over else f' s="{over[j]}"'
            if isinstance(v, (bool, np.bool_)):
                parts.append(f'<c r="{letters[j]}{rs}"{style} t="b"><v>{int(v)}</v></c>')
            elif math.isfinite(float(v)):
                parts.append(f'<c r="{letters[j]}{rs}"{style}><v>{float(v)!r}</v></c>')
        parts.append("</row>")
    return "".join(parts)


_cell_value = st.one_of(st.none(), st.text(max_size=8), st.sampled_from(["=x", " a", "b ", "a&<b>", "", "n\x00&"]),
                        st.floats(), st.sampled_from([0.0, -0.0, 1.5, 1e-300]), st.integers(-10**6, 10**6),
                        st.booleans(), st.floats(allow_nan=False).map(np.float64))


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 5).flatmap(lambda n: st.tuples(
    st.just(n),
    st.lists(st.tuples(st.lists(_cell_value, min_size=0, max_size=n),
                       st.sampled_from([None, 30.0, 22.5]),
                       st.one_of(st.none(), st.dictionaries(st.integers(0, n - 1), st.integers(0, 9), max_size=2))),
             min_size=1, max_size=70),
    st.lists(st.integers(0, 4), min_size=n, max_size=n),
    st.sampled_from([1, 3, 64]))))
def test_column_wise_rows_match_cell_by_cell(case):
    import pytest

    from sicheck.reports import sheet_rows
    n, rows, col_style, chunk = case

    def text_cell(j, v, over):          # a text policy like the workbook's: quote "=", overrides win
        if over is not None and j in over:
            return v.upper(), over[j]
        return v.upper(), 8 if v.startswith("=") else col_style[j]

    def text_cells(j, texts, overs):
        got = [text_cell(j, v, o) for v, o in zip(texts, overs or [None] * len(texts))]
        return [t for t, _ in got], [s for _, s in got]

    rows = [(k, values, h, over) for k, (values, h, over) in enumerate(rows)]
    want = _rows_xml_cell_by_cell(rows, n, col_style, text_cell)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(sheet_rows, "CHUNK_ROWS", chunk)
        assert "".join(sheet_rows.rows_xml(rows, n, col_style, text_cells)) == want


@settings(max_examples=40, deadline=None)
@given(st.lists(st.one_of(st.floats(), st.sampled_from([0.0, -0.0, 2.5, 1e300])), min_size=0, max_size=300),
       st.sampled_from([[], [0.0, -0.0] * 40, [7.25, float("nan")] * 40]))
def test_each_distinct_number_formatted_once_reads_the_same(values, repeated):
    from sicheck.reports.sheet_rows import _reprs
    a = np.array(values + repeated, dtype=float)
    assert _reprs(a) == [repr(v) for v in a.tolist()]


def _three_tables(path, n):
    book = Book(path)
    for k, size in enumerate((n, n // 2, n // 3)):
        sh = _Sheet(book, f"T{k}", COLS)
        sh.header()
        for i in range(size):
            sh.row([f"net{k}_{i}", i / 7, "=x" if i % 5 == 0 else None, bool(i % 2)])
        sh.finish()
    book.close()


def test_bodies_written_in_a_second_process_give_the_same_workbook(tmp_path, monkeypatch):
    import zipfile

    from python_calamine import CalamineWorkbook

    from sicheck.reports import sheet_rows
    _three_tables(tmp_path / "here.xlsx", 300)
    monkeypatch.setattr(sheet_rows, "FORK_MIN_CELLS", 0)          # hand the largest body to a forked process
    real, calls = sheet_rows.forked, []
    monkeypatch.setattr(sheet_rows, "forked", lambda work: calls.append(work) or real(work))
    assert sheet_rows._shared({"a": ("", iter(()), 1200), "b": ("", iter(()), 600), "c": ("", iter(()), 400)}) == {"a"}
    _three_tables(tmp_path / "split.xlsx", 300)
    with zipfile.ZipFile(tmp_path / "here.xlsx") as a, zipfile.ZipFile(tmp_path / "split.xlsx") as b:
        assert a.namelist() == b.namelist()
        # every part the same bytes, but the document properties' time stamps (to the second)
        assert all(a.read(n) == b.read(n) for n in a.namelist() if n != "docProps/core.xml")
    assert len(calls) == 1
    for name in ("T0", "T1", "T2"):
        assert (CalamineWorkbook.from_path(str(tmp_path / "split.xlsx")).get_sheet_by_name(name).to_python()
                == CalamineWorkbook.from_path(str(tmp_path / "here.xlsx")).get_sheet_by_name(name).to_python())
    assert load_workbook(tmp_path / "split.xlsx")["T0"]["A301"].value == "net0_299"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["here.xlsx", "split.xlsx"]     # no parts left behind


def test_shared_bodies_balance_the_cells():
    from sicheck.reports.sheet_rows import FORK_MIN_CELLS, _shared
    big = FORK_MIN_CELLS
    assert _shared({"a": ("", None, big // 4)}) == set()                  # too small to be worth a process
    assert _shared({"a": ("", None, 8 * big), "b": ("", None, big)}) == {"a"}     # one body dominates: it goes
    assert _shared({"a": ("", None, 3 * big), "b": ("", None, 2 * big), "c": ("", None, 2 * big)}) in ({"a"},)
    assert _shared({"a": ("", None, 2 * big), "b": ("", None, 2 * big), "c": ("", None, big),
                    "d": ("", None, big)}) == {"a", "c"}


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.one_of(st.none(), st.text(max_size=40), st.sampled_from(["=x", "word " * 30])),
                          st.one_of(st.none(), st.floats(allow_nan=False)),
                          st.one_of(st.none(), st.text(max_size=90), st.just("a\nb\nc " * 20)),
                          st.one_of(st.none(), st.booleans()),
                          st.sampled_from([None, "#FCE8B2", "#DDEBF7"])), max_size=30))
def test_rows_at_once_are_the_rows_one_by_one(tmp_path_factory, rows):
    book = Book(tmp_path_factory.mktemp("rows") / "t.xlsx")          # one book: the same format objects
    a, b = _Sheet(book, "One by one", COLS), _Sheet(book, "At once", COLS)
    for r in rows:
        a.row(list(r[:4]), fill=r[4], fill_cols=(0, 1))
    columns = [list(c) for c in zip(*(r[:4] for r in rows))] or [[], [], [], []]
    b.rows_of(columns, [r[4] for r in rows], fill_cols=(0, 1))
    assert a.rows == b.rows
    assert [(i, list(v), h, o) for i, v, h, o in a._buf] == [(i, list(v), h, o) for i, v, h, o in b._buf]
