"""Benchmark: field-solver time per cross-section, and a demo-board review cold and warm.

Run: python tests/bench/bench_field.py. Prints figures; asserts nothing.
"""

from __future__ import annotations

import os
import statistics
import tempfile
import time
from pathlib import Path


def per_cross_section() -> None:
    from sicheck.physics.field2d import solve_field
    from sicheck.resources import demo_dir
    from sicheck.stackup import load_stackup
    st = load_stackup(demo_dir() / "stackup.toml")
    singles, pairs = [], []
    for layer in st.signal_layers:
        for w in (0.09e-3, 0.12e-3, 0.16e-3, 0.25e-3):
            singles.append(st.cross_section(layer.name, w))
            pairs.append(st.cross_section(layer.name, w, gap=0.15e-3))
    for name, xs_list in (("single-ended", singles), ("coupled pair", pairs)):
        times, unc = [], []
        for xs in xs_list:
            t0 = time.perf_counter()
            r = solve_field(xs)
            times.append(time.perf_counter() - t0)
            unc.append(r.uncertainty_pct)
        print(f"field solver, {name:<13} n={len(times):2d}  median {statistics.median(times):.3f} s  "
              f"max {max(times):.3f} s  worst uncertainty {max(unc):.3f} %")


def demo_review() -> None:
    from sicheck.review_cmd import run_review
    from sicheck.resources import default_rules_path, demo_dir
    d = demo_dir()
    with tempfile.TemporaryDirectory() as tmp:
        os.environ["SICHECK_CACHE_DIR"] = tmp
        out = Path(tmp) / "r.xlsx"
        for label in ("cold cache", "warm cache"):
            t0 = time.perf_counter()
            run_review(d / "traces.csv", d / "stackup.toml", [default_rules_path(), d / "rules.toml"], out, None,
                       "field", None, None, None, quiet=True)
            print(f"demo board review --solver field, {label}: {time.perf_counter() - t0:.2f} s (in-process)")


if __name__ == "__main__":
    per_cross_section()
    demo_review()
