"""Command line: the typer app, nothing else (no module imports it but ``__main__``).

Each command hands its options to its own module (review_cmd, line_cmd, wave_cmd, plan_cmd,
rules_cmd), imported inside the command so that ``sicheck --version`` is fast.
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
                  context_settings={"help_option_names": ["-h", "--help"]},
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
    previous: Optional[Path] = typer.Option(None, "--previous", help="An earlier review (its signed .xlsx or its "
                                                                     ".json): carry its decisions over and mark "
                                                                     "findings new, changed or unchanged."),
    change_pct: Optional[float] = typer.Option(None, "--change-pct", help="With --previous: a finding whose value "
                                                                          "moved by more than this % is 'changed' "
                                                                          "(default 1)."),
    waivers: Optional[Path] = typer.Option(None, "--waivers", help="Waiver file (.toml): waived findings keep "
                                                                   "their severity but do not fail the review."),
    markdown: Optional[Path] = typer.Option(None, "--markdown", help="Short Markdown summary to write (for a CI "
                                                                     "page or a pull-request comment)."),
    no_band: bool = typer.Option(False, "--no-band", help="Skip the fabrication band (its extra solves: up to "
                                                          "8x the field-solver time on a cold cache)."),
):
    """Review a board's trace list against its stackup; exit 1 when there are errors not waived."""
    from sicheck.review_cmd import run_review
    raise typer.Exit(run_review(traces, stackup, rules, out, json_out, solver, units, maps, sheet,
                                no_cache=no_cache, previous=previous, waivers=waivers, change_pct=change_pct,
                                markdown=markdown, coupling=coupling, band=not no_band))


@app.command()
def compare(
    first: Path = typer.Argument(..., help="OLD.json (a review's --json), or the trace list for the what-if form."),
    second: Optional[Path] = typer.Argument(None, help="NEW.json (omit for the what-if form)."),
    stackup: Optional[list[Path]] = typer.Option(None, "--stackup", "-s", help="What-if form: give two stackups; "
                                                                               "the trace list is reviewed on each."),
    rules: Optional[list[Path]] = typer.Option(None, "--rules", "-r", help="What-if form: rule set (repeatable)."),
    out: Optional[Path] = typer.Option(None, "--out", "-o", help="Comparison workbook to write (.xlsx)."),
    json_out: Optional[Path] = typer.Option(None, "--json", help="Comparison as JSON."),
    markdown: Optional[Path] = typer.Option(None, "--markdown", help="Short Markdown summary to write."),
    threshold_pct: float = typer.Option(2.0, "--threshold-pct", help="A number (impedance, delay, loss, a finding's "
                                                                     "value) has changed when it moved by more "
                                                                     "than this %."),
    solver: str = typer.Option("auto", "--solver", help="What-if form: auto, field or formula."),
    no_cache: bool = typer.Option(False, "--no-cache", help="Do not use the field-solver cache."),
    units: Optional[list[str]] = typer.Option(None, "--units", help="What-if form: unit for bare numbers."),
    maps: Optional[list[str]] = typer.Option(None, "--map", help="What-if form: rename an export header."),
    sheet: Optional[str] = typer.Option(None, "--sheet", help="What-if form: worksheet of an .xlsx trace list."),
):
    """What changed between two reviews, per net; exit 1 when the change introduces an error finding."""
    from sicheck.compare_cmd import run_compare
    raise typer.Exit(run_compare(first, second, stackup, rules, out, json_out, markdown, threshold_pct, solver,
                                 units, maps, sheet, no_cache))


@app.command("waivers")
def waivers_cmd(
    signed: Path = typer.Argument(..., help="A signed review: the workbook (.xlsx) or JSON with dispositions."),
    until: Optional[str] = typer.Option(None, "--until", help="Give every waiver this end date (YYYY-MM-DD)."),
    out: Optional[Path] = typer.Option(None, "--out", "-o", help="Write the file here instead of standard output."),
):
    """Turn the accepted and waived findings of a signed review into a waiver file (TOML)."""
    from sicheck.waivers_cmd import run_waivers
    raise typer.Exit(run_waivers(signed, until, out))


@app.command()
def demo(
    out: Path = typer.Option(Path("sicheck-demo-review.xlsx"), "--out", "-o", help="Workbook to write."),
    json_out: Optional[Path] = typer.Option(None, "--json", help="Also write the JSON results here."),
    solver: str = typer.Option("auto", "--solver", help="Impedance solver: auto, field or formula."),
    no_cache: bool = typer.Option(False, "--no-cache", help="Do not use the field-solver cache."),
):
    """Review the bundled demo board and write its workbook in the current folder."""
    from sicheck.review_cmd import run_demo
    raise typer.Exit(run_demo(out, json_out, solver, no_cache))


@app.command("rules")
def rules_cmd(rules: Optional[list[Path]] = typer.Option(None, "--rules", "-r", help="Rule set to list; repeat "
                                                                                    "to layer sets.")):
    """List every check with its parameters and the net classes of a rule set."""
    from sicheck.rules_cmd import run_rules
    raise typer.Exit(run_rules(rules))


@app.command()
def line(
    kind: LineKind = typer.Argument(..., help="microstrip or stripline"),
    width: str = typer.Option(..., "--width", "-w", help="Trace width (bottom width of the etched trace)."),
    thickness: str = typer.Option(..., "--thickness", "-t", help="Copper thickness."),
    er: Optional[float] = typer.Option(None, "--er", help="Relative permittivity of the dielectric."),
    height: Optional[str] = typer.Option(None, "--height",
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
    mask_loss_tangent: Optional[float] = typer.Option(None, "--mask-loss-tangent",
                                                      help="Loss tangent of the solder mask (default 0)."),
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
    victim_ohm: Optional[str] = typer.Option(None, "--victim-ohm", help="Crosstalk with real ends: the victim's "
                                                                        "driver resistance (default --driver-ohm)."),
    load_pf: Optional[str] = typer.Option(None, "--load-pf", help="Crosstalk with real ends: receiver load at both "
                                                                  "far ends (pF): the victim's noise peaks."),
):
    """Impedance, delay, L/C and loss of one cross-section; crosstalk with --spacing."""
    from sicheck.line_cmd import run_line
    run_line(kind.value, width, thickness, er, height, below, above, er_below, er_above, gap, mask, mask_er,
             length, solver, units, as_json, etch_factor=etch_factor, top_width=top_width, plot=plot, freq=freq,
             loss_tangent=loss_tangent, roughness=roughness, huray_radius=huray_radius, huray_ratio=huray_ratio,
             mask_loss_tangent=mask_loss_tangent, spacing=spacing, rise=rise, swing=swing, driver_ohm=driver_ohm,
             victim_ohm=victim_ohm, load_pf=load_pf)


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
    crosstalk: Optional[str] = typer.Option(None, "--crosstalk", help="Crosstalk budget, e.g. 3%, or 'rules' (the "
                                                                      "rules' max_next_pct/max_fext_pct): the smallest "
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
    loss: Optional[list[str]] = typer.Option(None, "--loss", help="A line's total insertion loss at a frequency, "
                                                                 "DB@FREQ (e.g. 4dB@1GHz); one per --z0."),
    dielectric_share: Optional[list[str]] = typer.Option(None, "--dielectric-share",
                                                         help="Part of that loss that is dielectric, 0-1 (once for "
                                                              "all lines or once per line; default 0.5)."),
    rdc: Optional[list[str]] = typer.Option(None, "--rdc", help="A line's DC resistance, ohm (once for all lines or "
                                                               "once per line; default 0: skin effect only)."),
):
    """Receiver waveform and its metrics for one line (or a chain) driven by a ramp, lossless or lossy."""
    from sicheck.wave_cmd import run_wave
    run_wave(z0, delay, driver_ohm, swing, rise, series_ohm, load_pf, end_ohm, end_volts, end_cap, as_json, plot,
             end_up, end_down, loss, dielectric_share, rdc)


def main(argv: list[str] | None = None) -> None:
    """Entry point: maps InputError to exit 2 and keeps tracebacks away from users."""
    args = sys.argv[1:] if argv is None else argv
    if args == ["--version"]:
        print(f"sicheck {__version__}")
        return
    from sicheck import quick_exit
    from sicheck.errors import InputError
    if argv is None:            # the program itself, not a caller in its own process (tests, scripts)
        quick_exit.allow()
    try:
        app(args=args, prog_name="sicheck", standalone_mode=True)
    except InputError as e:
        from rich.markup import escape
        _err_console().print(f"[bold red]error:[/] {escape(str(e))}", soft_wrap=True)
        sys.exit(2)
    except SystemExit as e:
        if argv is None:
            quick_exit.end_now(e.code)      # returns unless the command left a large review to drop
        raise
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        sys.exit(130)
    except Exception as e:  # a bug: say so in one line, without a traceback
        print(f"sicheck: internal error: {type(e).__name__}: {e} (please report it with the input files)",
              file=sys.stderr)
        sys.exit(3)
