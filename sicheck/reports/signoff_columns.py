"""What the sign-off adds to the review's reports: Findings columns, Summary lines, JSON fields.

Pure functions of the review's findings and its `SignOff` (no workbook code), shared by the workbook,
the JSON and the Markdown summary.
"""

from __future__ import annotations

from sicheck.findings import Finding, _plain
from sicheck.signoff import NO_MARK, SignOff

GENERAL = "General"


def finding_columns(so: SignOff | None) -> list[tuple[str, str | None, int]]:
    """Findings-sheet columns after Comment (Value and Key always: the next review reads them back)."""
    cols = [("Value", GENERAL, 9), ("Unit", None, 6)]
    if so is not None and so.previous:
        cols += [("Status", None, 10), ("Previous value", GENERAL, 9)]
    if so is not None and so.waivers:
        cols += [("Waived", None, -26)]
    return cols + [("Key", None, 24)]


def finding_cells(so: SignOff | None, f: Finding) -> list:
    """Disposition, Reviewer, Comment, then the cells of `finding_columns` for one finding."""
    m = so.mark(f) if so is not None else NO_MARK
    cells = [m.disposition or None, m.reviewer or None, m.comment or None, f.value, f.unit or None]
    if so is not None and so.previous:
        cells += [m.status, m.previous_value]
    if so is not None and so.waivers:
        cells += [m.waiver.describe() if m.waiver else None]
    return cells + [f.key or f"{f.rule}|{f.net}"]


def summary_lines(so: SignOff | None) -> list[tuple[str, object]]:
    """Summary-sheet lines: what changed since the previous review, what the waivers did."""
    if so is None:
        return []
    c = so.counts()
    rows: list[tuple[str, object]] = []
    if so.previous:
        rows += [("Previous review", so.previous),
                 ("Since the previous review", changes_sentence(so)),
                 ("New findings", c["new"]),
                 ("Changed findings", c["changed"]),
                 ("Unchanged findings", c["unchanged"]),
                 ("Resolved findings (Changes sheet)", c["resolved"]),
                 ("Decisions carried over", c["carried"]),
                 ("Changed means", f"severity changed, or value moved by more than {so.change_pct:g} % "
                                   "(of the larger of the two values)")]
    if so.waivers:
        rows += [("Waivers file", so.waivers),
                 ("Waived findings (not counted for the exit code)", c["waived"])]
    return rows + [("", "")]


def changes_sentence(so: SignOff) -> str:
    c = so.counts()
    return (f"{c['new']} new, {c['changed']} changed, {c['unchanged']} unchanged, {c['resolved']} resolved; "
            f"{c['carried']} decisions carried over")


def finding_json(so: SignOff | None, f: Finding) -> dict:
    """Extra keys of one finding in the JSON (disposition, reviewer and comment are always there to fill in)."""
    m = so.mark(f) if so is not None else NO_MARK
    d = {"disposition": m.disposition or None, "reviewer": m.reviewer or None, "comment": m.comment or None}
    if so is not None and so.previous:
        d.update(status=m.status, previous_value=_plain(m.previous_value),
                 previous_severity=m.previous_severity or None)
    if so is not None and so.waivers:
        w = m.waiver
        d["waived"] = None if w is None else {"by": w.by, "reason": w.reason,
                                              "until": w.until.isoformat() if w.until else None,
                                              "waiver": w.index}
    return d


def signoff_json(so: SignOff | None) -> dict:
    """Top-level JSON keys of a review with a previous review or waivers."""
    if so is None:
        return {}
    c = so.counts()
    out: dict = {"signoff": {"previous": so.previous, "waivers": so.waivers, "change_pct": so.change_pct,
                             **{k: c[k] for k in ("new", "changed", "unchanged", "resolved", "carried", "waived")}}}
    if so.previous:
        out["resolved"] = [{"key": p.key, "severity": p.severity or None, "rule": p.rule or None,
                            "net": p.net or None, "layer": p.layer or None, "message": p.message or None,
                            "value": _plain(p.value), "unit": p.unit or None, "disposition": p.disposition or None,
                            "reviewer": p.reviewer or None, "comment": p.comment or None}
                           for p in so.resolved]
    return out
