"""The comparison workbook: a Summary and one Compare table (one row per change, nets that moved most first)."""

from __future__ import annotations

from datetime import date
from pathlib import Path

from sicheck import __version__
from sicheck.compare import Comparison
from sicheck.reports.atomic import atomic_path
from sicheck.reports.workbook import SEVERITY_FILL, Book, _Sheet, key_value_sheet


def write_comparison(c: Comparison, target: str | Path) -> None:
    with atomic_path(target) as tmp:
        book = Book(tmp)
        key_value_sheet(book, "Summary", "What changed between two reviews", [
            ("Old", c.old_source), ("New", c.new_source), ("sicheck version", __version__),
            ("Generated", date.today().isoformat()), ("", ""),
            ("Nets compared", c.nets_compared), ("Nets changed", len(c.nets)),
            ("Findings added", len(c.findings_added)), ("Findings resolved", len(c.findings_resolved)),
            ("Introduces an error finding", "yes" if c.introduces_error else "no"),
            ("Changed means", f"a number moved by more than {c.threshold_pct:g} % of the larger of the two values; "
                              "a classification, termination or finding changed (counted as 100 % for the order)"),
        ])
        cols = [("Net", None, 18), ("What", None, 22), ("Old", None, -40), ("New", None, -40), ("Unit", None, 6),
                ("Change [%]", "0.0", 9), ("Net's largest move [%]", "0.0", 10), ("Adds an error", None, 8)]
        rows = [[r.net, x.what, x.old, x.new, x.unit, x.pct, r.score, "yes" if r.introduces_error else None]
                for r in c.nets for x in r.changes]
        sh = _Sheet(book, "Compare", cols, fit={0: [r[0] for r in rows], 1: [r[1] for r in rows]})
        sh.header()
        for r in rows:
            sh.row(r, fill=SEVERITY_FILL["error"] if r[7] else None, fill_cols=(0,))
        sh.finish()
        book.close()
