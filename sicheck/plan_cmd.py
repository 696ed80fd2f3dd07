"""`sicheck plan`: per-layer widths for target impedances, with delay and loss."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from sicheck import plausible
from sicheck.errors import InputError
from sicheck.units import UnitError, option_frequency, parse_quantity


def parse_gap_rule(text: str):
    from sicheck.plan import GapRule
    t = text.strip().lower()
    if t in ("equal", "min"):
        return GapRule(t)
    if t.startswith("fixed:"):
        try:
            g = parse_quantity(t.split(":", 1)[1], "length")
        except UnitError as e:
            raise InputError(f"--gap-rule fixed: {e}") from None
        if not g > 0:
            raise InputError("--gap-rule fixed: the gap must be positive")
        return GapRule("fixed", g)
    raise InputError(f"--gap-rule must be 'equal', 'min' or 'fixed:<gap>' such as fixed:0.15mm (got '{text}')")


def _target_dict(t) -> dict:
    first = t.losses[0] if t.losses else {}
    return {"target_ohm": t.target, "width_mm": None if t.width is None else t.width * 1e3,
            "gap_mm": None if t.gap is None else t.gap * 1e3, "achieved_ohm": t.achieved, "error_pct": t.error_pct,
            "uncertainty_pct": t.uncertainty_pct, "eps_eff": t.eps_eff,
            "delay_ps_per_mm": None if t.delay_per_m is None else t.delay_per_m * 1e9,
            "conductor_loss_db_per_mm": first.get("conductor_loss_db_per_mm"),
            "dielectric_loss_db_per_mm": first.get("dielectric_loss_db_per_mm"),
            "loss_db_per_mm": first.get("loss_db_per_mm"), "losses": t.losses, "notes": t.notes,
            "solver_steps": t.steps, **_band_dict(t)}


def _band_dict(t) -> dict:
    """The fabrication band of the proposed width ([fabrication] tolerances; sicheck.physics.fab_band)."""
    lo, hi, rss = t.band if t.band is not None else (None, None, None)
    return {"band_min_ohm": lo, "band_max_ohm": hi, "band_rss_ohm": rss}


def build_plan(stackup: Path, z0: list[float], zdiff: list[float], gap_rule: str, freqs: list[str],
               solver: str, rules: list[Path] | None, no_cache: bool, crosstalk: str | None = None,
               coupled_length: str | None = None, rise: str | None = None) -> dict:
    from sicheck.checks.fabrication_band import describe, tolerances
    from sicheck.plan import add_bands, add_losses, synthesise
    from sicheck.rules import load_rule_sets
    from sicheck.solvers import solver_fn
    from sicheck.stackup import load_stackup
    st = load_stackup(stackup)
    rs = load_rule_sets(rules)
    if not z0 and not zdiff:
        raise InputError("give at least one --z0 or --zdiff target")
    for v, opt in [(v, "--z0") for v in z0] + [(v, "--zdiff") for v in zdiff]:
        if bad := plausible.check("impedance", v):
            raise InputError(f"{opt} {v:g} ohm: {bad}")
    rule = parse_gap_rule(gap_rule)
    f_hz = [option_frequency(f, "--freq") for f in freqs or ["1GHz"]]
    if solver not in ("field", "formula"):
        raise InputError("--solver must be 'field' or 'formula' for plan")
    solve = solver_fn(solver, no_cache, show_progress=False)
    xt_opts = _crosstalk_options(crosstalk, coupled_length, rise, z0, rs)
    layers, findings = [], []
    for lay in st.signal_layers:
        singles = [synthesise(st, lay.name, z, "z0", solve, rule, rs.min_feature, rs.max_width) for z in z0]
        pairs = [synthesise(st, lay.name, z, "zdiff", solve, rule, rs.min_feature, rs.max_width) for z in zdiff]
        add_losses(st, singles + pairs, f_hz, solve, rule, rs.min_feature)
        add_bands(st, singles + pairs, solve, rule, rs.min_feature, tolerances(rs))
        g = st.geometry(lay.name)
        entry = {"layer": lay.name, "kind": g.kind, "references": list(g.references),
                 "singles": [_target_dict(t) for t in singles], "pairs": [_target_dict(t) for t in pairs]}
        if singles:
            s0 = entry["singles"][0]
            entry.update(width_mm=s0["width_mm"], z0_ohm=s0["achieved_ohm"], z0_target_ohm=s0["target_ohm"],
                         delay_ps_per_mm=s0["delay_ps_per_mm"], eps_eff=s0["eps_eff"],
                         conductor_loss_db_per_mm=s0["conductor_loss_db_per_mm"],
                         dielectric_loss_db_per_mm=s0["dielectric_loss_db_per_mm"],
                         loss_db_per_mm=s0["loss_db_per_mm"], uncertainty_pct=s0["uncertainty_pct"])
        if pairs:
            p0 = entry["pairs"][0]
            entry.update(pair_width_mm=p0["width_mm"], pair_gap_mm=p0["gap_mm"], zdiff_ohm=p0["achieved_ohm"],
                         zdiff_target_ohm=p0["target_ohm"], pair_delay_ps_per_mm=p0["delay_ps_per_mm"],
                         pair_loss_db_per_mm=p0["loss_db_per_mm"])
        if xt_opts is not None:
            from sicheck.crosstalk_plan import layer_crosstalk
            entry["crosstalk"] = layer_crosstalk(st, lay.name, singles[0].width, xt_opts[0], solve, rs.min_feature,
                                                 xt_opts[1], xt_opts[2], xt_opts[3])
            findings += [{"rule": "plan", "severity": "warning", "layer": lay.name, "target":
                          f"crosstalk {xt_opts[0] * 100:g} %", "message": n} for n in entry["crosstalk"]["notes"]
                         if "within budget" not in n]
        for t in singles + pairs:
            for n in t.notes:
                findings.append({"rule": "plan", "severity": "warning", "layer": lay.name,
                                 "target": f"{'Z0' if t.what == 'z0' else 'Zdiff'} {t.target:g} ohm", "message": n})
        layers.append(entry)
    return {"stackup": st.name, "stackup_file": str(stackup), "solver": solver, "gap_rule": rule.describe(),
            "min_feature_mm": rs.min_feature * 1e3, "freqs_ghz": [f * 1e-9 for f in f_hz], "layers": layers,
            "tolerances": describe(tolerances(rs)),
            "findings": findings}


def _crosstalk_options(crosstalk, coupled_length, rise, z0, rs):
    """(near budget, coupled length m, rise s, far budget) for `plan --crosstalk`, or None without it.

    `--crosstalk rules` takes the rules' [crosstalk] max_next_pct and max_fext_pct (the defaults: 5 % each).
    """
    if crosstalk is None:
        if coupled_length is not None or rise is not None:
            raise InputError("--coupled-length and --rise go with --crosstalk")
        return None
    from sicheck.crosstalk_line import RISE_RANGE, option_quantity
    from sicheck.crosstalk_plan import parse_budget
    if not z0:
        raise InputError("--crosstalk spaces the width of the first --z0 target: give --z0")
    if (coupled_length is None) != (rise is None):
        raise InputError("the far-end budget needs both --coupled-length and --rise")
    if crosstalk.strip().lower() == "rules":
        near, far = rs.max_next_pct / 100.0, rs.max_fext_pct / 100.0
    else:
        near = far = parse_budget(crosstalk)
    return (near, option_quantity(coupled_length, "--coupled-length", "length", 0.0, 3.0),
            option_quantity(rise, "--rise", "time", *RISE_RANGE), far)


def run_plan(stackup, z0, zdiff, gap_rule, freqs, solver, rules, no_cache, as_json, out, crosstalk=None,
             coupled_length=None, rise=None) -> int:
    if out is not None:
        from sicheck.reports.atomic import refuse_inputs
        refuse_inputs(out, [stackup] + list(rules or []), "--out", suffix=".xlsx")
    plan = build_plan(stackup, z0, zdiff, gap_rule, freqs, solver, rules, no_cache, crosstalk, coupled_length, rise)
    if out is not None:
        from sicheck.reports.plan_workbook import write_plan_workbook
        write_plan_workbook(plan, out)
    if as_json:
        sys.stdout.write(json.dumps(plan, allow_nan=False, default=float) + "\n")
    else:
        _print(plan, out)
    return 1 if plan["findings"] else 0


def _band_text(d) -> str:
    if d.get("band_min_ohm") is None:
        return "-"
    return f"{d['band_min_ohm']:.1f}-{d['band_max_ohm']:.1f}"


def _f(v, fmt):
    return "-" if v is None else format(v, fmt)


def _print(plan: dict, out) -> None:
    from rich.console import Console
    from rich.table import Table
    con = Console(highlight=False)
    con.print(f"[bold]sicheck plan[/bold]  {plan['stackup']}  (solver: {plan['solver']}; pairs: {plan['gap_rule']}; "
              f"loss at {', '.join(f'{f:g}' for f in plan['freqs_ghz'])} GHz)")
    from rich import box
    # a light grid, one space between columns: ten columns fit an 80-column terminal
    t = Table(title="Widths for the targets", title_justify="left", box=box.SIMPLE_HEAD, padding=(0, 0),
              pad_edge=False, collapse_padding=True)
    for c in ("layer", "type", "target", "width\nmm", "gap\nmm", "Z\nohm", "err\n%", "band\nohm",
              "delay\nps/mm", "loss\ndB/mm"):
        t.add_column(c, overflow="fold", no_wrap=c in ("type", "band\nohm"))
    for L in plan["layers"]:
        for kind, items in (("Z0", L["singles"]), ("Zdiff", L["pairs"])):
            for d in items:
                t.add_row(L["layer"], L["kind"], f"{kind} {d['target_ohm']:g}", _f(d["width_mm"], ".4f"),
                          _f(d["gap_mm"], ".4f"), _f(d["achieved_ohm"], ".2f"), _f(d["error_pct"], "+.2f"),
                          _band_text(d), _f(d["delay_ps_per_mm"], ".3f"), _f(d["loss_db_per_mm"], ".5f"))
    con.print(t)
    con.print(f"band: worst case of the fabrication tolerances ({plan['tolerances']}; [fabrication] in the rules)",
              markup=False)
    if any("crosstalk" in L for L in plan["layers"]):
        from sicheck.crosstalk_plan import print_plan_crosstalk
        print_plan_crosstalk(con, plan, _f)
    for f in plan["findings"]:
        con.print(f"[yellow]warning[/] {f['layer']} {f['target']}: {f['message']}")
    if out is not None:
        con.print(f"workbook: {out}")
