"""Benchmark: time-domain simulation per net and for all flagged nets of the demo board.

Run: python tests/bench/bench_waveform.py. Prints figures; asserts nothing.
"""

from __future__ import annotations

import time

from sicheck.physics.termination_choice import Limits, choose
from sicheck.physics.transient import Load, simulate


def main() -> None:
    cases = [([50.0], [1e-9], 0.5e-9, 15.0, Load(cap=3e-12)),
             ([49.0, 53.0, 49.0], [0.05e-9, 0.45e-9, 0.04e-9], 1e-9, 25.0, Load(cap=2e-12)),
             ([47.0], [0.9e-9], 0.25e-9, 25.0, Load(cap=2e-12, end_ohm=50.0))]
    for z, td, tr, rs, load in cases:
        simulate(z, td, 3.3, tr, rs, load)
        n = 50
        t0 = time.perf_counter()
        for _ in range(n):
            wf = simulate(z, td, 3.3, tr, rs, load)
        dt = (time.perf_counter() - t0) / n
        print(f"one simulation, {len(z)} line(s), TD {sum(td) * 1e9:.2f} ns, Tr {tr * 1e12:.0f} ps: "
              f"{dt * 1e3:.2f} ms ({len(wf.t)} steps)")
    t0 = time.perf_counter()
    _, rec, cands = choose([50.0], [1e-9], 0.5e-9, 15.0, 3.3, 3e-12, Limits())
    print(f"termination choice for one net ({len(cands)} simulations): {(time.perf_counter() - t0) * 1e3:.1f} ms")

    from sicheck.resources import demo_dir
    from sicheck.review import build_review
    from sicheck.rules import load_rule_sets
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    d = demo_dir()
    rules = load_rule_sets([None, d / "rules.toml"])
    tl, st = read_traces(d / "traces.csv"), load_stackup(d / "stackup.toml")
    t0 = time.perf_counter()
    build_review(tl, st, rules, waveforms=False)
    base = time.perf_counter() - t0
    t0 = time.perf_counter()
    rv = build_review(tl, st, rules)
    full = time.perf_counter() - t0
    flagged = int((rv.nets["termination"] != "not-needed").sum())
    print(f"demo board: waveform stage for {flagged} flagged nets {full - base:.2f} s "
          f"({(full - base) / flagged * 1e3:.0f} ms per net incl. all candidates)")


if __name__ == "__main__":
    main()
