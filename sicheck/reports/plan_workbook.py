"""The plan as a workbook a designer can send to the fabricator."""

from __future__ import annotations

from pathlib import Path

from sicheck.reports.atomic import atomic_path
from sicheck.reports.workbook import Book, _Sheet, key_value_sheet


def write_plan_workbook(plan: dict, target: str | Path) -> None:
    with atomic_path(target) as tmp:
        book = Book(tmp)
        _write(book, plan)
        book.close()


def _write(wb: Book, plan: dict) -> None:
    key_value_sheet(wb, "Plan", "Impedance plan", [
        ("Stackup", plan["stackup"]), ("Stackup file", plan["stackup_file"]), ("Solver", plan["solver"]),
        ("Pair rule", plan["gap_rule"]), ("Minimum feature [mm]", plan["min_feature_mm"]),
        ("Loss frequencies [GHz]", ", ".join(f"{f:g}" for f in plan["freqs_ghz"])),
        ("Fabrication tolerances", plan.get("tolerances", "")),
        ("Caution", "Engineering estimates: the fabricator adjusts widths to hit impedance; confirm with "
                    "their impedance report and test coupons.")], widths=(28, 60))
    cols = [("Layer", None, 10), ("Line type", None, 11), ("Target", None, 12), ("Width [mm]", "0.0000", 11),
            ("Gap [mm]", "0.0000", 10), ("Achieved [ohm]", "0.00", 12), ("Error [%]", "+0.00;-0.00", 9),
            ("Uncertainty [%]", "0.00", 11), ("Band min [ohm]", "0.0", 8), ("Band max [ohm]", "0.0", 8),
            ("Band RSS +/- [ohm]", "0.0", 8), ("eps_eff", "0.000", 8), ("Delay [ps/mm]", "0.000", 11)]
    freqs = plan["freqs_ghz"]
    for f in freqs:
        cols.append((f"Loss at {f:g} GHz [dB/mm]", "0.00000", 14))
    cols.append(("Notes", None, -60))
    sh = _Sheet(wb, "Widths", cols)
    sh.header()
    for L in plan["layers"]:
        for kind, items in (("Z0", L["singles"]), ("Zdiff", L["pairs"])):
            for d in items:
                losses = [x["loss_db_per_mm"] for x in d["losses"]] + [None] * (len(freqs) - len(d["losses"]))
                sh.row([L["layer"], L["kind"], f"{kind} {d['target_ohm']:g} ohm", d["width_mm"], d["gap_mm"],
                        d["achieved_ohm"], d["error_pct"], d["uncertainty_pct"], d.get("band_min_ohm"),
                        d.get("band_max_ohm"), d.get("band_rss_ohm"), d["eps_eff"], d["delay_ps_per_mm"]]
                       + losses + ["; ".join(d["notes"])])
    sh.finish()
    if any("crosstalk" in L for L in plan["layers"]):
        from sicheck.reports.crosstalk_report import plan_crosstalk_sheet
        plan_crosstalk_sheet(wb, plan)
