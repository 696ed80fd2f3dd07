"""A short Markdown summary of a review (or a comparison) for a CI job page or a pull-request comment.

Every text from the inputs goes through `md`: ASCII punctuation is backslash-escaped (CommonMark lets any
of it be escaped), so a net called `<b>|*x*` or `=SUM(A1)` shows as written and never as markup, a link
or a table border; line breaks become spaces.
"""

from __future__ import annotations

import re
from pathlib import Path

from sicheck.findings import Finding

MAX_ROWS = 30               # rows per list; the rest is counted ("... and 12 more")
_PUNCT = re.compile(r"([!-/:-@\[-`{-~])")


def md(value) -> str:
    """Text from the inputs, safe in Markdown prose and table cells."""
    s = "" if value is None else str(value)
    s = re.sub(r"[\x00-\x1f\x7f\u2028\u2029]+", " ", s)
    return _PUNCT.sub(r"\\\1", s)


def _table(header: list[str], rows: list[list], more: int = 0) -> list[str]:
    out = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    out += ["| " + " | ".join(c if isinstance(c, str) else md(c) for c in r) + " |" for r in rows]
    if more:
        out.append(f"\n... and {more} more (see the workbook or the JSON)")
    return out + [""]


def _finding_rows(fs: list[Finding], extra=None) -> tuple[list[list], int]:
    rows = [[md(f.severity), md(f.rule), md(f.net), md(f.layer), md(f.message)] + (extra(f) if extra else [])
            for f in fs[:MAX_ROWS]]
    return rows, max(0, len(fs) - MAX_ROWS)


def review_markdown(rv) -> str:
    """Counts, the errors that fail the review, what changed since the previous review, waived findings."""
    from sicheck.reports.signoff_columns import changes_sentence
    so = rv.signoff
    waived = so.waived_keys if so is not None else set()
    key = lambda f: f.key or f"{f.rule}|{f.net}"      # noqa: E731
    c = rv.counts
    w = {s: sum(1 for f in rv.findings if f.severity == s and key(f) in waived) for s in c}
    verdict = "fails" if rv.exit_code else "passes"
    out = [f"## sicheck review: {md(Path(rv.traces_source).name)} on {md(rv.stackup.name)}", "",
           f"**The review {verdict}** (exit code {rv.exit_code}): {c['error'] - w['error']} error finding(s) "
           "not waived.", ""]
    out += _table(["severity", "findings", "waived"], [[s, str(c[s]), str(w[s])] for s in ("error", "warning",
                                                                                             "info")])
    out.append(f"{len(rv.nets)} nets, {len(rv.segments)} segments, {rv.solver} solver.")
    out.append("")
    errors = [f for f in rv.findings if f.severity == "error" and key(f) not in waived]
    if errors:
        out += ["### Errors", ""]
        rows, more = _finding_rows(errors)
        out += _table(["severity", "rule", "net", "layer", "finding"], rows, more)
    if so is not None and so.previous:
        out += ["### Since the previous review", "", md(changes_sentence(so)) + ".", ""]
        moved = [f for f in rv.findings if so.mark(f).status in ("new", "changed")]
        if moved:
            rows, more = _finding_rows(moved, lambda f: [md(so.mark(f).status)])
            out += _table(["severity", "rule", "net", "layer", "finding", "status"], rows, more)
        if so.resolved:
            rows = [[md(p.severity), md(p.rule), md(p.net), md(p.layer), md(p.message)]
                    for p in so.resolved[:MAX_ROWS]]
            out += ["Resolved:", ""] + _table(["severity", "rule", "net", "layer", "finding (last review)"], rows,
                                              max(0, len(so.resolved) - MAX_ROWS))
    if waived:
        out += ["### Waived findings", "", "They keep their severity but do not fail the review.", ""]
        ws = [f for f in rv.findings if key(f) in waived]

        def who(f):
            wv = so.mark(f).waiver
            return [md(wv.by), md(wv.reason), md(wv.until.isoformat() if wv.until else "")]
        rows, more = _finding_rows(ws, who)
        out += _table(["severity", "rule", "net", "layer", "finding", "by", "reason", "until"], rows, more)
    return "\n".join(out).rstrip() + "\n"


def comparison_markdown(c) -> str:
    """The nets that moved most between two reviews."""
    verdict = "introduces an error finding" if c.introduces_error else "introduces no error finding"
    out = [f"## sicheck compare: {md(Path(c.old_source).name)} to {md(Path(c.new_source).name)}", "",
           f"**The change {verdict}** (exit code {c.exit_code}). {len(c.nets)} of {c.nets_compared} nets "
           f"changed (numbers: by more than {c.threshold_pct:g} %); {len(c.findings_added)} finding(s) added, "
           f"{len(c.findings_resolved)} resolved.", ""]
    rows = []
    for r in c.nets:
        for x in r.changes:
            rows.append([md(r.net), md(x.what), md(_val(x.old, x.unit)), md(_val(x.new, x.unit)),
                         "" if x.pct is None else f"{x.pct:+.1f}"])
    if rows:
        out += _table(["net", "what", "old", "new", "change [%]"], rows[:MAX_ROWS], max(0, len(rows) - MAX_ROWS))
    return "\n".join(out).rstrip() + "\n"


def _val(v, unit: str) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        return f"{v:.4g} {unit}".strip()
    return f"{v} {unit}".strip() if isinstance(v, (int,)) and not isinstance(v, bool) else str(v)
