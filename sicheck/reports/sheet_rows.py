"""Table rows written straight into a finished workbook's sheet XML.

Why: XlsxWriter spends about 10 us of Python per cell; a 100 000-segment review has millions of
cells, so the Segments and Nets sheets dominated the whole review. A table's rows are plain
(a number, a text or a boolean in a column with a known style), so they are generated here as XML
text at about 1-2 us per cell and spliced into the sheet that XlsxWriter wrote (header, column
widths, print set-up, filters, validations), in place of its empty body.

The cell markup is the Office Open XML SpreadsheetML one (ECMA-376 Part 1, 18.3.1: row, c, v, is/t):
numbers as ``<v>``, text as inline strings (``t="inlineStr"``, as XlsxWriter's constant-memory
mode writes them), booleans as ``t="b"``; ``s`` is the cell's style index.
"""

from __future__ import annotations

import math
import os
import re
import shutil
import zipfile
from typing import Callable, Iterable, Iterator

_XML_SPECIAL = re.compile("[&<>]")
_ESCAPES = {"&": "&amp;", "<": "&lt;", ">": "&gt;"}
CHUNK_ROWS = 4000          # rows per string handed to the compressor (bounded memory)


def column_letters(n: int) -> list[str]:
    """Spreadsheet column names A, B, ..., Z, AA, ... for the first n columns."""
    out = []
    for j in range(n):
        s, k = "", j + 1
        while k:
            k, r = divmod(k - 1, 26)
            s = chr(65 + r) + s
        out.append(s)
    return out


def _escape(s: str) -> str:
    return _XML_SPECIAL.sub(lambda m: _ESCAPES[m.group()], s) if _XML_SPECIAL.search(s) else s


def rows_xml(rows: Iterable[tuple[int, list, float | None, dict | None]], n_cols: int, col_style: list[int],
             text_cell: Callable[[int, str, dict | None], tuple[str, int]]) -> Iterator[str]:
    """SpreadsheetML for buffered rows, in chunks of text.

    rows: (zero-based row index, values, height in points or None, per-row style overrides or None).
    col_style: each column's style index, used for a plain cell.
    text_cell(j, text, overrides) -> (clean text, style index): the text-only path decides quoting,
    cleaning and fills; it is called for every non-empty text, so user text never bypasses it.
    """
    letters = column_letters(n_cols)
    styles = [f' s="{s}"' if s else "" for s in col_style]
    out: list[str] = []
    for k, (r, values, height, over) in enumerate(rows, start=1):
        rs = str(r + 1)
        parts = [f'<row r="{rs}" ht="{height:g}" customHeight="1">' if height else f'<row r="{rs}">']
        for j, v in enumerate(values):
            if v is None:
                continue
            cls = v.__class__
            if cls is str:
                if not v:
                    continue
                text, style = text_cell(j, v, over)
                space = ' xml:space="preserve"' if (text[0].isspace() or text[-1].isspace()) else ""
                parts.append(f'<c r="{letters[j]}{rs}" s="{style}" t="inlineStr"><is><t{space}>{_escape(text)}'
                             f'</t></is></c>' if style else
                             f'<c r="{letters[j]}{rs}" t="inlineStr"><is><t{space}>{_escape(text)}</t></is></c>')
                continue
            style = styles[j] if over is None or j not in over else f' s="{over[j]}"'
            if cls is bool or cls.__name__ == "bool_":
                parts.append(f'<c r="{letters[j]}{rs}"{style} t="b"><v>{int(v)}</v></c>')
                continue
            f = float(v)
            if math.isfinite(f):
                parts.append(f'<c r="{letters[j]}{rs}"{style}><v>{f!r}</v></c>')
        parts.append("</row>")
        out.append("".join(parts))
        if k % CHUNK_ROWS == 0:
            yield "".join(out)
            out = []
    if out:
        yield "".join(out)


_DIMENSION = re.compile(rb'<dimension ref="[^"]*"/>')


def splice_rows(path: str | os.PathLike, bodies: dict[str, tuple[str, Iterator[str]]]) -> None:
    """Insert generated rows at the end of each named sheet's ``sheetData`` in the .xlsx at ``path``.

    bodies: member name (``xl/worksheets/sheet3.xml``) -> (the sheet's used range, e.g. "A1:Y1001",
    chunks of row XML). The file is rewritten beside itself and renamed over it (the caller already
    writes to a temporary file, so the user's target is only replaced once everything succeeded).
    """
    tmp = f"{os.fspath(path)}.rows"
    try:
        with zipfile.ZipFile(path) as src, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED, compresslevel=1) as dst:
            for info in src.infolist():
                data = src.read(info.filename)
                if info.filename not in bodies:
                    dst.writestr(info, data, compress_type=zipfile.ZIP_DEFLATED, compresslevel=6)
                    continue
                used, chunks = bodies[info.filename]
                head, sep, tail = data.rpartition(b"</sheetData>")
                if not sep:                          # an empty sheet writes <sheetData/>
                    head, sep, tail = data.rpartition(b"<sheetData/>")
                    head += b"<sheetData>"
                head = _DIMENSION.sub(f'<dimension ref="{used}"/>'.encode(), head, count=1)
                # level 1 (the archive's default here): these bodies are large and repetitive; about 3x
                # faster to compress than level 6 for a file about 12 % larger
                with dst.open(info.filename, "w", force_zip64=True) as fh:
                    fh.write(head)
                    for chunk in chunks:
                        fh.write(chunk.encode("utf-8"))
                    fh.write(b"</sheetData>" + tail)
        shutil.move(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
