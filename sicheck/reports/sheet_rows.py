"""Table rows written straight into a finished workbook's sheet XML.

Why: XlsxWriter spends about 10 us of Python per cell; a 100 000-segment review has millions of
cells, so the Segments and Nets sheets dominated the whole review. A table's rows are plain
(a number, a text or a boolean in a column with a known style), so they are generated here as XML
text, a column at a time (rows_xml), and spliced into the sheet that XlsxWriter wrote (header,
column widths, print set-up, filters, validations), in place of its empty body.

The cell markup is the Office Open XML SpreadsheetML one (ECMA-376 Part 1, 18.3.1: row, c, v, is/t):
numbers as ``<v>``, text as inline strings (``t="inlineStr"``, as XlsxWriter's constant-memory
mode writes them), booleans as ``t="b"``; ``s`` is the cell's style index.
"""

from __future__ import annotations

import math
import os
import re
import zipfile
from contextlib import nullcontext
from itertools import chain, repeat
from operator import itemgetter
from typing import Callable, Iterator

import numpy as np

from sicheck.reports.forked import forked
from sicheck.reports.zip_archive import Packed, ZipWriter, deflate

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


def rows_xml(rows: list[tuple[int, list, float | None, dict | None]], n_cols: int, col_style: list[int],
             text_cells: Callable[[int, list[str], tuple], tuple[list[str], list[int]]]) -> Iterator[str]:
    """SpreadsheetML for buffered rows, in chunks of text.

    rows: (zero-based row index, values, height in points or None, per-row style overrides or None).
    col_style: each column's style index, used for a plain cell.
    text_cells(j, texts, overrides) -> (clean texts, style indices): the text-only path decides quoting,
    cleaning and fills for column j of a chunk (its texts, "" where empty; the rows' overrides, or None
    when no row of the chunk overrides this column); every
    text goes through it, so user text never bypasses it.

    The XML is built a column at a time: each column gives the pieces of its cells as whole columns
    (a constant, or a list with one text per row), and each row is joined once from all of them
    (str.join, repr and zip over whole columns run in C). A per-cell Python loop cost most of the time
    of a large review's workbook, and a join per cell, then one per row, cost three times one per row.
    """
    letters = column_letters(n_cols)
    for start in range(0, len(rows), CHUNK_ROWS):
        index, values, heights, overs = zip(*rows[start:start + CHUNK_ROWS])
        rs = list(map(str, map((1).__add__, index)))
        opens = [f'<row r="{r}" ht="{h:g}" customHeight="1">' if h else f'<row r="{r}">'
                 for r, h in zip(rs, heights)]
        padded = [v if len(v) == n_cols else list(v) + [None] * (n_cols - len(v)) for v in values]
        over_cols = set(chain.from_iterable(o for o in overs if o))
        pieces = chain.from_iterable(
            _column(letters[j], j, col, rs, col_style[j], overs if j in over_cols else None, text_cells)
            for j, col in enumerate(zip(*padded)))
        yield "".join(map("".join, zip(opens, *pieces, repeat("</row>"))))


_NUMBER_TYPES = {float, int, type(None), np.float64, np.int64}
_TEXT_TYPES = {str, type(None)}
_FIRST, _LAST = itemgetter(slice(None, 1)), itemgetter(slice(-1, None))


def _pieces(parts: list, n: int, empty: list[int]) -> list:
    """A column's cells as pieces, each an iterable of one text per row: parts are constants (str) or lists;
    the rows at ``empty`` get no cell ("" in every piece)."""
    if not empty:
        return [repeat(p) if isinstance(p, str) else p for p in parts]
    out = []
    for p in parts:
        lst = [p] * n if isinstance(p, str) else list(p)      # a copy: rs is shared by the columns
        for i in empty:
            lst[i] = ""
        out.append(lst)
    return out


def _column(letter: str, j: int, col: tuple, rs: list[str], style: int, overs: tuple | None,
            text_cells) -> list:
    """The pieces of one column of a chunk (_pieces)."""
    types = set(map(type, col))
    if types <= _NUMBER_TYPES and overs is None:
        a = np.array(col, dtype=float)          # None -> NaN: no cell, as for any value not finite
        attr = f' s="{style}"' if style else ""
        return _pieces([f'<c r="{letter}', rs, f'"{attr}><v>', _reprs(a), "</v></c>"], len(rs),
                       np.flatnonzero(~np.isfinite(a)).tolist())
    if types <= _TEXT_TYPES:
        texts = ["" if v is None else v for v in col] if type(None) in types else list(col)
        return _text_column(letter, j, texts, rs, overs, text_cells)
    # mixed (a table of settings, say): cell by cell, texts still through text_cells
    out = []
    for i, v in enumerate(col):
        if isinstance(v, str):
            cell = _text_column(letter, j, [v], rs[i:i + 1], (overs[i],) if overs else None, text_cells)
            out.append("".join(next(zip(*cell))))           # its pieces, one row
            continue
        if v is None:
            out.append("")
            continue
        o = overs[i] if overs else None
        attr = f' s="{o[j]}"' if o and j in o else (f' s="{style}"' if style else "")
        if v.__class__ is bool or v.__class__.__name__ == "bool_":
            out.append(f'<c r="{letter}{rs[i]}"{attr} t="b"><v>{int(v)}</v></c>')
            continue
        f = float(v)
        out.append(f'<c r="{letter}{rs[i]}"{attr}><v>{f!r}</v></c>' if math.isfinite(f) else "")
    return [out]


def _reprs(a: np.ndarray) -> list[str]:
    """repr() of each value: the shortest text that reads back as the same double. Formatting a double
    is the costly part, and a column repeats values (one per cross-section, say): each distinct value
    is formatted once. -0.0 equals 0.0 but prints differently, so a column holding it is done one by one."""
    if a.size < 64 or (np.signbit(a) & (a == 0)).any():
        return list(map(repr, a.tolist()))
    distinct, where = np.unique(a, return_inverse=True)
    return list(map(list(map(repr, distinct.tolist())).__getitem__, where.tolist()))


def _text_column(letter: str, j: int, texts: list[str], rs: list[str], overs: tuple | None, text_cells) -> list:
    texts, styles = text_cells(j, texts, overs)
    joined = "\x00".join(texts)
    if _XML_SPECIAL.search(joined):
        if joined.count("\x00") == len(texts) - 1:     # no text holds the separator: escape the column at once
            texts = joined.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").split("\x00")
        else:
            texts = [_escape(t) for t in texts]
    kinds = set(styles)
    attrs = {s: f'" s="{s}" t="inlineStr"><is><t' if s else '" t="inlineStr"><is><t' for s in kinds}
    attr = attrs[styles[0]] if len(kinds) == 1 else list(map(attrs.__getitem__, styles))
    # xml:space="preserve" where a text starts or ends with white space
    first, last = list(map(str.isspace, map(_FIRST, texts))), list(map(str.isspace, map(_LAST, texts)))
    spaces = ([' xml:space="preserve"' if a or b else "" for a, b in zip(first, last)] if any(first) or any(last)
              else "")
    empty = [i for i, t in enumerate(texts) if not t] if "" in texts else []
    return _pieces([f'<c r="{letter}', rs, attr, spaces, ">", texts, "</t></is></c>"], len(texts), empty)


_DIMENSION = re.compile(rb'<dimension ref="[^"]*"/>')
BODY_LEVEL = 1       # sheet bodies (zip_archive.deflate's levels, 0-3): large and repetitive, speed first
PARTS_LEVEL = 3      # the package's other parts (styles, workbook, small sheets): small, the smallest file
FORK_MIN_CELLS = 400_000     # below this, the bodies are quicker to write here than to hand to a process


def _shared(bodies: dict[str, tuple[str, Iterator[str], int]]) -> set[str]:
    """The bodies a second process writes: the largest first, each taken when it brings that process's
    share of the cells nearer to half (this process writes the rest and assembles the archive)."""
    cells = sum(b[2] for b in bodies.values())
    if cells < FORK_MIN_CELLS or not hasattr(os, "fork"):
        return set()
    away, held = set(), 0
    for name, (_, _, n) in sorted(bodies.items(), key=lambda kv: -kv[1][2]):
        if abs(held + n - cells / 2) < abs(held - cells / 2):
            away.add(name)
            held += n
    return away


def splice_rows(path: str | os.PathLike, bodies: dict[str, tuple[str, Iterator[str], int]]) -> None:
    """Insert generated rows at the end of each named sheet's ``sheetData`` in the .xlsx at ``path``.

    bodies: member name (``xl/worksheets/sheet3.xml``) -> (the sheet's used range, e.g. "A1:Y1001",
    chunks of row XML, its cell count). On a large workbook the largest bodies are compressed in a forked
    process while this one does the others (each to a file beside ``path``); the archive is then written
    with every member in its place (zip_archive). The file is rewritten beside itself and renamed over
    it (the caller already writes to a temporary file, so the user's target is only replaced once
    everything succeeded).
    """
    base = os.fspath(path)
    with zipfile.ZipFile(path) as src:
        members = [(info, src.read(info.filename)) for info in src.infolist()]
    framed = {}                              # member -> (head, chunks, tail): the body between its sheet's ends
    for info, data in members:
        if info.filename in bodies:
            used, chunks, _ = bodies[info.filename]
            head, sep, tail = data.rpartition(b"</sheetData>")
            if not sep:                      # an empty sheet writes <sheetData/>
                head, sep, tail = data.rpartition(b"<sheetData/>")
                head += b"<sheetData>"
            head = _DIMENSION.sub(f'<dimension ref="{used}"/>'.encode(), head, count=1)
            framed[info.filename] = (head, chunks, b"</sheetData>" + tail)
    where = {name: f"{base}.part{k}" for k, name in enumerate(framed)}
    tmp = f"{base}.rows"

    def write_body(name: str) -> Packed:
        head, chunks, tail = framed[name]
        with open(where[name], "wb") as f:
            packed = deflate(chain([head], (c.encode("utf-8") for c in chunks), [tail]), BODY_LEVEL, f)
        return packed._replace(data=where[name])

    try:
        away = _shared(bodies)
        with forked(lambda: {name: write_body(name) for name in away}) if away else nullcontext() as handoff:
            packed = {name: write_body(name) for name in framed if name not in away}
        if away:
            packed.update(handoff.value)
        with open(tmp, "wb") as f:
            zw = ZipWriter(f)
            for info, data in members:
                zw.add(info.filename, packed.get(info.filename) or deflate([data], PARTS_LEVEL), info.date_time)
            zw.close()
        os.replace(tmp, path)
    finally:
        for t in [*where.values(), tmp]:
            if os.path.exists(t):
                os.unlink(t)
