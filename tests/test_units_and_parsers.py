"""Units and trace-list parsing: every bad input is an InputError naming where."""

from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sicheck.errors import InputError
from sicheck.traces import normalise_header, read_traces
from sicheck.units import UnitError, parse_quantity


@pytest.mark.parametrize("text,si", [("5mil", 127e-6), ("0.127mm", 127e-6), ("2in", 50.8e-3), ("35 um", 35e-6),
                                     ("35µm", 35e-6), ("1.4mil", 35.56e-6)])
def test_lengths(text, si):
    assert parse_quantity(text, "length") == pytest.approx(si)


@pytest.mark.parametrize("text,si", [("350ps", 350e-12), ("0.5ns", 0.5e-9), ("1e-9s", 1e-9)])
def test_times(text, si):
    assert parse_quantity(text, "time") == pytest.approx(si)


def test_bare_number_needs_a_unit():
    with pytest.raises(UnitError, match="no unit"):
        parse_quantity("12", "length")
    assert parse_quantity("12", "length", "mil") == pytest.approx(12 * 25.4e-6)


def test_unknown_unit():
    with pytest.raises(UnitError, match="unknown length unit"):
        parse_quantity("3furlong", "length")


def test_header_normalisation():
    assert normalise_header("Width [mil]") == ("width", "mil")
    assert normalise_header("  Rise_Time (ps) ") == ("risetime", "ps")
    assert normalise_header("Net Class") == ("netclass", None)


def _write(tmp_path: Path, text: str, name="t.csv", encoding="utf-8") -> Path:
    p = tmp_path / name
    p.write_bytes(text.encode(encoding))
    return p


def test_semicolon_decimal_comma_and_bom(tmp_path):
    p = _write(tmp_path, "\ufeffNET;Layer;Length (mm);Width;rise time\nA;L1;12,5;0,1mm;350ps\n")
    f = read_traces(p).frame
    assert f["length"].iloc[0] == pytest.approx(12.5e-3)
    assert f["width"].iloc[0] == pytest.approx(0.1e-3)
    assert f["rise_time"].iloc[0] == pytest.approx(350e-12)


def test_tab_separated_and_units_option(tmp_path):
    p = _write(tmp_path, "net\tlayer\tlength\twidth\trise_time\nA\tL1\t12\t5\t0.4\n")
    f = read_traces(p, units={"length": "mil", "time": "ns"}).frame
    assert f["length"].iloc[0] == pytest.approx(12 * 25.4e-6)
    assert f["rise_time"].iloc[0] == pytest.approx(0.4e-9)


def test_column_map(tmp_path):
    p = _write(tmp_path, "Signal,Layer,Routed Length [mm]\nA,L1,3\n")
    f = read_traces(p, aliases={"Signal": "net", "Routed Length": "length"}).frame
    assert f["net"].iloc[0] == "A" and f["length"].iloc[0] == pytest.approx(3e-3)


@pytest.mark.parametrize("body,row,column,words", [
    ("A,L1,abc,5mil\n", 2, "length", "not a number"),
    ("A,L1,3mm,5mil\nB,L1,nan,5mil\n", 3, "length", "not a"),
    ("A,L1,-3mm,5mil\n", 2, "length", "positive"),
    ("A,L1,3mm,900mm\n", 2, "width", "implausibly large"),
    ("A,L1,3mm,5parsec\n", 2, "width", "unknown length unit"),
    ("A,L1,3mm,5\n", 2, "width", "no unit"),
    (",L1,3mm,5mil\n", 2, "net", "empty"),
    ("A,L1,3,5mil\n", 2, "length", "no unit"),
    ("A,L1,3mm,5mil,extra\n", 2, None, "cells"),
])
def test_bad_cells_name_row_and_column(tmp_path, body, row, column, words):
    p = _write(tmp_path, "net,layer,length,width\n" + body)
    with pytest.raises(InputError) as ei:
        read_traces(p)
    e = ei.value
    assert e.file == str(p) and e.row == row
    if column:
        assert e.column == column
    assert words in str(e)


def test_negative_rise_time(tmp_path):
    p = _write(tmp_path, "net,layer,length [mm],width [mm],rise_time\nA,L1,3,0.1,-300ps\n")
    with pytest.raises(InputError, match="positive") as ei:
        read_traces(p)
    assert ei.value.row == 2 and ei.value.column == "rise_time"


def test_missing_required_column(tmp_path):
    p = _write(tmp_path, "net,width\nA,5mil\n")
    with pytest.raises(InputError, match="missing required column 'layer'"):
        read_traces(p)


def test_not_utf8(tmp_path):
    p = _write(tmp_path, "net,layer,length\nÄ,L1,3mm\n", encoding="latin-1")
    with pytest.raises(InputError, match="UTF-8"):
        read_traces(p)


def test_xlsx_sheet_selection(tmp_path):
    from openpyxl import Workbook
    wb = Workbook()
    wb.active.title = "notes"
    wb.active.append(["just notes"])
    ws = wb.create_sheet("route")
    ws.append(["Net", "Layer", "Length [mm]", "Width [mil]"])
    ws.append(["A", "L1", 12.0, 5])
    p = tmp_path / "t.xlsx"
    wb.save(p)
    f = read_traces(p, sheet="route").frame
    assert f["width"].iloc[0] == pytest.approx(127e-6)
    with pytest.raises(InputError, match="no sheet named"):
        read_traces(p, sheet="missing")


@settings(max_examples=150, suppress_health_check=[HealthCheck.function_scoped_fixture], deadline=None)
@given(text=st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=300))
def test_parser_never_raises_anything_but_input_error(tmp_path, text):
    p = tmp_path / "fuzz.csv"
    p.write_text(text, encoding="utf-8")
    try:
        read_traces(p)
    except InputError:
        pass


@settings(max_examples=100, suppress_health_check=[HealthCheck.function_scoped_fixture], deadline=None)
@given(cells=st.lists(st.text(alphabet="0123456789.,-+eEmilnpsu µ;\"", max_size=8), min_size=4, max_size=4))
def test_parser_on_numeric_junk(tmp_path, cells):
    p = tmp_path / "fuzz2.csv"
    p.write_text("net,layer,length,width\n" + ",".join(c.replace(",", "") for c in cells) + "\n", encoding="utf-8")
    try:
        read_traces(p)
    except InputError:
        pass
