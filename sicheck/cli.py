"""Command line: the thin shell around the review (typer).

Heavy modules are imported inside the commands so that ``sicheck --version`` is fast.
Every bad input ends with a one-line message on standard error and exit code 2.
"""

from __future__ import annotations

import sys
from enum import Enum
from pathlib import Path
from typing import Optional

import typer

from sicheck import __version__

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="Signal-integrity rule checker for PCB trace lists.")


class LineKind(str, Enum):
    microstrip = "microstrip"
    stripline = "stripline"


def _err_console():
    from rich.console import Console
    return Console(stderr=True, highlight=False)


def _version_callback(value: bool):
    if value:
        typer.echo(f"sicheck {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(version: bool = typer.Option(False, "--version", callback=_version_callback, is_eager=True,
                                       help="Print the version and exit.")):
    pass


SOLVERS = ("auto", "formula", "field")


def _solver_fn(name: str, no_cache: bool = False, show_progress: bool = True):
    """The function that solves a list of unique cross-sections for the chosen solver."""
    from sicheck.errors import InputError
    from sicheck.physics.formula import solve_formula
    if name not in SOLVERS:
        raise InputError(f"--solver must be one of {', '.join(SOLVERS)} (got '{name}')")
    if name == "formula":
        return solve_formula

    def field(xs_list):
        from sicheck.field_solve import AUTO_FIELD_LIMIT, solve_field_all
        if name == "auto" and len(xs_list) > AUTO_FIELD_LIMIT:
            _err_console().print(f"{len(xs_list)} unique cross-sections: more than {AUTO_FIELD_LIMIT}, so 'auto' "
                                 "uses the closed forms (use --solver field to force the field solver)")
            return solve_formula(xs_list)
        if not show_progress:
            return solve_field_all(xs_list, use_cache=not no_cache)
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
        with Progress(TextColumn("field-solving cross-sections"), BarColumn(), MofNCompleteColumn(),
                      TimeElapsedColumn(), console=_err_console(), transient=True) as bar:
            task = bar.add_task("solve", total=len(xs_list))
            return solve_field_all(xs_list, use_cache=not no_cache,
                                   progress=lambda done, total: bar.update(task, completed=done))
    return field


def run_review(traces: Path, stackup: Path, rules: list[Path] | None, out: Path | None, json_out: Path | None,
               solver: str, units: list[str] | None, maps: list[str] | None, sheet: str | None,
               quiet: bool = False, no_cache: bool = False, coupling: Path | None = None) -> int:
    from rich.console import Console

    from sicheck.errors import InputError
    from sicheck.reports.atomic import refuse_inputs, write_text_atomic
    from sicheck.reports.json_report import review_json
    from sicheck.reports.terminal import print_summary
    from sicheck.reports.workbook import write_workbook
    from sicheck.review import build_review
    from sicheck.rules import load_rules, Rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import parse_map_option, parse_units_option, read_traces

    inputs = [traces, stackup] + list(rules or []) + ([coupling] if coupling is not None else [])
    if out is not None:
        refuse_inputs(out, inputs, "--out")
    if json_out is not None:
        refuse_inputs(json_out, inputs, "--json")
    if out is not None and json_out is not None and Path(out).resolve() == Path(json_out).resolve():
        raise InputError("--out and --json name the same file")
    st = load_stackup(stackup)
    rs: Rules | None = None
    for p in (rules or [None]):
        nxt = load_rules(p)
        rs = nxt if rs is None else _merge_rules(rs, nxt)
    assert rs is not None
    aliases = dict(rs.columns)
    aliases.update(parse_map_option(maps))
    tl = read_traces(traces, parse_units_option(units), aliases, sheet)
    cp = None
    if coupling is not None:
        from sicheck.crosstalk_review import read_couplings
        cp = read_couplings(coupling, parse_units_option(units))
    rv = build_review(tl, st, rs, _solver_fn(solver, no_cache, not quiet), solver, couplings=cp)
    console = Console(highlight=False)
    if not quiet:
        print_summary(rv, console)
    if out is not None:
        write_workbook(rv, out)
        if not quiet:
            console.print(f"workbook: {out}")
    if json_out is not None:
        write_text_atomic(json_out, review_json(rv))
        if not quiet:
            console.print(f"json: {json_out}")
    return rv.exit_code


def _merge_rules(base, extra):
    """Rule sets given with several --rules: later ones override and add classes."""
    from dataclasses import replace
    classes = [c for c in base.classes if all(c.name.lower() != e.name.lower() for e in extra.classes)]
    sev = dict(base.severity)
    sev.update({k: v for k, v in extra.severity.items()})
    cols = dict(base.columns)
    cols.update(extra.columns)
    return replace(extra, classes=tuple(classes) + extra.classes, severity=sev, columns=cols,
                   sources=base.sources + extra.sources)


@app.command()
def review(
    traces: Path = typer.Argument(..., help="Trace list, .csv or .xlsx (one row per segment)."),
    stackup: Path = typer.Option(..., "--stackup", "-s", help="Stackup file (.toml)."),
    rules: Optional[list[Path]] = typer.Option(None, "--rules", "-r",
                                               help="Rule set file or folder; repeat to layer sets. "
                                                    "Default: the shipped rules."),
    out: Optional[Path] = typer.Option(None, "--out", "-o", help="Review workbook to write (.xlsx)."),
    json_out: Optional[Path] = typer.Option(None, "--json", help="JSON results to write."),
    solver: str = typer.Option("auto", "--solver", help="auto (field solver, closed forms beside it; closed "
                                                        "forms alone for very many cross-sections), field or "
                                                        "formula."),
    no_cache: bool = typer.Option(False, "--no-cache", help="Do not read or write the field-solver cache."),
    units: Optional[list[str]] = typer.Option(None, "--units", help="Unit for bare numbers, e.g. mm or ps "
                                                                     "(repeat or comma-separate)."),
    maps: Optional[list[str]] = typer.Option(None, "--map", help="Rename an export header: 'Net Name=net'."),
    sheet: Optional[str] = typer.Option(None, "--sheet", help="Worksheet of an .xlsx trace list."),
    coupling: Optional[Path] = typer.Option(None, "--coupling", help="Crosstalk: CSV/XLSX of parallel runs (victim, "
                                                                     "aggressor, layer, spacing, length)."),
):
    """Review a board's trace list against its stackup; exit 1 when there are errors."""
    raise typer.Exit(run_review(traces, stackup, rules, out, json_out, solver, units, maps, sheet,
                                no_cache=no_cache, coupling=coupling))


@app.command()
def demo(
    out: Path = typer.Option(Path("sicheck-demo-review.xlsx"), "--out", "-o", help="Workbook to write."),
    json_out: Optional[Path] = typer.Option(None, "--json", help="Also write the JSON results here."),
    solver: str = typer.Option("auto", "--solver", help="Impedance solver: auto, field or formula."),
    no_cache: bool = typer.Option(False, "--no-cache", help="Do not use the field-solver cache."),
):
    """Review the bundled demo board and write its workbook in the current folder."""
    from sicheck.resources import default_rules_path, demo_dir
    d = demo_dir()
    code = run_review(d / "traces.csv", d / "stackup.toml", [default_rules_path(), d / "rules.toml"], out,
                      json_out, solver, None, None, None, no_cache=no_cache)
    # The demo board breaks some rules on purpose: its findings are the point, not a failure.
    raise typer.Exit(0 if code in (0, 1) else code)


@app.command("rules")
def rules_cmd(rules: Optional[list[Path]] = typer.Option(None, "--rules", "-r", help="Rule set to list.")):
    """List every check with its parameters and the net classes of a rule set."""
    from rich.console import Console
    from rich.table import Table

    from sicheck.rules import CHECKS, load_rules
    rs = None
    for p in (rules or [None]):
        nxt = load_rules(p)
        rs = nxt if rs is None else _merge_rules(rs, nxt)
    con = Console(highlight=False)
    con.print(f"rule sets: {', '.join(rs.sources)}")
    t = Table(title="Checks", title_justify="left")
    t.add_column("rule")
    t.add_column("severity")
    t.add_column("what it checks", overflow="fold")
    for c in CHECKS:
        t.add_row(c.id, rs.severity[c.id], c.what)
    con.print(t)
    t = Table(title="Parameters", title_justify="left")
    t.add_column("parameter")
    t.add_column("value")
    for k in ("lumped_max_td_over_tr", "required_min_td_over_tr", "tolerance_pct", "z_step_pct", "formula_field_pct"):
        t.add_row(k, f"{getattr(rs, k):.4g}")
    con.print(t)
    t = Table(title="Net classes", title_justify="left")
    for col in ("class", "match", "Z0", "Zdiff", "tol %", "rise time", "width", "gap", "driver"):
        t.add_column(col, overflow="fold")
    for c in rs.classes:
        t.add_row(c.name, " ".join(c.match), _g(c.z0), _g(c.zdiff), _g(rs.tolerance_for(c)),
                  _g(c.rise_time, 1e12, " ps"), _g(c.width, 1e3, " mm"), _g(c.gap, 1e3, " mm"),
                  _g(c.driver_ohm, 1, " ohm"))
    con.print(t)


def _g(v, scale=1.0, suffix=""):
    return "" if v is None else f"{v * scale:g}{suffix}"


@app.command()
def line(
    kind: LineKind = typer.Argument(..., help="microstrip or stripline"),
    width: str = typer.Option(..., "--width", "-w", help="Trace width (bottom width of the etched trace)."),
    thickness: str = typer.Option(..., "--thickness", "-t", help="Copper thickness."),
    er: Optional[float] = typer.Option(None, "--er", help="Relative permittivity of the dielectric."),
    height: Optional[str] = typer.Option(None, "--height", "-h",
                                         help="Microstrip: trace bottom to plane. Stripline: plane-to-plane "
                                              "spacing with the trace centred."),
    below: Optional[str] = typer.Option(None, "--below", help="Dielectric from the trace's bottom face to the "
                                                               "plane beneath."),
    above: Optional[str] = typer.Option(None, "--above", help="Stripline: dielectric from the trace's top face to "
                                                               "the plane above (it also fills beside the trace)."),
    er_below: Optional[float] = typer.Option(None, "--er-below", help="er under the trace (default --er)."),
    er_above: Optional[float] = typer.Option(None, "--er-above", help="er above and beside the trace (default --er)."),
    gap: Optional[str] = typer.Option(None, "--gap", help="Edge-to-edge gap of an edge-coupled pair."),
    mask: Optional[str] = typer.Option(None, "--mask", help="Microstrip: conformal solder-mask thickness."),
    mask_er: Optional[float] = typer.Option(None, "--mask-er", help="Solder-mask er."),
    length: Optional[str] = typer.Option(None, "--length", help="Line length, for its delay."),
    etch_factor: Optional[float] = typer.Option(None, "--etch-factor", help="Trapezoidal etch: thickness over "
                                                                             "one side's undercut."),
    top_width: Optional[str] = typer.Option(None, "--top-width", help="Trapezoidal etch: width of the top face."),
    solver: str = typer.Option("formula", "--solver", help="formula (closed form) or field (2D field solver)."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Draw the cross-section and its equipotentials "
                                                             "(PNG)."),
    freq: Optional[str] = typer.Option(None, "--freq", help="Frequency for loss per length, e.g. 5GHz (--er and "
                                                            "--loss-tangent are taken as they are there)."),
    loss_tangent: Optional[float] = typer.Option(None, "--loss-tangent", help="Loss tangent of the dielectric."),
    roughness: Optional[str] = typer.Option(None, "--roughness", help="RMS copper roughness (Hammerstad-Jensen)."),
    huray_radius: Optional[str] = typer.Option(None, "--huray-radius", help="Huray model: copper ball radius."),
    huray_ratio: Optional[float] = typer.Option(None, "--huray-ratio", help="Huray model: ball surface per flat "
                                                                            "area."),
    units: str = typer.Option("mm", "--units", help="Unit for bare numbers (mm, um, mil, in)."),
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object on standard output."),
    spacing: Optional[str] = typer.Option(None, "--spacing", help="Crosstalk: edge-to-edge spacing to a neighbour "
                                                                  "of the same width (coupling, NEXT, FEXT)."),
    rise: Optional[str] = typer.Option(None, "--rise", help="Crosstalk: aggressor's 10-90 % rise time; with "
                                                            "--length (the coupled length) gives NEXT and FEXT."),
    swing: Optional[str] = typer.Option(None, "--swing", help="Crosstalk: aggressor driver swing, for the noise "
                                                              "in volts (with --driver-ohm)."),
    driver_ohm: Optional[str] = typer.Option(None, "--driver-ohm", help="Crosstalk: aggressor driver resistance."),
):
    """Impedance, delay, L/C and loss of one cross-section; crosstalk with --spacing."""
    from sicheck.line_cmd import run_line
    run_line(kind.value, width, thickness, er, height, below, above, er_below, er_above, gap, mask, mask_er,
             length, solver, units, as_json, etch_factor=etch_factor, top_width=top_width, plot=plot, freq=freq,
             loss_tangent=loss_tangent, roughness=roughness, huray_radius=huray_radius, huray_ratio=huray_ratio,
             spacing=spacing, rise=rise, swing=swing, driver_ohm=driver_ohm)


@app.command()
def plan(
    stackup: Path = typer.Argument(..., help="Stackup file (.toml)."),
    z0: Optional[list[float]] = typer.Option(None, "--z0", help="Single-ended target in ohm (repeatable)."),
    zdiff: Optional[list[float]] = typer.Option(None, "--zdiff", help="Differential target in ohm (repeatable)."),
    gap_rule: str = typer.Option("equal", "--gap-rule", help="How pairs pick their gap: equal (gap = width), "
                                                             "min (the rules' minimum feature) or fixed:<gap>."),
    freq: Optional[list[str]] = typer.Option(None, "--freq", help="Frequency for loss per length (repeatable; "
                                                                  "default 1GHz)."),
    solver: str = typer.Option("field", "--solver", help="field (default) or formula."),
    rules: Optional[list[Path]] = typer.Option(None, "--rules", "-r", help="Rule set (minimum feature, maximum "
                                                                           "width)."),
    no_cache: bool = typer.Option(False, "--no-cache", help="Do not use the field-solver cache."),
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object on standard output."),
    out: Optional[Path] = typer.Option(None, "--out", "-o", help="Plan workbook to write (.xlsx)."),
    crosstalk: Optional[str] = typer.Option(None, "--crosstalk", help="Crosstalk budget, e.g. 3%: the smallest "
                                                                      "spacing per layer for the first --z0 width."),
    coupled_length: Optional[str] = typer.Option(None, "--coupled-length", help="Crosstalk: coupled length for "
                                                                                "the far-end budget, e.g. 50mm."),
    rise: Optional[str] = typer.Option(None, "--rise", help="Crosstalk: aggressor rise time (10-90 %) for the "
                                                            "far-end budget."),
):
    """Widths (and width/gap pairs) for target impedances on every signal layer, with delay and loss."""
    from sicheck.plan_cmd import run_plan
    raise typer.Exit(run_plan(stackup, z0 or [], zdiff or [], gap_rule, freq or [], solver, rules, no_cache,
                              as_json, out, crosstalk, coupled_length, rise))


@app.command()
def wave(
    z0: list[str] = typer.Option(..., "--z0", help="Line impedance (repeat with --delay for a chain, driver end "
                                                   "first)."),
    delay: list[str] = typer.Option(..., "--delay", help="One-way delay of the line, e.g. 1ns."),
    driver_ohm: str = typer.Option(..., "--driver-ohm", help="Driver output resistance."),
    swing: str = typer.Option(..., "--swing", help="Driver swing, e.g. 3.3V."),
    rise: str = typer.Option(..., "--rise", help="10-90 % rise time; the ramp is linear, 0-100 % in rise/0.8."),
    series_ohm: Optional[str] = typer.Option(None, "--series-ohm", help="Series resistor at the driver."),
    load_pf: Optional[str] = typer.Option(None, "--load-pf", help="Receiver input capacitance (pF)."),
    end_ohm: Optional[str] = typer.Option(None, "--end-ohm", help="Termination resistor at the receiver."),
    end_volts: Optional[str] = typer.Option(None, "--end-volts", help="Voltage the termination resistor goes to "
                                                                      "(default 0 V)."),
    end_cap: Optional[str] = typer.Option(None, "--end-cap", help="Capacitor in series with --end-ohm (an RC "
                                                                  "termination to ground), pF."),
    end_up: Optional[str] = typer.Option(None, "--end-up", help="Thevenin termination: resistor from the receiver "
                                                                "to the supply (the swing)."),
    end_down: Optional[str] = typer.Option(None, "--end-down", help="Thevenin termination: resistor from the "
                                                                    "receiver to ground."),
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object on standard output."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Draw the waveforms (PNG)."),
):
    """Receiver waveform and its metrics for one line driven by a ramp."""
    from sicheck.wave_cmd import run_wave
    run_wave(z0, delay, driver_ohm, swing, rise, series_ohm, load_pf, end_ohm, end_volts, end_cap, as_json, plot,
             end_up, end_down)


def main(argv: list[str] | None = None) -> None:
    """Entry point: maps InputError to exit 2 and keeps tracebacks away from users."""
    args = sys.argv[1:] if argv is None else argv
    if args == ["--version"]:
        print(f"sicheck {__version__}")
        return
    from sicheck.errors import InputError
    try:
        app(args=args, prog_name="sicheck", standalone_mode=True)
    except InputError as e:
        from rich.markup import escape
        _err_console().print(f"[bold red]error:[/] {escape(str(e))}", soft_wrap=True)
        sys.exit(2)
    except SystemExit:
        raise
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        sys.exit(130)
    except Exception as e:  # a bug: say so in one line, without a traceback
        print(f"sicheck: internal error: {type(e).__name__}: {e} (please report it with the input files)",
              file=sys.stderr)
        sys.exit(3)
