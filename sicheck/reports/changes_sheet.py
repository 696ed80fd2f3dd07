"""The workbook's Changes sheet: findings that are new, changed or resolved since the previous review."""

from __future__ import annotations

from sicheck.findings import SEVERITY_ORDER
from sicheck.reports.signoff_columns import GENERAL
from sicheck.reports.workbook import SEVERITY_FILL, Book, _Sheet
from sicheck.review import Review
from sicheck.signoff import moved_pct
from sicheck.waivers import finding_key

STATUS_ORDER = {"new": 0, "changed": 1, "resolved": 2}


def changes_rows(rv: Review) -> list[list]:
    """One row per new, changed or resolved finding: status, severity, rule, net, layer, finding, value,
    previous value, change [%], unit, disposition, reviewer, comment, key."""
    so = rv.signoff
    rows = []
    for f in rv.findings:
        m = so.mark(f)
        if m.status not in ("new", "changed"):
            continue
        change = (moved_pct(m.previous_value, f.value) if m.previous_value is not None and f.value is not None
                  else None)
        rows.append([m.status, f.severity, f.rule, f.net, f.layer, f.message, f.value, m.previous_value, change,
                     f.unit, m.disposition, m.reviewer, m.comment, finding_key(f)])
    for p in so.resolved:
        rows.append(["resolved", p.severity, p.rule, p.net, p.layer, p.message, None, p.value, None, p.unit,
                     p.disposition, p.reviewer, p.comment, p.key])
    rows.sort(key=lambda r: (STATUS_ORDER[r[0]], SEVERITY_ORDER.get(r[1], 3), r[2], r[3], r[4]))
    return rows


def changes_sheet(book: Book, rv: Review) -> None:
    cols = [("Status", None, 9), ("Severity", None, 9), ("Rule", None, 16), ("Net", None, 18), ("Layer", None, 10),
            ("Finding (this review; last review's for resolved)", None, -60), ("Value", GENERAL, 9),
            ("Previous value", GENERAL, 9), ("Change [%]", "0.0", 8), ("Unit", None, 6),
            ("Disposition", None, 11), ("Reviewer", None, 12), ("Comment", None, -24), ("Key", None, 24)]
    rows = changes_rows(rv)
    sh = _Sheet(book, "Changes", cols, fit={3: [r[3] for r in rows], 4: [r[4] for r in rows]})
    sh.header()
    for r in rows:
        sh.row(r, fill=SEVERITY_FILL.get(r[1]), fill_cols=(1,))
    sh.finish()
