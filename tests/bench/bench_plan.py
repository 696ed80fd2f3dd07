"""Benchmark: `sicheck plan` on the demo stackup (field solver, cold cache). Prints figures only."""

from __future__ import annotations

import os
import tempfile
import time


def main() -> None:
    from sicheck.plan_cmd import build_plan
    from sicheck.resources import demo_dir
    with tempfile.TemporaryDirectory() as tmp:
        os.environ["SICHECK_CACHE_DIR"] = tmp
        for label in ("cold cache", "warm cache"):
            t0 = time.perf_counter()
            plan = build_plan(demo_dir() / "stackup.toml", [50.0], [100.0, 90.0], "fixed:0.2mm", ["1GHz", "5GHz"],
                              "field", None, False)
            dt = time.perf_counter() - t0
            worst = max(abs(d["error_pct"]) for L in plan["layers"] for d in L["singles"] + L["pairs"])
            print(f"plan, 5 layers x (Z0 50, Zdiff 100, Zdiff 90), field solver, {label}: {dt:.1f} s; "
                  f"worst miss {worst:.3f} %")


if __name__ == "__main__":
    main()
