"""Benchmark: what sign-off costs on a large board (sicheck.signoff, sicheck.waivers).

Synthetic findings (no review is run): a previous review's workbook with N findings is written by the
review workbook writer, read back with openpyxl (`read_previous`), and carried onto N findings of which
a tenth moved and a twentieth are new; then W waivers (half by key, half by rule and net glob) are
applied. Prints the times; asserts nothing.

Run: python tests/bench/bench_signoff.py [--findings N] [--waivers W]
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from sicheck.findings import Finding  # noqa: E402
from sicheck.reports.signoff_columns import finding_cells, finding_columns  # noqa: E402
from sicheck.reports.workbook import Book, _Sheet  # noqa: E402
from sicheck.signoff import read_previous, sign_off  # noqa: E402
from sicheck.waivers import Waiver, apply  # noqa: E402

RULES = ("z0-target", "zdiff-target", "electrical-length", "loss-budget", "delay-skew")


def findings(n: int, shift: int = 0) -> list[Finding]:
    out = []
    for i in range(shift, n + shift):
        rule = RULES[i % len(RULES)]
        value = (50.0 + i % 7) * (1.05 if i % 10 == 0 and shift else 1.0)     # a tenth moved by 5 %
        out.append(Finding(rule=rule, severity="error" if i % 3 == 0 else "warning", net=f"NET_{i}", layer="L1",
                           message=f"synthetic finding {i}", row=i + 2, key=f"{rule}|NET_{i}|L1", value=value,
                           unit="ohm"))
    return out


def write_findings(path: Path, fs: list[Finding]) -> None:
    """The Findings sheet as the review workbook writes it (same columns and cell path)."""
    book = Book(path)
    cols = [("ID", None, 7), ("Severity", None, 9), ("Rule", None, 16), ("Net", None, 18), ("Layer", None, 10),
            ("Finding", None, -70), ("Trace row", "0", 7), ("Disposition", None, 12), ("Reviewer", None, 12),
            ("Comment", None, -24)] + finding_columns(None)
    sh = _Sheet(book, "Findings", cols)
    sh.header()
    for i, f in enumerate(fs):
        sh.row([f"F{i + 1:04d}", f.severity, f.rule, f.net, f.layer, f.message, f.row] + finding_cells(None, f))
    sh.finish()
    book.close()


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--findings", type=int, default=20000)
    ap.add_argument("--waivers", type=int, default=400)
    a = ap.parse_args()
    old = findings(a.findings)
    new = findings(a.findings, shift=a.findings // 20)
    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / "old.xlsx"
        t = time.perf_counter()
        write_findings(p, old)
        t_write = time.perf_counter() - t
        t = time.perf_counter()
        prior = read_previous(p)
        t_read = time.perf_counter() - t
        pj = Path(d) / "old.json"
        pj.write_text(json.dumps({"findings": [f.as_dict() for f in old]}))
        t = time.perf_counter()
        read_previous(pj)
        t_json = time.perf_counter() - t
    t = time.perf_counter()
    _, so = sign_off(new, prior, "old.xlsx")
    t_carry = time.perf_counter() - t
    half = a.waivers // 2
    ws = ([Waiver(index=i + 1, line=None, reason="r", by="b", key=f.key) for i, f in enumerate(new[:half])] +
          [Waiver(index=half + i + 1, line=None, reason="r", by="b", rule=RULES[i % len(RULES)], net=f"NET_{i}?")
           for i in range(a.waivers - half)])
    t = time.perf_counter()
    covered, notes = apply(new, ws, dt.date.today())
    t_apply = time.perf_counter() - t
    c = so.counts()
    print(f"{a.findings} findings: write workbook {t_write:.2f} s, read it back {t_read:.2f} s, "
          f"(as JSON {t_json:.2f} s), carry {t_carry:.3f} s ({c['new']} new, {c['changed']} changed, {c['resolved']} resolved)")
    print(f"{a.waivers} waivers: apply {t_apply:.3f} s ({len(covered)} findings waived, {len(notes)} notes)")


if __name__ == "__main__":
    main()
