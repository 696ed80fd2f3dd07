"""Crosstalk in the review's JSON and workbook: the per-layer coupling table and listed couplings.

Kept apart from json_report.py and workbook.py so those only call it; values are SI in the
review and scaled here (mm, ps, %).
"""

from __future__ import annotations

import math

import numpy as np


def _num(v, digits=6):
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return None if not math.isfinite(f) else float(f"{f:.{digits}g}")


def crosstalk_json(tables) -> dict:
    """`crosstalk` part of the review JSON: `sections[]` and `couplings[]`."""
    s = tables.sections
    sections = [{"layer": r.layer, "kind": r.kind, "width_mm": _num(r.width * 1e3), "spacing_mm": _num(r.spacing * 1e3),
                 "kb": _num(r.kb), "kf": _num(r.kf), "kf_ps_per_mm": _num(r.kf_s_per_m * 1e9),
                 "lm_over_ls": _num(r.lm_over_ls), "cm_over_cs": _num(r.cm_over_cs),
                 "coupled_z_ohm": _num(r.z_line), "coupled_delay_ps_per_mm": _num(r.delay_per_m * 1e9),
                 "l_matrix_nh_per_mm": [[_num(r.ls * 1e6), _num(r.lm * 1e6)], [_num(r.lm * 1e6), _num(r.ls * 1e6)]],
                 "c_matrix_pf_per_mm": [[_num(r.cs * 1e9), _num(-r.cm * 1e9)], [_num(-r.cm * 1e9), _num(r.cs * 1e9)]],
                 "model": r.model, "uncertainty_pct": _num(r.uncertainty_pct)}
                for r in s.itertuples(index=False)]
    couplings = []
    if tables.couplings is not None:
        couplings = [{"row": int(r.row), "victim": r.victim, "aggressor": r.aggressor, "layer": r.layer,
                      "width_mm": _num(r.width * 1e3), "spacing_mm": _num(r.spacing * 1e3),
                      "length_mm": _num(r.length * 1e3), "rise_ps": _num(r.rise * 1e12), "edge_from": r.edge_from,
                      "kb": _num(r.kb), "next_pct": _num(r.next_pct), "fext_pct": _num(r.fext_pct)}
                     for r in tables.couplings.itertuples(index=False)]
    waves = [{"victim": w["victim"], "aggressor": w["aggressor"], "layer": w["layer"],
              "spacing_mm": _num(w["spacing"] * 1e3), "length_mm": _num(w["length"] * 1e3),
              "rise_ps": _num(w["rise"] * 1e12), "swing_v": _num(w["swing"]),
              "aggressor_driver_ohm": _num(w["aggressor_driver_ohm"]),
              "victim_driver_ohm": _num(w["victim_driver_ohm"]),
              "victim_load_pf": _num(w["victim_load"] * 1e12), "aggressor_load_pf": _num(w["aggressor_load"] * 1e12),
              "near_peak_mv": _num(w["near_peak_v"] * 1e3), "far_peak_mv": _num(w["far_peak_v"] * 1e3)}
             for w in getattr(tables, "waves", [])]
    return {"sections": sections, "couplings": couplings, "waves": waves}


def crosstalk_sheets(rv) -> list:
    """The review workbook's crosstalk sheets for this review (none without crosstalk inputs), as
    workbook.write_workbook's extra_sheets."""
    if getattr(rv, "crosstalk", None) is None:
        return []
    return [crosstalk_sheet] + ([crosstalk_waves_sheet] if rv.crosstalk.waves else [])


def crosstalk_sheet(book, rv) -> None:
    """Sheet 'Crosstalk': each layer's coupling at the spacings used, then the listed couplings."""
    from sicheck.reports.workbook import _Sheet
    t = rv.crosstalk
    cols = [("Layer", None, 10), ("Kind", None, 11), ("Width [mm]", "0.000", 10), ("Spacing [mm]", "0.000", 11),
            ("Spacing / width", "0.00", 10), ("Kb (near end)", "0.00000", 11), ("kf (far end)", "0.00000", 11),
            ("kf [ps/mm]", "0.00000", 11), ("Lm/Ls", "0.00000", 10), ("Cm/Cs", "0.00000", 10),
            ("NEXT saturated [%]", "0.00", 12), ("Coupled Z [ohm]", "0.0", 11), ("Delay [ps/mm]", "0.000", 11),
            ("Model", None, 18), ("Uncertainty [%]", "0.00", 11)]
    sh = _Sheet(book, "Crosstalk", cols, fit={0: t.sections["layer"], 13: t.sections["model"]})
    sh.header()
    for r in t.sections.itertuples(index=False):
        sh.row([r.layer, r.kind, r.width * 1e3, r.spacing * 1e3, r.spacing / r.width, r.kb, r.kf, r.kf_s_per_m * 1e9,
                r.lm_over_ls, r.cm_over_cs, r.kb * 100.0, r.z_line, r.delay_per_m * 1e9, r.model, r.uncertainty_pct])
    sh.finish()
    if t.couplings is None:
        return
    cols = [("Coupling row", "0", 9), ("Victim", None, 18), ("Aggressor", None, 18), ("Layer", None, 10),
            ("Width [mm]", "0.000", 10), ("Spacing [mm]", "0.000", 11), ("Coupled length [mm]", "0.0", 12),
            ("Edge [ps]", "0", 9), ("Edge from", None, 24), ("Kb", "0.00000", 10), ("NEXT [%]", "0.00", 10),
            ("FEXT [%]", "0.00", 10)]
    c = t.couplings
    sh = _Sheet(book, "Couplings", cols, fit={1: c["victim"], 2: c["aggressor"], 8: c["edge_from"]})
    sh.header()
    for r in c.itertuples(index=False):
        sh.row([int(r.row), r.victim, r.aggressor, r.layer, r.width * 1e3, r.spacing * 1e3, r.length * 1e3,
                r.rise * 1e12, r.edge_from, r.kb, r.next_pct, r.fext_pct])
    sh.finish()


def plan_crosstalk_sheet(book, plan: dict) -> None:
    """Plan workbook sheet 'Spacing': the smallest spacing per layer for the crosstalk budget."""
    from sicheck.reports.workbook import _Sheet
    cols = [("Layer", None, 10), ("Line type", None, 11), ("Budget [%]", "0.00", 9), ("Width [mm]", "0.0000", 11),
            ("Spacing [mm]", "0.0000", 11), ("Spacing / width", "0.00", 10), ("For NEXT [mm]", "0.0000", 11),
            ("For FEXT [mm]", "0.0000", 11), ("NEXT saturated [%]", "0.000", 12), ("FEXT [%]", "0.000", 9),
            ("Coupled length [mm]", "0.0", 11), ("Rise [ps]", "0", 9), ("Notes", None, -60)]
    sh = _Sheet(book, "Spacing", cols)
    sh.header()
    for L in plan["layers"]:
        x = L.get("crosstalk")
        if x:
            sh.row([L["layer"], L["kind"], x.get("budget_pct"), x.get("width_mm"), x.get("spacing_mm"),
                    x.get("spacing_over_width"), x.get("spacing_for_next_mm"), x.get("spacing_for_fext_mm"),
                    x.get("next_saturated_pct"), x.get("fext_pct"), x.get("coupled_length_mm"), x.get("rise_ps"),
                    "; ".join(x.get("notes", []))])
    sh.finish()


WAVE_POINTS = 160


def crosstalk_waves_sheet(book, rv) -> None:
    """Sheet 'Crosstalk waves': the victim's near- and far-end noise of the worst couplings, one chart each
    (data in three columns per coupling from column M on), as the Waveforms sheet does for reflections."""
    from sicheck.reports.workbook import chart_sheet
    waves = rv.crosstalk.waves
    blocks = []
    for w in waves:
        t = np.linspace(0.0, float(w["t"][-1]), WAVE_POINTS)
        title = (f"{w['victim']} on {w['layer']} next to {w['aggressor']}: {w['spacing'] * 1e3:.3f} mm over "
                 f"{w['length'] * 1e3:.1f} mm, {w['rise'] * 1e12:.0f} ps edge of {w['swing']:g} V through "
                 f"{w['aggressor_driver_ohm']:g} ohm; victim driver {w['victim_driver_ohm']:g} ohm, receivers "
                 f"{w['victim_load'] * 1e12:g} pF; peaks {w['near_peak_v'] * 1e3:+.0f} mV near, "
                 f"{w['far_peak_v'] * 1e3:+.0f} mV far")
        blocks.append((w["victim"], title, np.column_stack([t * 1e9, np.interp(t, w["t"], w["near"]) * 1e3,
                                                            np.interp(t, w["t"], w["far"]) * 1e3]).tolist()))
    chart_sheet(book, "Crosstalk waves", "Victim noise of the worst couplings with the nets' own ends (driver "
                "resistances, receiver loads; lossless coupled run, modal solution). Data from column M on.",
                blocks, (("near end", "#C8553D"), ("far end", "#2E6FAD")), "mV", "0.0")
