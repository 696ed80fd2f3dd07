"""Benchmark: crosstalk. Prints figures only, each beside a reference measured in the same run.

1. The vectorised coefficients (physics/crosstalk.py) for a million cross-sections, against the
   closed-form even/odd solve they start from (the floor any review pays anyway).
2. The demo review with its CLOCK class spacing against the same review with the spacing removed
   (warm field-solver cache): what the crosstalk stage adds (the check's spacing search included).
3. `plan --crosstalk` on the demo stackup against `plan` alone (field solver, cold cache).
"""

from __future__ import annotations

import os
import resource
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))


def cpu() -> float:
    """CPU seconds of this process and of its finished children (the field solver's process pool)."""
    ch = resource.getrusage(resource.RUSAGE_CHILDREN)
    return time.process_time() + ch.ru_utime + ch.ru_stime


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
    from sicheck.resources import default_rules_path, demo_dir
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.solvers import solver_fn
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    d = demo_dir()
    rs = load_rule_sets([default_rules_path(), d / "rules.toml"])
    plain = replace(rs, classes=tuple(replace(c, params={k: v for k, v in c.params.items() if k != "spacing"})
                                      for c in rs.classes))
    st = load_stackup(d / "stackup.toml")
    tl = read_traces(d / "traces.csv")
    solve = solver_fn("auto", False, show_progress=False)
    build_review(tl, st, rs, solve, "auto")          # warm the cache
    times = {}
    for label, rules in (("with class spacing", rs), ("without (reference)", plain)):
        runs = []
        for _ in range(3):             # the best of three: the machine may be shared
            t0, c0 = time.perf_counter(), cpu()
            rv = build_review(tl, st, rules, solve, "auto")
            runs.append((time.perf_counter() - t0, cpu() - c0))
        times[label] = min(runs)
        n = int(rv.nets["next_pct"].notna().sum()) if "next_pct" in rv.nets else 0
        print(f"demo review {label}, warm cache, best of 3: {times[label][0]:.2f} s wall, {times[label][1]:.2f} s CPU "
              f"({n} nets with a crosstalk figure)")
    a, b = times["with class spacing"], times["without (reference)"]
    print(f"  ratio with/without: wall {a[0] / b[0]:.2f}, CPU {a[1] / b[1]:.2f}")


def _plan() -> None:
    from sicheck.plan_cmd import build_plan
    from sicheck.resources import demo_dir
    times = {}
    for label, xt in (("plan alone (reference)", None), ("plan --crosstalk 3%", "3%")):
        with tempfile.TemporaryDirectory() as tmp:
            os.environ["SICHECK_CACHE_DIR"] = tmp
            t0, c0 = time.perf_counter(), cpu()
            plan = build_plan(demo_dir() / "stackup.toml", [50.0], [], "equal", ["1GHz"], "field", None, False,
                              crosstalk=xt)
            times[label] = (time.perf_counter() - t0, cpu() - c0)
        steps = sum(L.get("crosstalk", {}).get("solver_steps", 0) for L in plan["layers"])
        print(f"{label}, demo stackup, field solver, cold cache: {times[label][0]:.1f} s wall, "
              f"{times[label][1]:.1f} s CPU" + (f" ({steps} coupled solves over {len(plan['layers'])} layers)"
                                               if xt else ""))
    a, b = times["plan --crosstalk 3%"], times["plan alone (reference)"]
    print(f"  ratio with/without: wall {a[0] / b[0]:.2f}, CPU {a[1] / b[1]:.2f}")


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        os.environ["SICHECK_CACHE_DIR"] = tmp
        _coefficients()
        _review()
    _plan()


if __name__ == "__main__":
    main()
