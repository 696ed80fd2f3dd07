"""The review workbook a reviewer signs off (XlsxWriter, constant-memory mode for speed).

Every text cell goes through one text-only path (`Book.text` / `_Sheet.row`): it is
stored as a string, never a formula; text starting with = + - @ also gets the quote
prefix so that editing the cell keeps it text; control characters are replaced and
over-long text is cut at the spreadsheet limit. Charts carry no user text: the text cell
above each chart names it.
Every sheet is set up to print: landscape, fitted to the page width, header rows repeated.
"""

from __future__ import annotations

import math
import re
import textwrap
from datetime import date
from itertools import islice, repeat
from pathlib import Path

import numpy as np
import xlsxwriter

from sicheck import __version__
from sicheck.reports.atomic import atomic_path
from sicheck.reports.sheet_rows import column_letters, rows_xml, splice_rows
from sicheck.reports.signoff_columns import finding_cells, finding_columns, summary_lines
from sicheck.checks.engine import pair_label
from sicheck.review import Review

FORMULA_START = ("=", "+", "-", "@", "\t")
# characters a cell cannot hold: controls, and what XML 1.0 forbids (lone surrogates, U+FFFE, U+FFFF)
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f\ud800-\udfff\ufffe\uffff]")
MAX_TEXT = 32767                      # characters in one cell (the file format's limit)
SEVERITY_FILL = {"error": "#F4C7C3", "warning": "#FCE8B2", "info": "#D9E7F5"}
HEADER_FILL = "#1F3B57"
DISPOSITIONS = ("accept", "fix", "waive")
# Printing: about 135 default-width characters fit across a landscape page at 100 %; a sheet wider than
# PRINT_CHARS is spread over more pages wide (its key columns repeated) rather than shrunk below ~55 %.
PRINT_CHARS = 245
MAX_FIT_WIDTH = 48                    # a text column fitted to its content stays this narrow (it wraps)


def clean_text(value) -> tuple[str, bool]:
    """(text, needs a quote prefix): the one place user text is made safe for a cell."""
    s = value if isinstance(value, str) else str(value)
    if _CONTROL.search(s):
        s = _CONTROL.sub("\ufffd", s)
    if len(s) > MAX_TEXT:
        s = s[:MAX_TEXT - 12] + " [truncated]"
    return s, s.startswith(FORMULA_START)


def _xf(fmt) -> int:
    """A format's style index in the file (0 = the default style). XlsxWriter assigns it on first use,
    as it does when it writes a cell itself."""
    return 0 if fmt is None else fmt._get_xf_index()


class Book:
    """An XlsxWriter workbook with the formats the sheets share (created once, cached by their properties)."""

    def __init__(self, path: str | Path):
        self.wb = xlsxwriter.Workbook(str(path), {
            "constant_memory": True, "strings_to_formulas": False, "strings_to_numbers": False,
            "strings_to_urls": False})
        self._formats: dict[tuple, object] = {}
        self.path = path
        self._tables: list["_Sheet"] = []     # table sheets whose rows are spliced in at close (sheet_rows)

    def fmt(self, **props):
        key = tuple(sorted(props.items()))
        f = self._formats.get(key)
        if f is None:
            f = self._formats[key] = self.wb.add_format(dict(props)) if props else None
        return f

    def sheet(self, name: str, pages_wide: int = 1, repeat_rows: int = 0, repeat_cols: int = 0, grid: bool = True):
        ws = self.wb.add_worksheet(name)
        ws.set_landscape()
        ws.fit_to_pages(pages_wide, 0)
        ws.set_margins(left=0.4, right=0.4, top=0.6, bottom=0.6)
        ws.set_footer("&L&A&Rpage &P of &N")
        if repeat_rows:
            ws.repeat_rows(0, repeat_rows - 1)
        if repeat_cols and pages_wide > 1:
            ws.repeat_columns(0, repeat_cols - 1)
            ws.print_across()            # a row's parts on consecutive pages, not after all the rows
        if grid:
            ws.hide_gridlines(0)          # gridlines on screen and on paper
        return ws

    def text(self, ws, r: int, c: int, value, **props):
        """Write ``value`` as a text cell, whatever it looks like."""
        s, quote = clean_text(value)
        if quote:
            props["quote_prefix"] = True
        ws.write_string(r, c, s, self.fmt(**props))

    def close(self):
        for sh in self._tables:              # style indices are fixed now, before XlsxWriter writes styles
            sh.register_styles()
        self.wb.close()
        bodies = {f"xl/worksheets/sheet{sh.ws.index + 1}.xml": (*sh.body(), sh.rows * sh.n)
                  for sh in self._tables if sh.buffered}
        if bodies:
            splice_rows(self.path, bodies)
        # the book and its table sheets refer to each other: let the buffered rows (a large board's
        # millions of objects) go now, by reference count, not in a later pass of the garbage collector
        for sh in self._tables:
            sh._buf = []
        self._tables = []


LINE_PT = 15.0                        # height of one line of 11 pt text


def text_lines(text: str, width: float) -> int:
    """Lines a wrapped text takes in a column ``width`` characters wide (a little pessimistic: word breaks).

    Rows are given this height explicitly: spreadsheet programs do not all fit row heights on opening.
    """
    per_line = max(1.0, width * 1.2 - 2.0)
    if "\n" not in text:                  # the common case, without a generator per call
        return max(1, math.ceil(len(text) / per_line))
    return sum(max(1, math.ceil(len(part) / per_line)) for part in text.split("\n"))


def _longest(values) -> int:
    """Longest text among values (a sample of at most 20 000 is enough for a width)."""
    # a pandas column as a list first: iterating it yields one element at a time, slowly
    head = values.iloc[:20000].tolist() if hasattr(values, "iloc") else list(islice(values, 20000))
    return max((len(v) for v in head if isinstance(v, str)), default=0)


class _Sheet:
    """A table sheet: header row, frozen panes, filter, fitted widths, print set-up.

    columns: (header with unit, number format or None for text, width); a text column whose width is
    given as a negative number wraps at that width.
    """

    def __init__(self, book: Book, title: str, columns: list[tuple[str, str | None, int]], header_row: int = 1,
                 fit: dict[int, object] | None = None, key_cols: int = 1, print_cols: int | None = None):
        self.book = book
        self.columns = columns
        self.n = len(columns)
        self.formats = [fmt for _, fmt, _ in columns]
        widths, wraps = [], []
        for j, (name, fmt, width) in enumerate(columns):
            wrap = width < 0
            width = abs(width)
            # headers wrap, so a long header does not force a wide column; text columns fit their content
            w = width if wrap else max(width, min(len(name) + 2, 16))
            if fit and j in fit and not wrap:
                w = min(max(w, _longest(fit[j]) + 2), MAX_FIT_WIDTH)
            widths.append(w)
            wraps.append(wrap)
        # print_cols: only the first columns print (the others are for the screen and for tools)
        self.print_cols = print_cols or self.n
        self.ws = book.sheet(title, pages_wide=max(1, math.ceil(sum(widths[:self.print_cols]) / PRINT_CHARS)),
                             repeat_rows=header_row, repeat_cols=key_cols)
        # column formats apply to every cell written without its own format: numbers need no per-cell style
        self._col_props = []
        for j, (w, wrap, fmt) in enumerate(zip(widths, wraps, self.formats)):
            props = {"valign": "top"}
            if fmt:
                props["num_format"] = fmt
            if wrap:
                props["text_wrap"] = True
            self._col_props.append(props)
            self.ws.set_column(j, j, w, book.fmt(**props))
        self.ws.freeze_panes(header_row, 0)
        self.widths = widths
        self.wrap_cols = [j for j, wrap in enumerate(wraps) if wrap]
        self.header_row = header_row
        self.rows = header_row - 1          # zero-based index of the last row written
        self._buf: list = []
        self._fills: dict[tuple, object] = {}     # (column, fill, quote prefix) -> format, for row()
        book._tables.append(self)

    def header(self):
        r = self.header_row - 1
        lines = max(len(textwrap.wrap(name, max(1, int(w) - 1), break_long_words=False)) or 1
                    for (name, _, _), w in zip(self.columns, self.widths))
        self.ws.set_row(r, LINE_PT * lines)
        for j, (name, _, _) in enumerate(self.columns):
            self.book.text(self.ws, r, j, name, bold=True, font_color="#FFFFFF", bg_color=HEADER_FILL,
                           text_wrap=True, valign="top")

    def row(self, values: list, fill: str | None = None, fill_cols: tuple[int, ...] = ()):
        """Add a data row. Rows are kept and written as XML when the book closes (see sheet_rows):
        nothing else may be written to this sheet below the header once rows are added."""
        self.rows += 1
        lines = 1
        for j in self.wrap_cols:
            v = values[j] if j < len(values) else None
            if isinstance(v, str) and len(v) > self.widths[j] - 3:
                lines = max(lines, text_lines(v, self.widths[j]))
        over = None
        if fill is not None and fill_cols:
            over = {j: self._fill(j, fill, values[j] if j < len(values) else None) for j in fill_cols}
        self._buf.append((self.rows, values, LINE_PT * min(lines, 27) if lines > 1 else None, over))  # 409 pt max

    def rows_of(self, columns: list, fills: list | None = None, fill_cols: tuple[int, ...] = ()):
        """row() for many rows at once, given column by column (one list per column, a value per row; fills:
        each row's fill or None). The same rows as calling row() on each, with the heights and fills
        worked out a column at a time (a large board's sheets have 100 000 rows)."""
        n = len(columns[0]) if columns else 0
        first = self.rows + 1
        self.rows += n
        lines: dict[int, int] = {}                       # rows taller than one line
        for j in self.wrap_cols:
            if j >= len(columns):
                continue
            limit, width = self.widths[j] - 3, self.widths[j]
            for i, v in enumerate(columns[j]):
                if v.__class__ is str and len(v) > limit:
                    k = text_lines(v, width)
                    if k > lines.get(i, 1):
                        lines[i] = k
        heights = [None] * n
        for i, k in lines.items():
            heights[i] = LINE_PT * min(k, 27)             # 409 pt at most
        overs = [None] * n
        if fills is not None and fill_cols:
            shared: dict[tuple, dict] = {}       # rows with the same fill and quoting share one dict of formats
            cols = [columns[j] if j < len(columns) else [None] * n for j in fill_cols]
            for i, fill in enumerate(fills):
                if fill is not None:
                    key = (fill, *(c[i] if c[i].__class__ is str and clean_text(c[i])[1] else None for c in cols))
                    over = shared.get(key)
                    if over is None:
                        over = shared[key] = {j: self._fill(j, fill, v) for j, v in zip(fill_cols, key[1:])}
                    overs[i] = over
        self._buf.extend(zip(range(first, first + n), zip(*columns), heights, overs))

    def _fill(self, j: int, fill: str, v):
        quote = isinstance(v, str) and clean_text(v)[1]
        key = (j, fill, quote)
        f = self._fills.get(key)
        if f is None:
            f = self._fills[key] = self.book.fmt(**self._col_props[j], bg_color=fill,
                                                 **({"quote_prefix": True} if quote else {}))
        return f

    @property
    def buffered(self) -> bool:
        return bool(self._buf)

    def register_styles(self):
        """Give every style the buffered rows use its index (XlsxWriter writes only indexed styles)."""
        fmts = [self.book.fmt(**p) for p in self._col_props]
        self._quote = [self.book.fmt(**p, quote_prefix=True) for p in self._col_props]
        self._col_style = [_xf(f) for f in fmts]
        for f in self._quote:
            _xf(f)
        done = set()                         # rows_of shares a dict between rows: map each once
        for _, _, _, over in self._buf:
            if over and id(over) not in done:
                done.add(id(over))
                for j, f in over.items():
                    over[j] = _xf(f)

    def body(self) -> tuple[str, object]:
        """(used range, row XML chunks) for sheet_rows.splice_rows."""
        quote_style = [_xf(f) for f in self._quote]
        col_style = self._col_style

        def text_cells(j: int, texts: list[str], overs: tuple | None) -> tuple[list[str], list[int]]:
            styles = [col_style[j]] * len(texts)
            # the rare text needing care, found with whole-column scans (they run in C)
            if (any(map(str.startswith, texts, repeat(FORMULA_START))) or _CONTROL.search("".join(texts))
                    or max(map(len, texts), default=0) > MAX_TEXT):
                texts = list(texts)
                for i, v in enumerate(texts):
                    if v.startswith(FORMULA_START) or len(v) > MAX_TEXT or _CONTROL.search(v):
                        texts[i], quote = clean_text(v)
                        if quote:
                            styles[i] = quote_style[j]
            for i, over in enumerate(overs or ()):
                if over is not None and j in over:
                    styles[i] = over[j]
            return texts, styles

        last = column_letters(self.n)[-1]
        return f"A1:{last}{self.rows + 1}", rows_xml(self._buf, self.n, col_style, text_cells)

    def finish(self):
        self.ws.autofilter(self.header_row - 1, 0, max(self.rows, self.header_row), self.n - 1)
        if self.print_cols < self.n:
            self.ws.print_area(0, 0, max(self.rows, self.header_row), self.print_cols - 1)


def key_value_sheet(book: Book, name: str, title: str, rows: list[tuple[str, object]], widths=(34, 70)):
    """A sheet with a title and bold keys beside their values (long texts wrap); returns (sheet, next row)."""
    ws = book.sheet(name, grid=False)
    ws.set_column(0, 0, widths[0], book.fmt(bold=True, valign="top"))
    ws.set_column(1, 1, widths[1], book.fmt(text_wrap=True, valign="top", align="left"))
    book.text(ws, 0, 0, title, bold=True, font_size=14)
    r = 1
    for k, v in rows:
        if k:
            book.text(ws, r, 0, k, bold=True, valign="top")
        if isinstance(v, str):
            if v:
                if len(v) > widths[1] - 3:
                    ws.set_row(r, LINE_PT * min(text_lines(v, widths[1]), 27))
                book.text(ws, r, 1, v, text_wrap=True, valign="top", align="left")
        elif isinstance(v, (bool, np.bool_)):
            ws.write_boolean(r, 1, bool(v))
        elif v is not None:
            f = float(v)
            if math.isfinite(f):
                ws.write_number(r, 1, f, book.fmt(valign="top", align="left"))
        r += 1
    return ws, r


def fab_band_text(rules) -> str:
    from sicheck.checks.fabrication_band import describe, tolerances
    return (f"{describe(tolerances(rules))} ([fabrication]); each segment's band is on the Segments sheet")


def _band_line(rv: Review) -> str:
    return fab_band_text(rv.rules) if "z_min_ohm" in rv.segments.columns else "not computed (review --no-band)"


def _summary(book: Book, rv: Review):
    counts = rv.counts
    nets = rv.nets
    rows = [
        ("Board stackup", rv.stackup.name),
        ("Stackup file", rv.stackup.source),
        ("Trace list", rv.traces_source),
        ("Rule sets", "; ".join(rv.rules.sources)),
        ("Impedance solver", rv.solver),
        ("Fabrication tolerances", _band_line(rv)),
        ("sicheck version", __version__),
        ("Generated", date.today().isoformat()),
        ("", ""),
        ("Nets", int(len(nets))),
        ("Segments", int(len(rv.segments))),
        ("Unique cross-sections solved", len(rv.cross_sections)),
        ("Errors", counts["error"]),
        ("Warnings", counts["warning"]),
        ("Info", counts["info"]),
        ("", ""),
        ("Lumped nets (no termination needed)", rv.net_counts["not-needed"]),     # a pair counts once
        ("Termination recommended", rv.net_counts["recommended"]),
        ("Termination required", rv.net_counts["required"]),
        ("", ""),
        ("Criteria", f"lumped when TD <= {rv.rules.lumped_max_td_over_tr:.3g} x Tr; termination required when "
                     f"TD >= {rv.rules.required_min_td_over_tr:.3g} x Tr; in between recommended"),
        ("Caution", "Engineering estimates: confirm impedance against the fabricator's impedance report and "
                    "test coupons. No high-voltage creepage/clearance or product-safety checks."),
        ("", ""),
    ]
    rows += summary_lines(rv.signoff)       # what changed since the previous review; waivers
    ws, r = key_value_sheet(book, "Summary", "Signal-integrity review", rows)
    book.text(ws, r, 0, "Sign-off", bold=True, font_size=14)
    for k in ("Reviewed by", "Date", "Decision (approve / rework)", "Notes"):
        r += 1
        book.text(ws, r, 0, k, bold=True)


def _findings(book: Book, rv: Review):
    # the message wraps in a column a page can hold, so a printed row reads without a second page
    # Net and Layer wrap too (a finding may name many nets), and the Key (last) does not print: the finding and
    # its sign-off columns then fit one page across
    cols = [("ID", None, 7), ("Severity", None, 9), ("Rule", None, 16), ("Net", None, -22), ("Layer", None, -12),
            ("Finding", None, -70), ("Trace row", "0", 7), ("Disposition", None, 12), ("Reviewer", None, 12),
            ("Comment", None, -24)] + finding_columns(rv.signoff)
    fs = rv.findings
    sh = _Sheet(book, "Findings", cols, print_cols=len(cols) - 1)
    n = max(len(fs), 1)
    sh.ws.data_validation(1, 7, n, 7, {"validate": "list", "source": list(DISPOSITIONS), "ignore_blank": True,
                                       "error_title": "Disposition", "error_message": "Choose accept, fix or waive"})
    sh.header()
    severity = [f.severity for f in fs]
    columns = [[f"F{i:04d}" for i in range(1, len(fs) + 1)], severity, [f.rule for f in fs], [f.net for f in fs],
               [f.layer for f in fs], [f.message for f in fs], [f.row for f in fs]]
    columns += [list(c) for c in zip(*(finding_cells(rv.signoff, f) for f in fs))] or [[] for _ in cols[7:]]
    sh.rows_of(columns, [SEVERITY_FILL[s] for s in severity], fill_cols=(1,))
    sh.finish()


def _nets(book: Book, rv: Review):
    cols = [("Net", None, 18), ("Class", None, 10), ("Pair", None, 12), ("Layers", None, 14), ("Segments", "0", 8),
            ("Length [mm]", "0.00", 9), ("Delay [ps]", "0.0", 8), ("Rise time [ps]", "0", 8),
            ("TD/Tr", "0.000", 7), ("Electrical", None, 10), ("Termination", None, 11),
            ("Series R [ohm]", "0", 8), ("Z at driver end [ohm]", "0.0", 8),
            ("Lumped limit [mm]", "0.0", 9), ("Critical length [mm]", "0.0", 9),
            ("Knee freq [GHz]", "0.000", 8), ("Wavelength at knee [mm]", "0.0", 10),
            ("Loss freq [GHz]", "0.000", 8), ("Insertion loss [dB]", "0.000", 8),
            ("Simulated termination", None, -30), ("Overshoot before [%]", "0.0", 9),
            ("Overshoot after [%]", "0.0", 9), ("Ringback before [%]", "0.0", 9), ("Ringback after [%]", "0.0", 9),
            ("Settled before [ns]", "0.00", 9), ("Settled after [ns]", "0.00", 9), ("Flight time [ns]", "0.000", 8),
            ("Termination power [mW]", "0.0", 10), ("Meets limits", None, 7), ("First-order advice", None, -50)]
    nets = rv.nets
    has_xt = "next_pct" in nets.columns       # crosstalk inputs given
    if has_xt:
        cols = cols + [("Worst NEXT [%]", "0.00", 8), ("Worst FEXT [%]", "0.00", 8)]
    has_vias = "vias" in nets.columns          # review._add_vias
    if has_vias:
        cols = cols + [("Vias", "0", 6), ("Lowest via stub resonance [GHz]", "0.0", 10)]
    sh = _Sheet(book, "Nets", cols, fit={0: nets["net"], 1: nets["net_class"], 2: nets["pair"], 3: nets["layers"],
                                         9: nets["electrical"], 10: nets["termination"]})
    sh.header()
    fills = {"required": SEVERITY_FILL["warning"], "recommended": SEVERITY_FILL["info"]}
    n = len(nets)

    def num(name, scale=1.0):
        return (nets[name].to_numpy(float) * scale).tolist()

    base = [nets["net"].tolist(), nets["net_class"].tolist(), nets["pair"].tolist(), nets["layers"].tolist(),
            num("segments"), num("length", 1e3), num("delay", 1e12), num("rise_time", 1e12), num("td_over_tr"),
            nets["electrical"].tolist(), nets["termination"].tolist(),
            [None if v is None else float(v) for v in nets["series_ohm"].tolist()], num("z_driver_end"),
            num("lumped_limit_length", 1e3), num("critical_length", 1e3), num("knee_hz", 1e-9),
            num("wavelength_at_knee", 1e3), num("freq", 1e-9), num("loss_db")]
    empty = [None] * n
    if "termination_part" in nets.columns:
        part = nets["termination_part"].tolist()
        sim = [bool(p) for p in part]
        meets = ["yes" if m else "no" for m in nets["waveform_meets_limits"].tolist()]
        wave = [part, num("before_overshoot_pct"), num("after_overshoot_pct"), num("before_ringback_pct"),
                num("after_ringback_pct"), num("before_settle_ns"), num("after_settle_ns"), num("after_flight_ns"),
                num("termination_power_w", 1e3), [m if s else None for m, s in zip(meets, sim)]]
    else:
        wave = [empty] * 10
    columns = base + wave + [nets["advice"].tolist()] + ([num("next_pct"), num("fext_pct")] if has_xt else [])
    if has_vias:
        columns += [num("vias"), num("via_stub_resonance", 1e-9)]
    sh.rows_of(columns, [fills.get(t) for t in nets["termination"].tolist()], fill_cols=(10,))
    sh.finish()


def _segments(book: Book, rv: Review):
    seg = rv.segments
    cols = [("Trace row", "0", 6), ("Net", None, 18), ("Pair", None, 12), ("Layer", None, 8), ("Kind", None, 10),
            ("Length [mm]", "0.000", 8), ("Width [mm]", "0.000", 7), ("Gap [mm]", "0.000", 7),
            ("Z0 [ohm]", "0.0", 7), ("Zdiff [ohm]", "0.0", 7), ("Zodd [ohm]", "0.0", 7), ("Zeven [ohm]", "0.0", 7),
            ("eps_eff", "0.000", 7), ("Delay [ps/mm]", "0.000", 8), ("Delay [ps]", "0.0", 8),
            ("L [nH/mm]", "0.0000", 8), ("C [pF/mm]", "0.0000", 8), ("Model", None, 16),
            ("Uncertainty [%]", "0.00", 8), ("Closed-form Z [ohm]", "0.0", 9), ("Freq [GHz]", "0.000", 7),
            ("Loss [dB/mm]", "0.0000", 8), ("Conductor [dB/mm]", "0.0000", 9), ("Dielectric [dB/mm]", "0.0000", 9),
            ("Loss [dB]", "0.000", 7),
            # fabrication band of Z0 (Zdiff for a pair): worst case of the tolerances, and the RSS spread
            ("Band min [ohm]", "0.0", 7), ("Band max [ohm]", "0.0", 7), ("Band RSS +/- [ohm]", "0.0", 7)]
    has_xt = "next_pct" in seg.columns        # crosstalk inputs given
    if has_xt:
        cols = cols + [("Spacing [mm]", "0.000", 8), ("Coupled length [mm]", "0.0", 9), ("NEXT [%]", "0.00", 7),
                       ("FEXT [%]", "0.00", 7)]
    sh = _Sheet(book, "Segments", cols, fit={1: seg["net"], 2: seg["pair"], 3: seg["layer"], 17: seg["model"]},
                key_cols=2)
    sh.header()

    def num(name, scale=1.0):
        return (seg[name].to_numpy(float) * scale).tolist()

    zf = np.where(seg["pair"].to_numpy() != "", seg["formula_zdiff"].to_numpy(float),
                  seg["formula_z"].to_numpy(float)).tolist()
    columns = [num("row"), seg["net"].tolist(), seg["pair"].tolist(), seg["layer"].tolist(), seg["kind"].tolist(),
               num("length", 1e3), num("width", 1e3), num("gap", 1e3), num("z0"), num("zdiff"), num("zodd"),
               num("zeven"), num("eps_eff"), num("delay_per_m", 1e9), num("delay", 1e12), num("l_per_m", 1e6),
               num("c_per_m", 1e9), seg["model"].tolist(), num("uncertainty_pct"), zf, num("freq", 1e-9),
               num("loss_db_per_m", 1e-3), num("conductor_loss_db_per_m", 1e-3),
               num("dielectric_loss_db_per_m", 1e-3), num("loss_db")]
    paired = seg["pair"].to_numpy() != ""
    for a, b in (("z_min_ohm", "zdiff_min_ohm"), ("z_max_ohm", "zdiff_max_ohm"), ("z_rss_ohm", "zdiff_rss_ohm")):
        columns.append(np.where(paired, seg[b].to_numpy(float), seg[a].to_numpy(float)).tolist()
                       if a in seg.columns else [None] * len(seg))
    if has_xt:
        columns += [num("spacing", 1e3), num("parallel", 1e3), num("next_pct"), num("fext_pct")]
    sh.rows_of(columns)
    sh.finish()


def _timing(book: Book, rv: Review):
    """Match groups (a row per net, its delay relative to the reference or the group's median) and pairs whose
    legs both have rows (their skew); written when the board has either."""
    from sicheck.skew import group_timing, pair_skew
    nets = rv.nets
    names = nets["net"].tolist()              # columns as lists: a pandas column iterates slowly
    length = dict(zip(names, nets["length"].to_numpy(float).tolist()))
    layers = dict(zip(names, nets["layers"].tolist()))
    delays = dict(zip(names, nets["delay"].to_numpy(float).tolist()))
    rows = []
    for gt in group_timing(rv.segments, nets, rv.rules.match_groups):
        over = "yes" if gt.over else "no"
        for net, d in zip(gt.nets, gt.delays):
            rows.append(([gt.group.name, net, "yes" if net == gt.reference else "", d * 1e12,
                          gt.offsets[net] * 1e12, length[net] * 1e3, layers[net], gt.skew * 1e12,
                          gt.group.max_skew * 1e12, gt.skew_length * 1e3, gt.main_layer, over], gt.over))
    skew = pair_skew(nets)
    done = set()
    pairs, classes = nets["pair"].tolist(), nets["net_class"].tolist()
    for i in np.flatnonzero(np.isfinite(skew)).tolist():            # the legs of pairs with both legs listed
        net, pair, s = names[i], pairs[i], float(skew[i])
        if frozenset((net, pair)) in done:
            continue
        done.add(frozenset((net, pair)))
        limit = rv.rules.value("max_pair_skew", rv.rules.class_named(classes[i]) if classes[i] else None)
        over = limit is not None and s > limit
        slow = net if delays[net] >= delays[pair] else pair        # the slower leg's delay and length
        d, ln = delays[slow], length[slow]
        rows.append((["(pair)", pair_label(net, pair), "", d * 1e12, None, ln * 1e3, layers[slow], s * 1e12,
                      None if limit is None else limit * 1e12, s * ln / d * 1e3 if d > 0 else None,
                      "", "yes" if over else "no"], over))
    if not rows:
        return
    cols = [("Match group", None, 14), ("Net", None, 18), ("Reference", None, 9), ("Delay [ps]", "0.0", 9),
            ("From reference or median [ps]", "0.0", 10), ("Length [mm]", "0.00", 9), ("Layers", None, 14), ("Skew [ps]", "0.0", 8),
            ("Limit [ps]", "0.0", 8), ("Skew as length [mm]", "0.00", 9), ("Main layer", None, 9),
            ("Over limit", None, 7)]
    sh = _Sheet(book, "Timing", cols, fit={0: [v[0] for v, _ in rows], 1: [v[1] for v, _ in rows],
                                           6: [v[6] for v, _ in rows]})
    sh.header()
    for values, over in rows:
        sh.row(values, fill=SEVERITY_FILL["warning"] if over else None, fill_cols=(11,))
    sh.finish()


def _stackup(book: Book, rv: Review):
    cols = [("#", "0", 4), ("Type", None, 11), ("Name", None, 14), ("Kind", None, 9), ("Thickness [mm]", "0.0000", 13),
            ("er", "0.00", 7), ("Loss tangent", "0.0000", 11), ("Line type", None, 11), ("References", None, 18),
            ("Below trace [mm]", "0.0000", 13), ("Above trace [mm]", "0.0000", 13), ("Plane net", None, 10)]
    sh = _Sheet(book, "Stackup", cols)
    sh.header()
    for l in rv.stackup.layers:
        kind = refs = below = above = None
        if l.type == "signal":
            g = rv.stackup.geometry(l.name)
            kind, refs = g.kind, ", ".join(g.references)
            below = sum(s.thickness for s in g.below) * 1e3
            above = sum(s.thickness for s in g.above) * 1e3
        sh.row([l.index + 1, l.type, l.name, l.kind, l.thickness * 1e3, l.er, l.loss_tangent if l.er else None,
                kind, refs, below, above, l.net if l.type == "plane" else None])
    v = rv.stackup.vias          # the via construction ([vias]); a back-drilled stub in the thickness column
    sh.row([None, "vias", "[vias]", v.kind, None if v.stub is None else v.stub * 1e3, None, None, None,
            f"parts on the {v.component_side} side", None, None, None])
    sh.finish()

def _rules(wb: Book, rv: Review):
    """Every registered check with its severity here and its parameters in effect, then the net classes."""
    from sicheck.checks import CHECKS, SETTINGS, all_params
    r = rv.rules
    cols = [("Item", None, 30), ("Value", None, 18), ("Set in", None, 20), ("Meaning", None, 90)]
    sh = _Sheet(wb, "Rules", cols)
    sh.header()
    for c in CHECKS:
        sh.row([f"check {c.id}", r.severity.get(c.id, c.severity), "[severity]", c.summary])
        for p in c.params:
            sh.row([f"  {p.name}", p.shown(r.value(p.name)), p.where, p.help])
    for p in SETTINGS:
        sh.row([f"setting {p.name}", p.shown(r.value(p.name)), p.where, p.help])
    for c in r.classes:
        vals = []
        if c.z0 is not None:
            vals.append(f"Z0 {c.z0:g} ohm")
        if c.zdiff is not None:
            vals.append(f"Zdiff {c.zdiff:g} ohm")
        vals.append(f"+/-{r.tolerance_for(c):g} %")
        if c.rise_time is not None:
            vals.append(f"Tr {c.rise_time * 1e12:g} ps")
        if c.width is not None:
            vals.append(f"w {c.width * 1e3:g} mm")
        if c.gap is not None:
            vals.append(f"gap {c.gap * 1e3:g} mm")
        if c.driver_ohm is not None:
            vals.append(f"Rdrv {c.driver_ohm:g} ohm")
        # in each parameter's display unit (a length or a time is stored in SI)
        vals += [f"{k} {all_params()[k].shown(v)}" for k, v in c.params.items()
                 if k not in ("z0", "zdiff", "tolerance_pct")]
        sh.row([f"class {c.name}", ", ".join(vals), "[[net_class]]", " ".join(c.match) or "(by net_class column)"])
    for g in r.match_groups:
        sh.row([f"match group {g.name}", f"max_skew {g.max_skew * 1e12:g} ps" +
                (f", reference {g.reference}" if g.reference else ""), "[[match_group]]",
                " ".join(g.match) or "(by match_group column)"])
    sh.finish()


CHART_POINTS = 120
CHART_ROWS = 17           # rows from one chart's title to the next: the chart (7.5 cm) and a gap
DATA_COL = 12             # the charts' data sit to the right (column M on), outside the printed area


def chart_sheet(book: Book, name: str, intro: str, blocks: list, series: tuple, y_name: str, num_format: str):
    """A sheet of native scatter charts stacked down the page (the part that prints), each named by the text
    cell above it, their data in columns to the right (three per chart, from column M on).

    blocks: (data heading, title, rows of (t [ns], first series, second series)); series: ((name, colour), x2).
    No chart carries user text: the title is a cell, the series names are ours.
    """
    ws = book.sheet(name, grid=False)
    ws.set_column(0, DATA_COL - 2, 8.43)
    num = book.fmt(num_format=num_format)
    title_rows = {1 + k * CHART_ROWS: k for k in range(len(blocks))}
    last = max([1 + len(blocks) * CHART_ROWS] + [3 + len(b[2]) for b in blocks])
    # constant-memory mode writes row by row: titles (left) and data blocks (right) interleave
    for r in range(last):
        if r == 0:
            book.text(ws, 0, 0, intro, bold=True)
        if r in title_rows:
            book.text(ws, r, 0, blocks[title_rows[r]][1], bold=True)
        for k, (heading, _, data) in enumerate(blocks):
            c = DATA_COL + 4 * k
            if r == 1:
                book.text(ws, r, c, heading, bold=True)
            elif r == 2:
                for j, h in enumerate(("t [ns]",) + tuple(f"{nm} [{y_name}]" for nm, _ in series)):
                    book.text(ws, r, c + j, h, bold=True)
            elif 3 <= r < 3 + len(data):
                for j, v in enumerate(data[r - 3]):
                    ws.write_number(r, c + j, v, num)
    for k, (_, _, data) in enumerate(blocks):
        c, n = DATA_COL + 4 * k, len(data)
        ch = book.wb.add_chart({"type": "scatter", "subtype": "straight"})
        ch.set_title({"none": True})
        for j, (label, colour) in enumerate(series, start=1):
            ch.add_series({"name": label, "categories": [name, 3, c, 2 + n, c],
                           "values": [name, 3, c + j, 2 + n, c + j],
                           "line": {"color": colour, "width": 1.5}, "marker": {"type": "none"}})
        ch.set_x_axis({"name": "t [ns]"})
        ch.set_y_axis({"name": y_name, "major_gridlines": {"visible": True, "line": {"color": "#DDDDDD"}}})
        ch.set_legend({"position": "bottom"})
        ch.set_size({"width": 605, "height": 283})       # 16 x 7.5 cm
        ws.insert_chart(2 + k * CHART_ROWS, 0, ch)
    ws.print_area(0, 0, max(1, len(blocks) * CHART_ROWS), DATA_COL - 2)


def _waveforms(book: Book, rv: Review):
    """Before/after receiver waveforms of the worst nets, one chart each."""
    nets = rv.nets.set_index("net")
    blocks = []
    for net, (before, after, _) in rv.waves.items():
        if before is None or after is None:
            continue
        t_b, v_b = before
        t_a, v_a = after
        t = np.linspace(0.0, max(t_b[-1], t_a[-1]), CHART_POINTS)
        blocks.append((net, f"{net}: {nets.loc[net, 'termination_part']}",
                       np.column_stack([t * 1e9, np.interp(t, t_b, v_b), np.interp(t, t_a, v_a)]).tolist()))
    chart_sheet(book, "Waveforms", "Receiver voltage of the nets with the largest unterminated overshoot, without "
                "and with the simulated termination (frequency-domain simulation, with loss; data from column M on).",
                blocks, (("unterminated", "#C8553D"), ("terminated", "#2E6FAD")), "V", "0.000")


def write_workbook(rv: Review, target: str | Path, extra_sheets=None) -> None:
    """Write the review workbook atomically to ``target``; extra_sheets are callables (book, review) that add
    sheets after the review's own (crosstalk_report.crosstalk_sheets, changes_sheet)."""
    with atomic_path(target) as tmp:
        book = Book(tmp)
        _summary(book, rv)
        _findings(book, rv)
        _nets(book, rv)
        _segments(book, rv)
        _timing(book, rv)
        _stackup(book, rv)
        _rules(book, rv)
        if rv.waves:
            _waveforms(book, rv)
        for fn in extra_sheets or ():
            fn(book, rv)
        book.close()
