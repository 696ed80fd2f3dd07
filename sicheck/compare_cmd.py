"""`sicheck compare`: two review JSON files, or one trace list reviewed on two stackups (what-if)."""

from __future__ import annotations

import json
from pathlib import Path

from sicheck.errors import InputError


def _load_review(path: Path) -> dict:
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8-sig"))
    except FileNotFoundError:
        raise InputError("review file not found", file=str(path)) from None
    except (OSError, UnicodeDecodeError) as e:
        raise InputError(f"cannot read the review: {e}", file=str(path)) from None
    except json.JSONDecodeError as e:
        raise InputError(f"not valid JSON: {e.msg}", file=str(path), line=e.lineno) from None
    if not isinstance(data, dict) or not isinstance(data.get("nets"), list) or \
            not isinstance(data.get("findings"), list):
        raise InputError("not a review: give the JSON written by sicheck review --json", file=str(path))
    for part in ("nets", "findings", "segments"):
        for i, item in enumerate(data.get(part) or []):
            if not isinstance(item, dict) or (part == "nets" and not isinstance(item.get("net"), str)):
                raise InputError("malformed entry", file=str(path), key=f"{part}[{i}]")
    return data


def run_compare(first: Path, second: Path | None, stackups: list[Path] | None, rules: list[Path] | None,
                out: Path | None, json_out: Path | None, markdown: Path | None, threshold_pct: float,
                solver: str, units: list[str] | None, maps: list[str] | None, sheet: str | None,
                no_cache: bool = False) -> int:
    from rich.console import Console

    from sicheck.compare import compare, comparison_dict
    from sicheck.reports.atomic import refuse_inputs, write_text_atomic
    from sicheck.reports.markdown import comparison_markdown

    if not (0 <= threshold_pct < 100):
        raise InputError(f"--threshold-pct must be from 0 to 100 (a percentage), not {threshold_pct:g}")
    stackups = list(stackups or [])
    if stackups:
        if len(stackups) != 2 or second is not None:
            raise InputError("the what-if form takes one trace list and two --stackup: "
                             "sicheck compare TRACES --stackup A.toml --stackup B.toml")
        inputs = [first, *stackups, *(rules or [])]
    else:
        if second is None:
            raise InputError("give two review JSON files (OLD.json NEW.json), or a trace list with two --stackup")
        if rules:
            raise InputError("--rules applies to the what-if form (two --stackup); two JSON files are compared "
                             "as they were reviewed")
        inputs = [first, second]
    for opt, path, suffix in (("--out", out, ".xlsx"), ("--json", json_out, None), ("--markdown", markdown, None)):
        if path is not None:
            refuse_inputs(path, inputs, opt, suffix=suffix)
    if stackups:
        old, new = _what_if(first, stackups, rules, solver, units, maps, sheet, no_cache)
        names = (str(stackups[0]), str(stackups[1]))
    else:
        old, new = _load_review(first), _load_review(second)
        names = (str(first), str(second))
    c = compare(old, new, threshold_pct, *names)
    console = Console(highlight=False)
    _print(c, console)
    if out is not None:
        from sicheck.reports.compare_workbook import write_comparison
        write_comparison(c, out)
        console.print(f"workbook: {out}")
    if json_out is not None:
        write_text_atomic(json_out, json.dumps(comparison_dict(c), ensure_ascii=False, allow_nan=False))
        console.print(f"json: {json_out}")
    if markdown is not None:
        write_text_atomic(markdown, comparison_markdown(c))
        console.print(f"markdown: {markdown}")
    return c.exit_code


def _what_if(traces, stackups, rules, solver, units, maps, sheet, no_cache) -> tuple[dict, dict]:
    """The same trace list and rules reviewed on each stackup, as review dicts."""
    from sicheck.reports.json_report import review_dict
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.solvers import solver_fn
    from sicheck.stackup import load_stackup
    from sicheck.traces import parse_map_option, parse_units_option, read_traces

    sts = [load_stackup(s) for s in stackups]
    rs = load_rule_sets(rules)
    aliases = dict(rs.columns)
    aliases.update(parse_map_option(maps))
    tl = read_traces(traces, parse_units_option(units), aliases, sheet)
    fn = solver_fn(solver, no_cache, True)
    out = []
    for path, st in zip(stackups, sts):
        try:
            out.append(review_dict(build_review(tl, st, rs, fn, solver)))
        except InputError as e:     # say which of the two stackups the trace list does not fit
            e.message = f"{e.message} (reviewing on stackup {path})"
            raise InputError(e.message, file=e.file, row=e.row, line=e.line, column=e.column, key=e.key) from None
    return out[0], out[1]


def _print(c, console, worst: int = 25) -> None:
    from rich import box
    from rich.markup import escape
    from rich.table import Table

    console.print(f"[bold]sicheck compare[/bold] {escape(Path(c.old_source).name)} -> {escape(Path(c.new_source).name)}")
    console.print(f"{len(c.nets)} of {c.nets_compared} nets changed (numbers: by more than {c.threshold_pct:g} %); "
                  f"findings: {len(c.findings_added)} added, {len(c.findings_resolved)} resolved")
    rows = [(r, x) for r in c.nets for x in r.changes]
    if rows:
        t = Table(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False)
        t.add_column("net", no_wrap=True, overflow="ellipsis", max_width=20)
        t.add_column("what", overflow="fold", max_width=18)
        t.add_column("old", overflow="fold", ratio=1)
        t.add_column("new", overflow="fold", ratio=1)
        t.add_column("%", justify="right", no_wrap=True)
        for r, x in rows[:worst]:
            t.add_row(escape(r.net), escape(x.what), escape(_shown(x.old, x.unit)), escape(_shown(x.new, x.unit)),
                      "" if x.pct is None else f"{x.pct:+.1f}")
        if len(rows) > worst:
            t.caption = f"{len(rows) - worst} more changes in the workbook or JSON"
            t.caption_justify = "left"
        console.print(t)
    if c.introduces_error:
        console.print("[bold red]the change introduces an error finding[/]")


def _shown(v, unit: str) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        return f"{v:.4g} {unit}".strip()
    return str(v)
