"""Print check: the demo review workbook converted to PDF by LibreOffice, page by page.

Run: python tests/bench/print_check.py [--out DIR] [--png]. Needs `soffice` (LibreOffice Calc) on the
PATH; with --png also `pdftoppm` (poppler-utils) to render each page for a look. Prints the number of
pages per sheet and the PDF's page size; asserts nothing. Skips with a message when soffice is missing.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--out", type=Path, default=None, help="folder for the workbook, PDFs and PNGs")
    ap.add_argument("--png", action="store_true", help="render every page to PNG (pdftoppm)")
    ap.add_argument("--workbook", type=Path, default=None, help="check this workbook instead of the demo's")
    a = ap.parse_args()
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    if soffice is None:
        print("skipped: soffice (LibreOffice) not found; install libreoffice-calc to run the print check")
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
    names = load_workbook(wb_path, read_only=True).sheetnames
    # one PDF per sheet, so that pages can be counted per sheet: a copy of the workbook with one sheet visible
    for name in names:
        wb = load_workbook(wb_path)
        for ws in wb.worksheets:
            ws.sheet_state = "visible" if ws.title == name else "hidden"
        wb.active = wb.sheetnames.index(name)
        one = out / f"sheet-{name}.xlsx"
        wb.save(one)
        subprocess.run([soffice, "--headless", "--convert-to", "pdf", "--outdir", str(out), str(one)],
                       check=True, capture_output=True, timeout=300)
        pdf = one.with_suffix(".pdf")
        pages, size = "?", "?"
        if shutil.which("pdfinfo"):
            info = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True).stdout
            for line in info.splitlines():
                if line.startswith("Pages:"):
                    pages = line.split()[1]
                if line.startswith("Page size:"):
                    size = line.split(":", 1)[1].strip()
        print(f"{name:<10} {pages:>4} pages  ({size})  {pdf}")
        if a.png and shutil.which("pdftoppm"):
            subprocess.run(["pdftoppm", "-png", "-r", "60", "-l", "3", str(pdf), str(out / f"page-{name}")],
                           check=True)
    print(f"files in {out}")


if __name__ == "__main__":
    main()
