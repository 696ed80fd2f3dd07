"""Benchmark: crosstalk. Prints figures only, each beside a reference measured in the same run.

1. The vectorised coefficients (physics/crosstalk.py) for a million cross-sections, against the
   closed-form even/odd solve they start from (the floor any review pays anyway).
2. The demo review with its CLOCK class spacing against the same review with the spacing removed
   (warm field-solver cache): what the crosstalk stage adds.
3. `plan --crosstalk` on the demo stackup against `plan` alone (field solver, cold cache).
"""

from __future__ import annotations

import os
import tempfile
import time
from dataclasses import replace

import numpy as np


def _coefficients() -> None:
    from sicheck.physics import coupled_microstrip
    from sicheck.physics import crosstalk as xt
    n = 1_000_000
    rng = np.random.default_rng(1)
    w, h, s = rng.uniform(0.1e-3, 0.3e-3, n), np.full(n, 0.2e-3), rng.uniform(0.1e-3, 1e-3, n)
    t0 = time.perf_counter()
    ze, zo, ee, eo = coupled_microstrip.kirschning_jansen(w, h, np.full(n, 35e-6), s, np.full(n, 4.3))
    t_modes = time.perf_counter() - t0
    t0 = time.perf_counter()
    c = xt.coupling_from_modes(ze, zo, ee, eo)
    xt.next_fraction(c.kb, 0.05, c.delay_per_m, 200e-12)
    xt.fext_fraction(c.kf, 0.05, c.delay_per_m, 200e-12)
    t_xt = time.perf_counter() - t0
    print(f"1M cross-sections: coefficients + NEXT/FEXT {t_xt * 1e3:.0f} ms; Kirschning-Jansen modes (reference) "
          f"{t_modes * 1e3:.0f} ms; ratio {t_xt / t_modes:.2f}")


def _review() -> None:
    from sicheck.cli import _solver_fn
    from sicheck.resources import default_rules_path, demo_dir
    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.cli import _merge_rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    d = demo_dir()
    rs = _merge_rules(load_rules(default_rules_path()), load_rules(d / "rules.toml"))
    plain = replace(rs, classes=tuple(replace(c, spacing=None) for c in rs.classes))
    st = load_stackup(d / "stackup.toml")
    tl = read_traces(d / "traces.csv")
    solve = _solver_fn("auto", False, show_progress=False)
    build_review(tl, st, rs, solve, "auto")          # warm the cache
    times = {}
    for label, rules in (("with class spacing", rs), ("without (reference)", plain)):
        t0 = time.perf_counter()
        rv = build_review(tl, st, rules, solve, "auto")
        times[label] = time.perf_counter() - t0
        n = int(rv.nets["next_pct"].notna().sum()) if "next_pct" in rv.nets else 0
        print(f"demo review {label}, warm cache: {times[label]:.2f} s ({n} nets with a crosstalk figure)")
    print(f"  crosstalk stage ratio {times['with class spacing'] / times['without (reference)']:.2f}")


def _plan() -> None:
    from sicheck.plan_cmd import build_plan
    from sicheck.resources import demo_dir
    times = {}
    for label, xt in (("plan alone (reference)", None), ("plan --crosstalk 3%", "3%")):
        with tempfile.TemporaryDirectory() as tmp:
            os.environ["SICHECK_CACHE_DIR"] = tmp
            t0 = time.perf_counter()
            plan = build_plan(demo_dir() / "stackup.toml", [50.0], [], "equal", ["1GHz"], "field", None, False,
                              crosstalk=xt)
            times[label] = time.perf_counter() - t0
        steps = sum(L.get("crosstalk", {}).get("solver_steps", 0) for L in plan["layers"])
        print(f"{label}, demo stackup, field solver, cold cache: {times[label]:.1f} s"
              + (f" ({steps} coupled solves over {len(plan['layers'])} layers)" if xt else ""))
    print(f"  ratio {times['plan --crosstalk 3%'] / times['plan alone (reference)']:.2f}")


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        os.environ["SICHECK_CACHE_DIR"] = tmp
        _coefficients()
        _review()
    _plan()


if __name__ == "__main__":
    main()
