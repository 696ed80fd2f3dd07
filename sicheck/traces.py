"""Reading a trace list (CSV or XLSX): one row per routed segment, SI out.

Headers match case-insensitively, ignoring spaces, underscores, hyphens and a trailing
unit in brackets (``Width [mil]``, ``length (mm)``). Units come from the header, the
cell (``5mil``) or ``--units``; a bare number with no unit anywhere is an error.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from sicheck import plausible
from sicheck.errors import InputError
from sicheck.units import QUANTITY_RE, UnitError, dimension_of, unit_factor

# canonical column -> (dimension or None for text, unit implied by the name, required)
COLUMNS = {
    "net": (None, None, True),
    "layer": (None, None, True),
    "length": ("length", None, True),
    "width": ("length", None, False),
    "rise_time": ("time", None, False),
    "pair": (None, None, False),
    "gap": ("length", None, False),
    "net_class": (None, None, False),
    "driver_ohm": ("resistance", "ohm", False),
    "load_pf": ("capacitance", "pF", False),
    "spacing": ("length", None, False),     # crosstalk: edge-to-edge clearance to the nearest aggressor
    "parallel": ("length", None, False),    # crosstalk: coupled length (default: the segment's length)
    # topology (sicheck/topology.py): each segment's end nodes and the net's driver node
    "from": (None, None, False),
    "to": (None, None, False),
    "driver": (None, None, False),
    # a net continuing as another through a part in series (sicheck/series_parts.py): text, parsed there
    "continues": (None, None, False),
    "part": (None, None, False),
    "match_group": (None, None, False),         # a [[match_group]] of the rules (sicheck/skew.py)
    "vias": ("count", None, False),       # vias the export counts on the row, beyond layer changes (via_table)
}
_HEADER_UNIT = re.compile(r"^(.*?)[\s_]*[\[(]\s*([^\])]*?)\s*[\])]\s*$")


def normalise_header(text: str) -> tuple[str, str | None]:
    """'Width [mil]' -> ('width', 'mil'); 'Rise_Time' -> ('risetime', None)."""
    s = str(text).strip().lstrip("\ufeff")
    unit = None
    m = _HEADER_UNIT.match(s)
    if m:
        s, unit = m.group(1), (m.group(2) or None)
    return re.sub(r"[\s_\-]+", "", s).lower(), unit


CANON_BY_KEY = {normalise_header(c)[0]: c for c in COLUMNS}


@dataclass
class TraceList:
    frame: pd.DataFrame            # canonical columns in SI, plus 'row'
    source: str
    ignored_columns: list[str] = field(default_factory=list)
    delimiter: str | None = None


def parse_units_option(units: list[str] | None) -> dict[str, str]:
    """--units values ('mm', 'ps', 'mm,ps') -> {dimension: unit}."""
    out: dict[str, str] = {}
    for item in units or []:
        for u in filter(None, (x.strip() for x in item.split(","))):
            dim = dimension_of(u)
            if dim not in ("length", "time"):
                raise InputError(f"--units: '{u}' is not a length or time unit (e.g. mm, mil, ps, ns)")
            out[dim] = u
    return out


def parse_map_option(items: list[str] | None) -> dict[str, str]:
    """--map 'Net Name=net' values -> {export header: sicheck column}."""
    out = {}
    for item in items or []:
        if "=" not in item:
            raise InputError(f"--map '{item}': write it as EXPORT_HEADER=COLUMN, e.g. 'Net Name=net'")
        k, v = item.split("=", 1)
        out[k.strip()] = v.strip()
    return out


# ------------------------------------------------------------------ file reading

def _read_csv(path: Path) -> tuple[pd.DataFrame, str]:
    src = str(path)
    try:
        raw = path.read_bytes()
    except OSError as e:
        raise InputError(f"cannot read trace list: {e.strerror or e}", file=src) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        line = raw[:e.start].count(b"\n") + 1
        raise InputError(f"this line is not UTF-8 text (byte 0x{raw[e.start]:02x}; the file looks like a "
                         "Latin-1 or Windows-1252 export). Re-save it as UTF-8: in a spreadsheet choose "
                         "'CSV UTF-8' when saving, or convert it, e.g. iconv -f cp1252 -t utf-8 old.csv > new.csv",
                         file=src, line=line) from None
    if "\x00" in text:
        raise InputError("file contains NUL bytes; is it really a CSV file?", file=src)
    lines = text.splitlines()
    header = next((l for l in lines if l.strip()), "")
    if not header:
        raise InputError("the trace list is empty", file=src)
    counts = {d: header.count(d) for d in (",", ";", "\t")}
    delim = max(counts, key=counts.get)
    if counts[delim] == 0:
        raise InputError("cannot find a column separator (comma, semicolon or tab) in the header line",
                         file=src, line=1)
    try:
        rows = list(csv.reader(io.StringIO(text), delimiter=delim))
    except csv.Error as e:
        raise InputError(f"CSV syntax: {e}", file=src) from None
    return _frame_from_rows(rows, src), delim


def _read_xlsx(path: Path, sheet: str | None) -> pd.DataFrame:
    src = str(path)
    import openpyxl
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as e:  # openpyxl raises many types for a damaged file
        raise InputError(f"cannot open as a workbook: {type(e).__name__}: {e}", file=src) from None
    try:
        if sheet is not None:
            if sheet not in wb.sheetnames:
                raise InputError(f"no sheet named '{sheet}' (sheets: {', '.join(wb.sheetnames)})", file=src)
            ws = wb[sheet]
        else:
            ws = wb.worksheets[0]
        rows = [["" if v is None else v for v in r] for r in ws.iter_rows(values_only=True)]
    finally:
        wb.close()
    return _frame_from_rows(rows, src)


def _frame_from_rows(rows: list[list], src: str) -> pd.DataFrame:
    # The header is the first non-empty row; its spreadsheet row number is kept.
    first = next((i for i, r in enumerate(rows) if any(str(c).strip() for c in r)), None)
    if first is None:
        raise InputError("the trace list is empty", file=src)
    header = [str(c).strip() for c in rows[first]]
    width = len(header)
    body, numbers = [], []
    for i in range(first + 1, len(rows)):
        r = rows[i]
        if not "".join(map(str, r)).strip():        # blank (a cell with text makes the joined text non-blank)
            continue
        if len(r) > width and any(str(c).strip() for c in r[width:]):
            raise InputError(f"row has {len(r)} cells but the header has {width}", file=src, row=i + 1)
        body.append(r if len(r) == width else list(r[:width]) + [""] * (width - len(r)))
        numbers.append(i + 1)
    df = pd.DataFrame(body, columns=pd.Index(range(width)), dtype=object)
    df.attrs["header"] = header
    df.attrs["header_row"] = first + 1
    df["__row"] = numbers
    return df


# ------------------------------------------------------------------ column handling

def _map_columns(header: list[str], aliases: dict[str, str], src: str, header_row: int):
    alias_keys = {normalise_header(k)[0]: v for k, v in aliases.items()}
    mapping: dict[str, tuple[int, str | None, str]] = {}
    ignored = []
    for j, h in enumerate(header):
        if not h:
            continue
        key, unit = normalise_header(h)
        target = alias_keys.get(key)
        if target is None:
            target = aliases.get(h)
        if target is not None:
            canon = CANON_BY_KEY.get(normalise_header(target)[0])
            if canon is None:
                raise InputError(f"column map sends '{h}' to '{target}', which is not a sicheck column "
                                 f"({', '.join(COLUMNS)})", file=src, line=header_row, column=h)
        else:
            canon = CANON_BY_KEY.get(key)
        if canon is None:
            ignored.append(h)
            continue
        if canon in mapping:
            raise InputError(f"two columns mean '{canon}': '{mapping[canon][2]}' and '{h}'", file=src,
                             row=header_row, column=h)
        mapping[canon] = (j, unit, h)
    for canon, (dim, _, required) in COLUMNS.items():
        if required and canon not in mapping:
            raise InputError(f"missing required column '{canon}' (header has: {', '.join(h for h in header if h)}); "
                             "use --map 'EXPORT HEADER=" + canon + "' if it is named otherwise",
                             file=src, row=header_row)
    return mapping, ignored


def _numeric_column(cells: pd.Series, rows: pd.Series, canon: str, header_label: str, header_unit: str | None,
                    default_units: dict[str, str], decimal_comma: bool, src: str) -> np.ndarray:
    dim, implied, _ = COLUMNS[canon]
    # one pass in a list (a CSV's cells are all text already); workbook numbers as repr(float)
    text = pd.Series([v.strip() if type(v) is str else "" if v is None else
                      (repr(float(v)) if isinstance(v, (int, float)) and not isinstance(v, bool) else str(v)).strip()
                      for v in cells.tolist()], index=cells.index)
    empty = text == ""
    fallback_unit = None
    if header_unit:
        try:
            unit_factor(header_unit, dim)
        except UnitError as e:
            raise InputError(f"header unit: {e}", file=src, column=header_label) from None
        fallback_unit = header_unit
    elif dim in default_units:
        fallback_unit = default_units[dim]
    elif implied:
        fallback_unit = implied
    # most cells are plain numbers: parse those in one vectorised call; only the rest (units, decimal
    # commas, typos) go through the pattern
    values = pd.to_numeric(text.where(~empty), errors="coerce").to_numpy(float, copy=True)
    need = ~empty.to_numpy() & np.isnan(values)
    units = np.full(len(text), "", dtype=object)
    if need.any():
        at = np.nonzero(need)[0]
        # each distinct cell text through the pattern once (a column repeats a few values like 350ps)
        sub = text.iloc[at]
        codes, uniq = pd.factorize(sub)
        parts = pd.Series(uniq, dtype=sub.dtype).str.extract(QUANTITY_RE).iloc[codes].set_axis(sub.index)
        bad = parts[0].isna().to_numpy()
        if bad.any():
            i = int(at[np.argmax(bad)])
            raise InputError(f"'{text.iloc[i]}' is not a number with a {dim} unit (e.g. "
                             f"{'5mil, 0.127mm' if dim == 'length' else '350ps, 0.5ns' if dim == 'time' else '22'})",
                             file=src, row=int(rows.iloc[i]), column=header_label)
        nums = parts[0]
        has_comma = nums.str.contains(",", regex=False).to_numpy()
        if has_comma.any() and not decimal_comma:
            i = int(at[np.argmax(has_comma)])
            raise InputError(f"'{text.iloc[i]}' uses a decimal comma in a comma-separated file; use a decimal point",
                             file=src, row=int(rows.iloc[i]), column=header_label)
        values[at] = pd.to_numeric(nums.str.replace(",", ".", regex=False), errors="coerce").to_numpy(float)
        units[at] = parts[1].fillna("").to_numpy(object)
    units = pd.Series(units, index=text.index)
    factors = np.ones(len(text))
    for u in pd.unique(units[~empty]):
        mask = (units == u).to_numpy() & ~empty.to_numpy()
        if u == "":
            if fallback_unit is None:
                i = int(np.argmax(mask))
                raise InputError(f"'{text.iloc[i]}' has no unit: write the unit in the cell (e.g. "
                                 f"{'0.2mm' if dim == 'length' else '350ps'}), in the header "
                                 f"(e.g. '{canon} [mm]'), or pass --units", file=src, row=int(rows.iloc[i]),
                                 column=header_label)
            factors[mask] = unit_factor(fallback_unit, dim)
        else:
            try:
                factors[mask] = unit_factor(u, dim)
            except UnitError as e:
                i = int(np.argmax(mask))
                raise InputError(str(e), file=src, row=int(rows.iloc[i]), column=header_label) from None
    out = values * factors
    nonfinite = ~empty.to_numpy() & ~np.isfinite(out)
    if nonfinite.any():
        i = int(np.argmax(nonfinite))
        raise InputError(f"'{text.iloc[i]}' is not a finite number", file=src, row=int(rows.iloc[i]),
                         column=header_label)
    rg = plausible.RANGES[canon]
    low = (out <= rg.lo) if rg.lo_open else (out < rg.lo)
    outside = ~empty.to_numpy() & (low | (out > rg.hi))
    if outside.any():
        i = int(np.argmax(outside))
        raise InputError(f"'{text.iloc[i]}': {plausible.check(canon, out[i])}", file=src,
                         row=int(rows.iloc[i]), column=header_label)
    out[empty.to_numpy()] = np.nan
    return out


def _count_column(cells: pd.Series, rows: pd.Series, label: str, src: str) -> np.ndarray:
    """A whole number per row (empty = 0), within its plausible range."""
    out = np.zeros(len(cells))
    for i, v in enumerate(cells.tolist()):
        text = "" if v is None else str(v).strip()
        if text == "":
            continue
        try:
            x = float(text)
        except ValueError:
            x = float("nan")
        if not (np.isfinite(x) and x == int(x)):
            raise InputError(f"'{text}' is not a whole number", file=src, row=int(rows.iloc[i]), column=label)
        if bad := plausible.check("via_count", x):
            raise InputError(f"'{text}': {bad}", file=src, row=int(rows.iloc[i]), column=label)
        out[i] = x
    return out


def read_traces(path: str | Path, units: dict[str, str] | None = None, aliases: dict[str, str] | None = None,
                sheet: str | None = None) -> TraceList:
    """Read and validate a trace list. Raises InputError naming file, row and column."""
    path = Path(path)
    src = str(path)
    if not path.exists():
        raise InputError("trace list not found", file=src)
    if path.is_dir():
        raise InputError("is a folder, not a trace list", file=src)
    suffix = path.suffix.lower()
    delim = None
    if suffix in (".xlsx", ".xlsm"):
        raw = _read_xlsx(path, sheet)
    elif suffix in (".csv", ".txt", ".tsv", ""):
        if sheet is not None:
            raise InputError("--sheet applies to .xlsx workbooks only", file=src)
        raw, delim = _read_csv(path)
    else:
        raise InputError(f"unknown trace-list type '{suffix}': use .csv or .xlsx", file=src)
    header = raw.attrs["header"]
    mapping, ignored = _map_columns(header, aliases or {}, src, raw.attrs["header_row"])
    rows = raw["__row"]
    out = pd.DataFrame({"row": rows.to_numpy(dtype=int)})
    if len(raw) == 0:
        raise InputError("the trace list has a header but no rows", file=src)
    for canon, (dim, _, required) in COLUMNS.items():
        if canon not in mapping:
            out[canon] = np.nan if dim else ""
            continue
        j, unit, label = mapping[canon]
        cells = raw[j]
        if dim == "count":
            out[canon] = _count_column(cells, rows, label, src)
            continue
        if dim is None:
            text = pd.Series([(v if type(v) is str else "" if v is None else str(v)).strip() for v in cells.tolist()],
                             index=cells.index)
            if required:
                blank = (text == "").to_numpy()
                if blank.any():
                    i = int(np.argmax(blank))
                    raise InputError(f"'{canon}' is empty", file=src, row=int(rows.iloc[i]), column=label)
            out[canon] = text.to_numpy()
        else:
            vals = _numeric_column(cells, rows, canon, label, unit, units or {}, delim == ";", src)
            if required and np.isnan(vals).any():
                i = int(np.argmax(np.isnan(vals)))
                raise InputError(f"'{canon}' is empty", file=src, row=int(rows.iloc[i]), column=label)
            out[canon] = vals
    return TraceList(frame=out, source=src, ignored_columns=ignored, delimiter=delim)
