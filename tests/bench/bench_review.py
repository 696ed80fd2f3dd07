"""Benchmark: closed-form throughput, a 100 000-segment review, and start-up time.

Run: python tests/bench/bench_review.py [--segments N]. Prints figures; asserts nothing.
"""

from __future__ import annotations

import argparse
import csv
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def closed_form_throughput(n: int = 1_000_000) -> None:
    from sicheck.physics.coupled_microstrip import kirschning_jansen
    from sicheck.physics.microstrip import hammerstad_jensen
    from sicheck.physics.stripline import coupled_stripline, stripline
    rng = np.random.default_rng(1)
    w = rng.uniform(0.05e-3, 0.5e-3, n)
    h = rng.uniform(0.05e-3, 0.3e-3, n)
    t = np.full(n, 35e-6)
    er = rng.uniform(3.0, 4.6, n)
    s = rng.uniform(0.08e-3, 0.4e-3, n)
    for name, fn in (("microstrip (Hammerstad-Jensen)", lambda: hammerstad_jensen(w, h, t, er)),
                     ("stripline (Cohn x Wheeler, offset)", lambda: stripline(w, t, h, 1.5 * h, er, er)),
                     ("coupled microstrip (Kirschning-Jansen)", lambda: kirschning_jansen(w, h, t, s, er)),
                     ("coupled stripline (Cohn)", lambda: coupled_stripline(w, t, s, h, 1.5 * h, er, er))):
        fn()
        t0 = time.perf_counter()
        fn()
        dt = time.perf_counter() - t0
        print(f"closed form, {name:<40} {n / dt / 1e6:6.2f} M segments/s")


def synthetic_board(path: Path, n: int) -> None:
    rng = np.random.default_rng(2)
    layers = ["TOP", "IN3", "IN4", "IN6", "BOT"]
    with open(path, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["Net", "Layer", "Length [mm]", "Width [mm]", "Rise Time", "Pair", "Gap [mm]"])
        net = 0
        i = 0
        while i < n:
            segs = int(rng.integers(1, 4))
            pair = rng.random() < 0.2
            for _ in range(min(segs, n - i)):
                w.writerow([f"N{net}_P" if pair else f"N{net}", layers[int(rng.integers(0, 5))],
                            f"{rng.uniform(1, 80):.2f}", f"{rng.choice([0.1, 0.12, 0.15, 0.2]):.2f}",
                            f"{int(rng.choice([250, 400, 1000, 5000]))}ps", f"N{net}_N" if pair else "",
                            "0.15" if pair else ""])
                i += 1
            net += 1


def bare_baseline(csv_path: Path, xlsx: Path) -> float:
    import pandas as pd
    from openpyxl import Workbook
    t0 = time.perf_counter()
    df = pd.read_csv(csv_path)
    wb = Workbook(write_only=True)
    ws = wb.create_sheet("rows")
    ws.append(list(df.columns))
    for row in df.itertuples(index=False):
        ws.append(list(row))
    wb.save(xlsx)
    return time.perf_counter() - t0


def same_rows_baseline(csv_path: Path, stackup: Path, xlsx: Path) -> tuple[float, int]:
    """pandas read + openpyxl write-only of the rows the review writes (plain values, no styles)."""
    import pandas as pd
    from openpyxl import Workbook

    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    rv = build_review(read_traces(csv_path), load_stackup(stackup), load_rules(None))
    tables = [rv.segments.drop(columns=["xs"]), rv.nets,
              pd.DataFrame([f.as_dict() for f in rv.findings])]
    t0 = time.perf_counter()
    pd.read_csv(csv_path)
    wb = Workbook(write_only=True)
    cells = 0
    for k, df in enumerate(tables):
        ws = wb.create_sheet(f"t{k}")
        ws.append([str(c) for c in df.columns])
        for row in df.itertuples(index=False):
            ws.append([None if (isinstance(v, float) and v != v) else v for v in row])
        cells += df.shape[0] * df.shape[1]
    wb.save(xlsx)
    return time.perf_counter() - t0, cells


def full_review(csv_path: Path, stackup: Path, out: Path, js: Path) -> float:
    from sicheck.review_cmd import run_review
    t0 = time.perf_counter()
    run_review(csv_path, stackup, None, out, js, "formula", None, None, None, quiet=True)
    return time.perf_counter() - t0


def version_time() -> float:
    exe = Path(sys.executable).parent / "sicheck"
    cmd = [str(exe), "--version"] if exe.exists() else [sys.executable, "-m", "sicheck", "--version"]
    best = 1e9
    for _ in range(5):
        t0 = time.perf_counter()
        subprocess.run(cmd, capture_output=True, check=True)
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--segments", type=int, default=100_000)
    a = ap.parse_args()
    closed_form_throughput()
    from sicheck.resources import demo_dir
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        csv_path = d / "big.csv"
        synthetic_board(csv_path, a.segments)
        base = bare_baseline(csv_path, d / "bare.xlsx")
        same, cells = same_rows_baseline(csv_path, demo_dir() / "stackup.toml", d / "same.xlsx")
        full = full_review(csv_path, demo_dir() / "stackup.toml", d / "review.xlsx", d / "review.json")
        print(f"{a.segments} segments: sicheck review (CSV in, workbook + JSON out) {full:.2f} s")
        print(f"  baseline A, pandas read + write the input rows: {base:.2f} s -> ratio {full / base:.2f}x")
        print(f"  baseline B, pandas read + write the review's own rows plain ({cells} cells): {same:.2f} s "
              f"-> ratio {full / same:.2f}x")
    print(f"sicheck --version: {version_time() * 1e3:.0f} ms (best of 5, console script)")
    _ = os


if __name__ == "__main__":
    main()
