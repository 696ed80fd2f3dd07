"""Benchmark: what the fabrication band costs a review (sicheck.physics.fab_band).

A synthetic board on the demo stackup with many unique cross-sections (every width its own) is reviewed
with the default [fabrication] tolerances and with all of them zero (no band solves), with the closed
forms and, on a smaller board, with the field solver (no cache). Prints times and the ratio; asserts
nothing.

Run: python tests/bench/bench_band.py [--unique N] [--field-unique M]
"""

from __future__ import annotations

import argparse
import csv
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

NO_BAND = "[fabrication]\nwidth_tol = '0mm'\ndielectric_tol_pct = 0\ner_tol_pct = 0\ncopper_tol_pct = 0\n"


def board(path: Path, unique: int) -> None:
    """Each row its own width, so each row is a unique cross-section; a fifth are pairs."""
    layers = ["TOP", "IN3", "IN4", "IN6", "BOT"]
    with open(path, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["net", "layer", "length [mm]", "width [mm]", "rise_time", "pair", "gap [mm]"])
        for i in range(unique):
            pair = i % 5 == 0
            w.writerow([f"N{i}_P" if pair else f"N{i}", layers[i % 5], "40", f"{0.09 + 0.2 * i / unique:.5f}",
                        "500ps", f"N{i}_N" if pair else "", "0.15" if pair else ""])


def timed_review(traces: Path, rules: list[Path], solver: str) -> tuple[float, int]:
    from sicheck.resources import demo_dir, default_rules_path
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.solvers import solver_fn
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    st = load_stackup(demo_dir() / "stackup.toml")
    rs = load_rule_sets([default_rules_path()] + rules)
    tl = read_traces(traces)
    t0 = time.perf_counter()
    rv = build_review(tl, st, rs, solver_fn(solver, no_cache=True, show_progress=False), solver, waveforms=False)
    return time.perf_counter() - t0, len(rv.cross_sections)


def compare(tmp: Path, unique: int, solver: str) -> None:
    tr = tmp / f"board-{unique}.csv"
    board(tr, unique)
    nb = tmp / "noband.toml"
    nb.write_text(NO_BAND)
    t_off, n = timed_review(tr, [nb], solver)
    t_on, _ = timed_review(tr, [], solver)
    print(f"{solver:<8} {n:>6} unique cross-sections: without band {t_off:8.2f} s, with band {t_on:8.2f} s, "
          f"ratio {t_on / t_off:5.2f}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--unique", type=int, default=2000, help="unique cross-sections, closed forms")
    ap.add_argument("--field-unique", type=int, default=12, help="unique cross-sections, field solver (0: skip)")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as d:
        os.environ["SICHECK_CACHE_DIR"] = str(Path(d) / "cache")      # nothing from earlier runs
        compare(Path(d), a.unique, "formula")
        if a.field_unique:
            compare(Path(d), a.field_unique, "field")


if __name__ == "__main__":
    main()
