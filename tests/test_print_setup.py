"""Print set-up of the review workbook, read back with openpyxl (the PDF itself: tests/bench/print_check.py).

What a printed review needs: every sheet landscape and fitted to the page width; tables repeat their header
row; the Findings sheet prints one page across with the sign-off columns beside the message and the
machine key left off the paper; the Segments sheet carries the fabrication band.
"""

from __future__ import annotations

from openpyxl import load_workbook
from openpyxl.utils import get_column_letter

TRACES = """\
Net;Layer;Length;Width;Rise Time;Pair;Gap
CLK_A;L1;4000mil;12mil;300ps;;
CLK_B;L1;4000mil;12mil;300ps;;
CLK_C;L1;4000mil;12mil;300ps;;
CLK_D;L1;4000mil;12mil;300ps;;
CLK_E;L1;4000mil;12mil;300ps;;
=SUM(A1);L3;3000mil;6mil;300ps;;
RX_P;L3;6000mil;4mil;200ps;RX_N;8mil
"""
RULES = """\
[[net_class]]
name = "CLK"
match = ["CLK*"]
z0 = 50
[[net_class]]
name = "DIFF"
match = ["RX_*"]
zdiff = 100
"""


def _review(run, board, tmp_path):
    tr, st, rl = board(TRACES, rules=RULES)
    out = tmp_path / "r.xlsx"
    code, _, err = run("review", tr, "--stackup", st, "--rules", rl, "--solver", "formula", "--out", out)
    assert code in (0, 1), err
    return load_workbook(out)


def test_findings_print_one_page_across_with_sign_off_beside_the_message(run, board, tmp_path):
    wb = _review(run, board, tmp_path)
    ws = wb["Findings"]
    header = [c.value for c in ws[1]]
    assert header[-1] == "Key" and {"Finding", "Disposition", "Reviewer", "Comment"} <= set(header)
    assert ws.page_setup.orientation == "landscape" and int(ws.page_setup.fitToWidth or 1) == 1
    # the print area is every column but the key, from the header row to the last finding
    last = get_column_letter(len(header) - 1)
    assert ws.print_area == f"'Findings'!$A$1:${last}${ws.max_row}"
    assert ws.print_title_rows == "$1:$1"
    for name in ("Net", "Layer", "Finding"):       # a row reads without scrolling sideways
        col = header.index(name) + 1
        assert ws.cell(2, col).alignment.wrap_text, name
    # Comment is empty until a reviewer types: its column format wraps what they type
    assert ws.column_dimensions[get_column_letter(header.index("Comment") + 1)].alignment.wrap_text
    width = sum(ws.column_dimensions[get_column_letter(j)].width for j in range(1, len(header)))
    assert width <= 245           # PRINT_CHARS: at most this many characters across one landscape page
    # the grouped tolerance-band finding names several nets in a wrapped Net column, not a wide one
    nets = [r[header.index("Net")] for r in ws.iter_rows(min_row=2, values_only=True)]
    assert any(n and n.count(",") >= 2 for n in nets)
    assert ws.column_dimensions[get_column_letter(header.index("Net") + 1)].width <= 24


def test_every_table_repeats_its_header_and_segments_carry_the_band(run, board, tmp_path):
    wb = _review(run, board, tmp_path)
    for ws in wb.worksheets:
        assert ws.page_setup.orientation == "landscape", ws.title
        assert ws.sheet_properties.pageSetUpPr.fitToPage and int(ws.page_setup.fitToHeight) == 0, ws.title
        if ws.title != "Summary" and ws.title != "Waveforms":
            assert ws.print_title_rows == "$1:$1", ws.title
    seg = wb["Segments"]
    header = [c.value for c in seg[1]]
    rows = [dict(zip(header, r)) for r in seg.iter_rows(min_row=2, values_only=True)]
    for r in rows:
        z = r["Zdiff [ohm]"] if r["Pair"] else r["Z0 [ohm]"]
        assert r["Band min [ohm]"] < z < r["Band max [ohm]"], r["Net"]
        assert 0 < r["Band RSS +/- [ohm]"] < r["Band max [ohm]"] - r["Band min [ohm]"]
    kv = {r[0].value: r[1].value for r in wb["Summary"].iter_rows(min_row=2) if r[0].value}
    assert kv["Fabrication tolerances"].startswith("width +/-0.0127 mm, dielectric +/-10 %")
