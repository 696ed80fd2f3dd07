"""`sicheck review` and `sicheck demo`: read the inputs, review, print and write the reports."""

from __future__ import annotations

from pathlib import Path

from sicheck.errors import InputError


def run_review(traces: Path, stackup: Path, rules: list[Path] | None, out: Path | None, json_out: Path | None,
               solver: str, units: list[str] | None, maps: list[str] | None, sheet: str | None,
               quiet: bool = False, no_cache: bool = False, coupling: Path | None = None) -> int:
    from rich.console import Console

    from sicheck.reports.atomic import refuse_inputs, write_text_atomic
    from sicheck.reports.json_report import review_json
    from sicheck.reports.terminal import print_summary
    from sicheck.reports.workbook import write_workbook
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.solvers import solver_fn
    from sicheck.stackup import load_stackup
    from sicheck.traces import parse_map_option, parse_units_option, read_traces

    inputs = [traces, stackup] + list(rules or []) + ([coupling] if coupling is not None else [])
    if out is not None:
        refuse_inputs(out, inputs, "--out", suffix=".xlsx")
    if json_out is not None:
        refuse_inputs(json_out, inputs, "--json")
    if out is not None and json_out is not None and Path(out).resolve() == Path(json_out).resolve():
        raise InputError("--out and --json name the same file")
    st = load_stackup(stackup)
    rs = load_rule_sets(rules)
    aliases = dict(rs.columns)
    aliases.update(parse_map_option(maps))
    tl = read_traces(traces, parse_units_option(units), aliases, sheet)
    cp = None
    if coupling is not None:
        from sicheck.crosstalk_review import read_couplings
        cp = read_couplings(coupling, parse_units_option(units))
    rv = build_review(tl, st, rs, solver_fn(solver, no_cache, not quiet), solver, couplings=cp)
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


def run_demo(out: Path, json_out: Path | None, solver: str, no_cache: bool) -> int:
    """Review the bundled demo board; its findings are the point, so errors found still exit 0."""
    from sicheck.resources import default_rules_path, demo_dir
    d = demo_dir()
    code = run_review(d / "traces.csv", d / "stackup.toml", [default_rules_path(), d / "rules.toml"], out,
                      json_out, solver, None, None, None, no_cache=no_cache)
    return 0 if code in (0, 1) else code
