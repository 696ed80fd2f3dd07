"""`sicheck review` and `sicheck demo`: read the inputs, review, print and write the reports."""

from __future__ import annotations

import gc
from contextlib import contextmanager
from pathlib import Path

from sicheck.errors import InputError


def run_review(traces: Path, stackup: Path, rules: list[Path] | None, out: Path | None, json_out: Path | None,
               solver: str, units: list[str] | None, maps: list[str] | None, sheet: str | None,
               quiet: bool = False, no_cache: bool = False, previous: Path | None = None,
               waivers: Path | None = None, change_pct: float | None = None,
               markdown: Path | None = None, coupling: Path | None = None, band: bool = True) -> int:
    from rich.console import Console

    from sicheck.reports.atomic import refuse_inputs, write_text_atomic
    from sicheck.reports.terminal import print_summary
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.solvers import solver_fn
    from sicheck.stackup import load_stackup
    from sicheck.traces import parse_map_option, parse_units_option, read_traces

    inputs = [traces, stackup] + list(rules or []) + [p for p in (previous, waivers, coupling) if p is not None]
    if out is not None:
        refuse_inputs(out, inputs, "--out", suffix=".xlsx")
    if json_out is not None:
        refuse_inputs(json_out, inputs, "--json")
    if out is not None and json_out is not None and Path(out).resolve() == Path(json_out).resolve():
        raise InputError("--out and --json name the same file")
    if markdown is not None:
        refuse_inputs(markdown, inputs, "--markdown")
        if any(o is not None and Path(o).resolve() == Path(markdown).resolve() for o in (out, json_out)):
            raise InputError("--markdown names the same file as --out or --json")
    # the sign-off inputs are read first: a typo there should not cost a whole review
    prior, wv = _signoff_inputs(previous, waivers, change_pct)
    st = load_stackup(stackup)
    rs = load_rule_sets(rules)
    aliases = dict(rs.columns)
    aliases.update(parse_map_option(maps))
    with _collector_less_often():
        tl = read_traces(traces, parse_units_option(units), aliases, sheet)
        cp = None
        if coupling is not None:
            from sicheck.crosstalk_review import read_couplings
            cp = read_couplings(coupling, parse_units_option(units))
        rv = build_review(tl, st, rs, solver_fn(solver, no_cache, not quiet), solver, couplings=cp, band=band)
    if previous is not None or waivers is not None:
        from sicheck.signoff import CHANGE_PCT, sign_off
        rv.findings, rv.signoff = sign_off(rv.findings, prior, None if previous is None else str(previous), wv,
                                           None if waivers is None else str(waivers),
                                           change_pct=CHANGE_PCT if change_pct is None else change_pct)
    console = Console(highlight=False)
    if not quiet:
        print_summary(rv, console)
        _print_signoff(rv, console)
    _write_reports(rv, out, json_out, console, quiet)
    if markdown is not None:
        from sicheck.reports.markdown import review_markdown
        write_text_atomic(markdown, review_markdown(rv))
        if not quiet:
            console.print(f"markdown: {markdown}")
    code = rv.exit_code
    from sicheck.quick_exit import keep
    keep(rv, tl)            # the program ends next: not freed one object at a time first (sicheck/quick_exit.py)
    return code


@contextmanager
def _collector_less_often():
    """Reading a large board and building its review make millions of objects that live to the end: the
    garbage collector's youngest generation is let grow 70 times larger meanwhile (a tenth less CPU on a
    100 000-segment board), so it walks that heap far less often."""
    before = gc.get_threshold()
    gc.set_threshold(50_000, 20, 100)
    try:
        yield
    finally:
        gc.set_threshold(*before)


def _write_reports(rv, out: Path | None, json_out: Path | None, console, quiet: bool) -> None:
    """The workbook here and, at the same time, the JSON in a forked child (reports/forked.py): two cores for
    the two slowest reports of a large board. Each file is written atomically; an error in either is raised here."""
    # the reports make millions of small objects and hardly any cycles: the collector's passes over the
    # review's large heap cost a quarter of their time. It is off meanwhile (in the forked child too) and
    # collects what is left once it is back on.
    collecting = gc.isenabled()
    gc.disable()
    try:
        _write_both(rv, out, json_out, console, quiet)
    finally:
        if collecting:
            gc.enable()
    if json_out is not None and not quiet:
        console.print(f"json: {json_out}")


def _write_both(rv, out: Path | None, json_out: Path | None, console, quiet: bool) -> None:
    from contextlib import ExitStack

    from sicheck.reports.atomic import atomic_path
    from sicheck.reports.forked import forked
    from sicheck.reports.json_report import write_review_json
    from sicheck.reports.workbook import write_workbook
    if json_out is not None and out is not None:
        rv.net_counts                   # both reports read it: worked out once, before the JSON's process forks
    with ExitStack() as json_job:
        if json_out is not None:
            tmp = json_job.enter_context(atomic_path(json_out))     # renamed into place once the child is done
            if out is not None:         # a second report to write meanwhile: the JSON goes to a child
                json_job.enter_context(forked(lambda: write_review_json(tmp, rv)))
            else:
                write_review_json(tmp, rv)
        if out is not None:
            from sicheck.reports.crosstalk_report import crosstalk_sheets
            extra = crosstalk_sheets(rv)
            if rv.signoff is not None and rv.signoff.previous:
                from sicheck.reports.changes_sheet import changes_sheet
                extra.append(changes_sheet)
            write_workbook(rv, out, extra_sheets=extra)
            if not quiet:
                console.print(f"workbook: {out}")


def _signoff_inputs(previous: Path | None, waivers: Path | None, change_pct: float | None):
    prior = wv = None
    if change_pct is not None and not (0 <= change_pct < 100):
        raise InputError(f"--change-pct must be from 0 to 100 (a percentage), not {change_pct:g}")
    if change_pct is not None and previous is None:
        raise InputError("--change-pct needs --previous (it says when a finding's value has changed)")
    if previous is not None:
        from sicheck.signoff import read_previous
        prior = read_previous(previous)
    if waivers is not None:
        from sicheck.waivers import load_waivers
        wv = load_waivers(waivers)
    return prior, wv


def _print_signoff(rv, console) -> None:
    from rich.markup import escape

    from sicheck.reports.signoff_columns import changes_sentence
    so = rv.signoff
    if so is None:
        return
    if so.previous:
        console.print(f"since {escape(Path(so.previous).name)}: {changes_sentence(so)}")
    if so.waivers:
        n = so.counts()["waived"]
        console.print(f"waived: {n} finding{'s' if n != 1 else ''} (kept with their severity; not counted for "
                      "the exit code)")
        shown = [f for f in rv.findings if so.mark(f).waived and f.severity in ("error", "warning")]
        for f in shown[:10]:
            console.print(f"  waived {f.severity} {f.rule} {escape(f.net)} ({escape(f.layer)}): "
                          f"{escape(so.mark(f).waiver.describe())}")
        if len(shown) > 10:
            console.print(f"  ... {len(shown) - 10} more in the workbook")


def run_demo(out: Path, json_out: Path | None, solver: str, no_cache: bool) -> int:
    """Review the bundled demo board; its findings are the point, so errors found still exit 0."""
    from sicheck.resources import default_rules_path, demo_dir
    d = demo_dir()
    code = run_review(d / "traces.csv", d / "stackup.toml", [default_rules_path(), d / "rules.toml"], out,
                      json_out, solver, None, None, None, no_cache=no_cache)
    return 0 if code in (0, 1) else code
