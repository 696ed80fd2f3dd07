"""Print check: the review workbook converted to PDF by LibreOffice, and each printed page read back.

Run: python tests/bench/print_check.py [--out DIR] [--png] [--workbook FILE.xlsx]

Needs `soffice` (LibreOffice Calc, e.g. Debian's libreoffice-calc-nogui) and `pdftotext` (poppler-utils);
with --png also `pdftoppm` to render the first pages of each sheet for a look. Skips with a message
when a tool is missing. The workbook is converted once; every page's footer names its sheet (the
workbook prints "sheet name ... page n of m"), so pages are counted per sheet from the PDF itself.

For each sheet it prints the pages, the pages across (the sheet's fit-to-width setting), and:
- table sheets (header row repeated on every page): pages that show data but none of the sheet's column
  headers, i.e. a column printed away from its header ("split");
- the Summary: labels whose value is not on the same printed line.
It reports; it asserts nothing. Exit code 0 whatever it finds.
"""

from __future__ import annotations

import argparse
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

FOOTER = re.compile(r"^\s*(?P<sheet>\S.*?)\s{2,}page (?P<n>\d+) of (?P<m>\d+)\s*$")


def pages_text(pdf: Path) -> list[str]:
    """The text of each page, laid out (pdftotext -layout); pages are separated by form feeds."""
    out = subprocess.run(["pdftotext", "-layout", str(pdf), "-"], capture_output=True, text=True, check=True).stdout
    pages = out.split("\f")
    return pages[:-1] if pages and not pages[-1].strip() else pages


def sheet_of(page: str) -> str | None:
    for line in reversed(page.splitlines()):
        m = FOOTER.match(line)
        if m:
            return m.group("sheet")
    return None


def _words(label: str) -> list[str]:
    return [w for w in re.split(r"[\s\[\]/()+]+", label) if len(w) >= 3]


def header_on_page(page: str, headers: list[str]) -> int:
    """How many of the sheet's column headers have their first long word among the page's first lines."""
    top = " ".join(l for l in page.splitlines()[:8])
    return sum(1 for h in headers if _words(h) and re.search(rf"\b{re.escape(_words(h)[0])}\b", top))


def summary_split(page: str, pairs: list[tuple[str, str]]) -> list[str]:
    """Summary labels whose value does not start on the label's printed line."""
    lines = page.splitlines()
    bad = []
    for label, value in pairs:
        first = _words(value)[0] if _words(value) else value.split()[0] if value.split() else ""
        hit = [l for l in lines if l.lstrip().startswith(label)]
        if hit and first and not any(first in l for l in hit):
            bad.append(label)
    return bad


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--out", type=Path, default=None, help="folder for the workbook, the PDF and PNGs")
    ap.add_argument("--png", action="store_true", help="render each sheet's first pages to PNG (pdftoppm)")
    ap.add_argument("--workbook", type=Path, default=None, help="check this workbook instead of the demo's")
    a = ap.parse_args()
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    if soffice is None or shutil.which("pdftotext") is None:
        print("skipped: needs soffice (LibreOffice Calc) and pdftotext (poppler-utils) on the PATH")
        return
    out = a.out or Path(tempfile.mkdtemp(prefix="sicheck-print-"))
    out.mkdir(parents=True, exist_ok=True)
    wb_path = a.workbook
    if wb_path is None:
        sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
        from sicheck.cli import main as cli
        wb_path = out / "demo-review.xlsx"
        try:
            cli(["demo", "--solver", "formula", "--out", str(wb_path)])
        except SystemExit:
            pass
    from openpyxl import load_workbook
    wb = load_workbook(wb_path)
    subprocess.run([soffice, "--headless", "--convert-to", "pdf", "--outdir", str(out), str(wb_path)],
                   check=True, capture_output=True, timeout=600)
    pdf = out / (wb_path.stem + ".pdf")
    pages = pages_text(pdf)
    by_sheet: dict[str, list[int]] = {}
    for i, p in enumerate(pages):
        by_sheet.setdefault(sheet_of(p) or "?", []).append(i)
    print(f"{pdf}: {len(pages)} pages")
    print(f"{'sheet':<11} {'pages':>5} {'across':>6}  check")
    for ws in wb.worksheets:
        idx = by_sheet.get(ws.title, [])
        across = int(ws.page_setup.fitToWidth or 1) if ws.sheet_properties.pageSetUpPr.fitToPage else 0
        note = ""
        if ws.print_title_rows:            # a table: its header row repeats on every page
            headers = [c.value for c in ws[1] if isinstance(c.value, str)]
            split = [i + 1 for i in idx if pages[i].strip() and header_on_page(pages[i], headers) == 0]
            note = ("every page shows its column headers" if not split
                    else f"SPLIT: pages {split} show no column header")
        elif ws.title == "Summary":
            pairs = [(str(r[0].value), str(r[1].value)) for r in ws.iter_rows(min_row=2, max_col=2)
                     if r[0].value and r[1].value not in (None, "")]
            bad = [b for i in idx for b in summary_split(pages[i], pairs)]
            note = "labels beside their values" if not bad else f"SPLIT: value not beside {bad}"
        print(f"{ws.title:<11} {len(idx):>5} {across:>6}  {note}")
        if a.png and idx and shutil.which("pdftoppm"):
            subprocess.run(["pdftoppm", "-png", "-r", "60", "-f", str(idx[0] + 1), "-l", str(min(idx[-1], idx[0] + 2) + 1),
                            str(pdf), str(out / f"page-{ws.title}")], check=True)
    if "?" in by_sheet:
        print(f"pages without a sheet footer: {[i + 1 for i in by_sheet['?']]}")
    print(f"files in {out}")


if __name__ == "__main__":
    main()
