"""The review workbook a reviewer signs off (openpyxl, write-only for speed).

Every text cell that starts with '=', '+', '-' or '@' is written as text with a
quote prefix, never as a formula.
"""

from __future__ import annotations

import math
from datetime import date
from pathlib import Path

import numpy as np
from openpyxl import Workbook
from openpyxl.cell import WriteOnlyCell
from openpyxl.cell.cell import Cell
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.datavalidation import DataValidation

from sicheck import __version__
from sicheck.reports.atomic import atomic_path
from sicheck.review import Review

FORMULA_START = ("=", "+", "-", "@")
FORMULA_CHARS = "=+-@"
SEVERITY_FILL = {
    "error": PatternFill("solid", fgColor="F4C7C3"),
    "warning": PatternFill("solid", fgColor="FCE8B2"),
    "info": PatternFill("solid", fgColor="D9E7F5"),
}
HEADER_FILL = PatternFill("solid", fgColor="1F3B57")
HEADER_FONT = Font(bold=True, color="FFFFFF")
TITLE_FONT = Font(bold=True, size=14)
BOLD = Font(bold=True)
DISPOSITIONS = ("accept", "fix", "waive")


def safe_text(ws, value: str):
    """A text cell that no spreadsheet program will evaluate."""
    c = WriteOnlyCell(ws, value=value)
    c.data_type = "s"
    c.quotePrefix = True
    return c


def _value(ws, v):
    if v is None:
        return None
    if isinstance(v, (float, np.floating)):
        return None if not math.isfinite(float(v)) else float(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, str):
        return safe_text(ws, v) if v.startswith(FORMULA_START) else v
    return v


def _longest(values) -> int:
    """Longest text among values (a sample of at most 20 000 is enough for a width)."""
    n = 0
    for k, v in enumerate(values):
        if k >= 20000:
            break
        if isinstance(v, str) and len(v) > n:
            n = len(v)
    return n


class _Sheet:
    """A write-only sheet with a header row, frozen panes, filter and fitted widths."""

    def __init__(self, wb: Workbook, title: str, columns: list[tuple[str, str | None, int]], header_row: int = 1,
                 fit: dict[int, object] | None = None):
        self.ws = wb.create_sheet(title)
        self.columns = columns
        self.n = len(columns)
        self.formats = [fmt for _, fmt, _ in columns]
        for j, (name, _, width) in enumerate(columns):
            # headers wrap, so a long header does not force a wide column; text columns fit their content
            w = max(width, min(len(name) + 2, 16))
            if fit and j in fit:
                w = min(max(w, _longest(fit[j]) + 2), 100)
            self.ws.column_dimensions[get_column_letter(j + 1)].width = w
        self.ws.freeze_panes = f"A{header_row + 1}"
        self.header_row = header_row
        self.rows = header_row
        # one styled cell per number column, reused: openpyxl serialises a row when it is appended
        self._num_cells = [None if fmt is None else WriteOnlyCell(self.ws, value=0.0) for fmt in self.formats]
        for c, fmt in zip(self._num_cells, self.formats):
            if c is not None:
                c.number_format = fmt

    def header(self):
        cells = []
        for name, _, _ in self.columns:
            c = WriteOnlyCell(self.ws, value=name)
            c.font, c.fill = HEADER_FONT, HEADER_FILL
            c.alignment = Alignment(wrap_text=True, vertical="top")
            cells.append(c)
        self.ws.append(cells)

    def row(self, values: list, fill: PatternFill | None = None, fill_cols: tuple[int, ...] = ()):
        ws = self.ws
        out = []
        for j, v in enumerate(values):
            fmt = self.formats[j]
            if v is None:
                out.append(None)
                continue
            if isinstance(v, str):
                c = safe_text(ws, v) if v and v[0] in FORMULA_CHARS else v
            elif isinstance(v, (bool, np.bool_)):
                c = bool(v)
            else:
                f = float(v)
                if not math.isfinite(f):
                    out.append(None)
                    continue
                if fmt and not (fill is not None and j in fill_cols):
                    c = self._num_cells[j]
                    c.value = f
                elif fmt:
                    c = WriteOnlyCell(ws, value=f)
                    c.number_format = fmt
                else:
                    c = f
            if fill is not None and j in fill_cols:
                if not isinstance(c, Cell):
                    c = WriteOnlyCell(ws, value=c)
                c.fill = fill
            out.append(c)
        ws.append(out)
        self.rows += 1

    def finish(self):
        last = get_column_letter(self.n)
        self.ws.auto_filter.ref = f"A{self.header_row}:{last}{max(self.rows, self.header_row + 1)}"


def key_value_sheet(wb: Workbook, name: str, title: str, rows: list[tuple[str, object]], widths=(34, 70)):
    """A sheet with a title and bold keys beside their values (long texts wrap)."""
    ws = wb.create_sheet(name)
    ws.column_dimensions["A"].width, ws.column_dimensions["B"].width = widths
    t = WriteOnlyCell(ws, value=title)
    t.font = TITLE_FONT
    ws.append([t])
    for k, v in rows:
        kc = WriteOnlyCell(ws, value=k)
        kc.font = BOLD
        vc = _value(ws, v)
        if isinstance(vc, str) and len(vc) > 60:
            vc = WriteOnlyCell(ws, value=vc)
            vc.alignment = Alignment(wrap_text=True)
        ws.append([kc, vc])
    return ws


def _summary(wb: Workbook, rv: Review):
    counts = rv.counts
    nets = rv.nets
    rows = [
        ("Board stackup", rv.stackup.name),
        ("Stackup file", rv.stackup.source),
        ("Trace list", rv.traces_source),
        ("Rule sets", "; ".join(rv.rules.sources)),
        ("Impedance solver", rv.solver),
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
        ("Lumped nets (no termination needed)", int((nets["termination"] == "not-needed").sum())),
        ("Termination recommended", int((nets["termination"] == "recommended").sum())),
        ("Termination required", int((nets["termination"] == "required").sum())),
        ("", ""),
        ("Criteria", f"lumped when TD <= {rv.rules.lumped_max_td_over_tr:.3g} x Tr; termination required when "
                     f"TD >= {rv.rules.required_min_td_over_tr:.3g} x Tr; in between recommended"),
        ("Caution", "Engineering estimates: confirm impedance against the fabricator's impedance report and "
                    "test coupons. No high-voltage creepage/clearance or product-safety checks."),
        ("", ""),
    ]
    ws = key_value_sheet(wb, "Summary", "Signal-integrity review", rows)
    head = WriteOnlyCell(ws, value="Sign-off")
    head.font = TITLE_FONT
    ws.append([head])
    for k in ("Reviewed by", "Date", "Decision (approve / rework)", "Notes"):
        kc = WriteOnlyCell(ws, value=k)
        kc.font = BOLD
        ws.append([kc, None])


def _findings(wb: Workbook, rv: Review):
    cols = [("ID", None, 7), ("Severity", None, 10), ("Rule", None, 18), ("Net", None, 22), ("Layer", None, 12),
            ("Finding", None, 90), ("Trace row", "0", 9), ("Disposition", None, 13), ("Reviewer", None, 14),
            ("Comment", None, 40)]
    fs = rv.findings
    sh = _Sheet(wb, "Findings", cols, fit={3: [f.net for f in fs], 4: [f.layer for f in fs],
                                           5: [f.message for f in fs]})
    n = max(len(rv.findings), 1)
    dv = DataValidation(type="list", formula1='"' + ",".join(DISPOSITIONS) + '"', allow_blank=True,
                        showErrorMessage=True, errorTitle="Disposition",
                        error="Choose accept, fix or waive")
    dv.add(f"H2:H{n + 1}")
    sh.ws.data_validations.append(dv)
    sh.header()
    for i, f in enumerate(rv.findings):
        sh.row([f"F{i + 1:04d}", f.severity, f.rule, f.net, f.layer, f.message, f.row, None, None, None],
               fill=SEVERITY_FILL[f.severity], fill_cols=(1,))
    sh.finish()


def _nets(wb: Workbook, rv: Review):
    cols = [("Net", None, 22), ("Class", None, 12), ("Pair", None, 14), ("Layers", None, 16), ("Segments", "0", 9),
            ("Length [mm]", "0.00", 11), ("Delay [ps]", "0.0", 10), ("Rise time [ps]", "0", 11),
            ("TD/Tr", "0.000", 8), ("Electrical", None, 16), ("Termination", None, 13),
            ("Series R [ohm]", "0", 12), ("Z at driver end [ohm]", "0.0", 12),
            ("Lumped limit [mm]", "0.0", 12), ("Critical length [mm]", "0.0", 13),
            ("Knee freq [GHz]", "0.000", 11), ("Wavelength at knee [mm]", "0.0", 13),
            ("Loss freq [GHz]", "0.000", 10), ("Insertion loss [dB]", "0.000", 11),
            ("Simulated termination", None, 40), ("Overshoot before [%]", "0.0", 11),
            ("Overshoot after [%]", "0.0", 11), ("Ringback before [%]", "0.0", 11), ("Ringback after [%]", "0.0", 11),
            ("Settled before [ns]", "0.00", 11), ("Settled after [ns]", "0.00", 11), ("Flight time [ns]", "0.000", 10),
            ("Termination power [mW]", "0.0", 12), ("Meets limits", None, 9), ("First-order advice", None, 80)]
    has_xt = "next_pct" in rv.nets.columns
    if has_xt:
        cols += [("Worst NEXT [%]", "0.00", 10), ("Worst FEXT [%]", "0.00", 10)]
    nets = rv.nets
    fit = {0: nets["net"], 1: nets["net_class"], 2: nets["pair"], 3: nets["layers"]}
    if "termination_part" in nets.columns:
        fit[19] = nets["termination_part"]
    sh = _Sheet(wb, "Nets", cols, fit=fit)
    sh.header()
    fills = {"required": SEVERITY_FILL["warning"], "recommended": SEVERITY_FILL["info"]}
    nets = rv.nets
    has_wave = "termination_part" in nets.columns
    for r in nets.itertuples(index=False):
        if has_wave and r.termination_part:
            wave = [r.termination_part, r.before_overshoot_pct, r.after_overshoot_pct, r.before_ringback_pct,
                    r.after_ringback_pct, r.before_settle_ns, r.after_settle_ns, r.after_flight_ns,
                    r.termination_power_w * 1e3, "yes" if r.waveform_meets_limits else "no"]
        else:
            wave = [None] * 10
        sh.row([r.net, r.net_class, r.pair, r.layers, int(r.segments), r.length * 1e3, r.delay * 1e12,
                r.rise_time * 1e12, r.td_over_tr, r.electrical, r.termination,
                None if r.series_ohm is None else float(r.series_ohm), r.z_driver_end,
                r.lumped_limit_length * 1e3, r.critical_length * 1e3, r.knee_hz * 1e-9,
                r.wavelength_at_knee * 1e3, r.freq * 1e-9, r.loss_db] + wave + [r.advice] +
               ([r.next_pct, r.fext_pct] if has_xt else []),
               fill=fills.get(r.termination), fill_cols=(10,))
    sh.finish()


def _segments(wb: Workbook, rv: Review):
    seg = rv.segments
    cols = [("Trace row", "0", 9), ("Net", None, 22), ("Pair", None, 14), ("Layer", None, 10), ("Kind", None, 11),
            ("Length [mm]", "0.000", 11), ("Width [mm]", "0.000", 10), ("Gap [mm]", "0.000", 9),
            ("Z0 [ohm]", "0.0", 9), ("Zdiff [ohm]", "0.0", 10), ("Zodd [ohm]", "0.0", 10), ("Zeven [ohm]", "0.0", 10),
            ("eps_eff", "0.000", 8), ("Delay [ps/mm]", "0.000", 11), ("Delay [ps]", "0.0", 10),
            ("L [nH/mm]", "0.0000", 10), ("C [pF/mm]", "0.0000", 10), ("Model", None, 20),
            ("Uncertainty [%]", "0.00", 11), ("Closed-form Z [ohm]", "0.0", 12), ("Freq [GHz]", "0.000", 9),
            ("Loss [dB/mm]", "0.0000", 10), ("Conductor [dB/mm]", "0.0000", 11), ("Dielectric [dB/mm]", "0.0000", 11),
            ("Loss [dB]", "0.000", 9)]
    has_xt = "next_pct" in seg.columns
    if has_xt:
        cols += [("Spacing [mm]", "0.000", 10), ("Coupled length [mm]", "0.0", 11), ("NEXT [%]", "0.00", 9),
                 ("FEXT [%]", "0.00", 9)]
    sh = _Sheet(wb, "Segments", cols, fit={1: seg["net"], 2: seg["pair"], 3: seg["layer"], 17: seg["model"]})
    sh.header()
    arr = {c: seg[c].to_numpy() for c in seg.columns}
    zf = np.where(arr["pair"] != "", arr["formula_zdiff"], arr["formula_z"])
    for i in range(len(seg)):
        sh.row([int(arr["row"][i]), arr["net"][i], arr["pair"][i], arr["layer"][i], arr["kind"][i],
                arr["length"][i] * 1e3, arr["width"][i] * 1e3, arr["gap"][i] * 1e3, arr["z0"][i], arr["zdiff"][i],
                arr["zodd"][i], arr["zeven"][i], arr["eps_eff"][i], arr["delay_per_m"][i] * 1e9,
                arr["delay"][i] * 1e12, arr["l_per_m"][i] * 1e6, arr["c_per_m"][i] * 1e9, arr["model"][i],
                arr["uncertainty_pct"][i], zf[i], arr["freq"][i] * 1e-9, arr["loss_db_per_m"][i] * 1e-3,
                arr["conductor_loss_db_per_m"][i] * 1e-3, arr["dielectric_loss_db_per_m"][i] * 1e-3,
                arr["loss_db"][i]] + ([arr["spacing"][i] * 1e3, arr["parallel"][i] * 1e3, arr["next_pct"][i],
                                       arr["fext_pct"][i]] if has_xt else []))
    sh.finish()


def _stackup(wb: Workbook, rv: Review):
    cols = [("#", "0", 4), ("Type", None, 11), ("Name", None, 14), ("Kind", None, 9), ("Thickness [mm]", "0.0000", 13),
            ("er", "0.00", 7), ("Loss tangent", "0.0000", 11), ("Line type", None, 11), ("References", None, 18),
            ("Below trace [mm]", "0.0000", 13), ("Above trace [mm]", "0.0000", 13)]
    sh = _Sheet(wb, "Stackup", cols)
    sh.header()
    for l in rv.stackup.layers:
        kind = refs = below = above = None
        if l.type == "signal":
            g = rv.stackup.geometry(l.name)
            kind, refs = g.kind, ", ".join(g.references)
            below = sum(s.thickness for s in g.below) * 1e3
            above = sum(s.thickness for s in g.above) * 1e3
        sh.row([l.index + 1, l.type, l.name, l.kind, l.thickness * 1e3, l.er, l.loss_tangent if l.er else None,
                kind, refs, below, above])
    sh.finish()


def _rules(wb: Workbook, rv: Review):
    from sicheck.rules import CHECKS
    r = rv.rules
    cols = [("Item", None, 26), ("Value", None, 18), ("Match / meaning", None, 70)]
    sh = _Sheet(wb, "Rules", cols)
    sh.header()
    for k, v, m in (("lumped_max_td_over_tr", r.lumped_max_td_over_tr, "lumped when TD/Tr at or below"),
                    ("required_min_td_over_tr", r.required_min_td_over_tr, "termination required when TD/Tr at or above"),
                    ("tolerance_pct", r.tolerance_pct, "default impedance tolerance, +/- %"),
                    ("z_step_pct", r.z_step_pct, "largest impedance step along a net before a finding, %"),
                    ("formula_field_pct", r.formula_field_pct, "closed form vs field solver difference that is reported, %")):
        sh.row([k, v, m])
    for c in CHECKS:
        sh.row([f"check {c.id}", r.severity[c.id], c.what])
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
        sh.row([f"class {c.name}", ", ".join(vals), " ".join(c.match) or "(by net_class column)"])
    sh.finish()


def _waveforms(wb: Workbook, rv: Review):
    """Before/after receiver waveforms of the worst nets, each with a native scatter chart."""
    from openpyxl.chart import Reference, ScatterChart, Series
    ws = wb.create_sheet("Waveforms")
    for col, width in zip("ABCD", (22, 11, 13, 13)):
        ws.column_dimensions[col].width = width
    nets = rv.nets.set_index("net")
    row = 1
    charts = []
    note = WriteOnlyCell(ws, value="Receiver voltage of the nets with the largest unterminated overshoot, "
                                   "without and with the simulated termination (method of characteristics).")
    note.font = BOLD
    ws.append([note])
    row += 1
    for net, (before, after, _) in rv.waves.items():
        if before is None or after is None:
            continue
        r = nets.loc[net]
        title = WriteOnlyCell(ws, value=f"{net}: {r['termination_part']}")
        title.font = BOLD
        ws.append([title])
        ws.append(["", "t [ns]", "unterminated [V]", "terminated [V]"])
        first = row + 2
        t_b, v_b = before
        t_a, v_a = after
        t_common = np.linspace(0.0, max(t_b[-1], t_a[-1]), 120)
        vb = np.interp(t_common, t_b, v_b)
        va = np.interp(t_common, t_a, v_a)
        for k in range(len(t_common)):
            ws.append([None, float(t_common[k] * 1e9), float(vb[k]), float(va[k])])
        last = first + len(t_common) - 1
        ch = ScatterChart()
        ch.title = f"{net}"
        ch.style = 13
        ch.x_axis.title = "t [ns]"
        ch.y_axis.title = "V"
        ch.height, ch.width = 7.5, 16
        xref = Reference(ws, min_col=2, min_row=first, max_row=last)
        for col, name, colour in ((3, "unterminated", "C8553D"), (4, "terminated", "2E6FAD")):
            ser = Series(Reference(ws, min_col=col, min_row=first, max_row=last), xref, title=name)
            ser.marker.symbol = "none"
            ser.smooth = False
            ser.graphicalProperties.line.solidFill = colour
            ser.graphicalProperties.line.width = 19050      # 1.5 pt
            ch.series.append(ser)
        charts.append((ch, f"F{row}"))
        row = last + 2
        ws.append([])
    for ch, anchor in charts:
        ws.add_chart(ch, anchor)


def write_workbook(rv: Review, target: str | Path, extra_sheets=None) -> None:
    """Write the review workbook atomically to ``target``."""
    wb = Workbook(write_only=True)
    _summary(wb, rv)
    _findings(wb, rv)
    _nets(wb, rv)
    _segments(wb, rv)
    _stackup(wb, rv)
    _rules(wb, rv)
    if rv.waves:
        _waveforms(wb, rv)
    if getattr(rv, "crosstalk", None) is not None:
        from sicheck.reports.crosstalk_report import crosstalk_sheet
        crosstalk_sheet(wb, rv)
    for fn in extra_sheets or ():
        fn(wb, rv)
    with atomic_path(target) as tmp:
        wb.save(tmp)
