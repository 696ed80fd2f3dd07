"""Benchmark: the waveform engine per net, for 1 000 flagged nets, and the demo board's waveform stage.

Run: python tests/bench/bench_waveform.py [--board-nets 25000]. Prints figures, each next to a floor measured in the same
run; asserts nothing. Floors: one inverse FFT of the same record for all candidates (the engine's
irreducible work), and the method of characteristics that sicheck used before (tests/moc_reference.py).
"""

from __future__ import annotations

import gc
import sys
import time
from pathlib import Path

import numpy as np
from scipy import fft as sfft

HERE = Path(__file__).resolve().parent
sys.path[:0] = [str(HERE.parent.parent), str(HERE.parent)]

from sicheck.physics.causal_line import LineLoss  # noqa: E402
from sicheck.physics.termination_choice import Limits, choose, choose_many  # noqa: E402


def best_of(fn, repeat=5, number=1):
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fn()
        best = min(best, (time.perf_counter() - t0) / number)
    return best


def recorded_irffts(fn):
    """Run fn, noting the shape and size of every inverse FFT the engine does: (fn's result, notes)."""
    from sicheck.physics import line_network
    done = []
    real = sfft.irfft

    def counting(x, n=None, axis=-1):
        done.append((x.shape, n))
        return real(x, n=n, axis=axis)
    line_network.sfft.irfft = counting
    try:
        return fn(), done
    finally:
        line_network.sfft.irfft = real


def irfft_floor(done, repeat=7) -> float:
    """Time of exactly those inverse FFTs, alone."""
    arrays = [(np.ones(shape, dtype=complex), n) for shape, n in done]
    return best_of(lambda: [sfft.irfft(a, n=n, axis=-1) for a, n in arrays], repeat=repeat)


def old_engine_choice(z, td, rise, drv, swing, cap, limits) -> float:
    """The former chooser: short segments folded, each candidate by the method of characteristics."""
    from moc_reference import Load, merge_short, simulate
    zz, tt = merge_short(z, td, rise / 10.0)
    t0 = time.perf_counter()
    loads = [Load(cap=cap)] * 4 + [Load(cap=cap, end_ohm=50.0, end_cap=c) for c in (1e-10, 1.2e-10)]
    rs = [drv, drv + 22, drv + 24, drv + 27, drv, drv]
    for r, ld in zip(rs, loads):
        simulate(zz, tt, swing, rise, r, ld)
    return time.perf_counter() - t0


def one_net() -> None:
    # a 5-segment net whose shortest segment is 0.5 ps (a via-length stub of trace): delays exact, nothing folded
    z = [52.0, 47.0, 55.0, 50.0, 45.0]
    td = [0.35e-9, 0.5e-12, 0.6e-9, 0.02e-9, 0.3e-9]
    rise, drv, swing, cap = 0.3e-9, 20.0, 3.3, 2e-12
    limits = Limits()
    lossy = [LineLoss(f_ref=1.7e9, r_ac=2.0 * zi * 0.3 * t / 1e-9, tan_delta=0.02, r_dc=0.5 * t / 1e-9)
             for zi, t in zip(z, td)]
    for label, losses in (("lossless", None), ("lossy", lossy)):
        _, rec, cands = choose(z, td, rise, drv, swing, cap, limits, losses=losses)
        t = best_of(lambda: choose(z, td, rise, drv, swing, cap, limits, losses=losses), repeat=7, number=5)
        print(f"one 5-segment net ({label}, shortest segment 0.5 ps), termination choice with {len(cands)} "
              f"candidates: {t * 1e3:.2f} ms -> {rec.text}")
        (_, _, _), done = recorded_irffts(lambda: choose(z, td, rise, drv, swing, cap, limits, losses=losses))
        fl = irfft_floor(done)
        print(f"  floor: its {len(done)} inverse FFTs alone ({', '.join(f'{n} samples x {sh[0]}' for sh, n in done)}): "
              f"{fl * 1e3:.3f} ms (ratio {t / fl:.1f})")
    old = old_engine_choice(z, td, rise, drv, swing, cap, limits)
    print(f"  reference: the former method-of-characteristics chooser on the same net (short segments folded, "
          f"6 candidates): {old * 1e3:.1f} ms")


def thousand_nets() -> None:
    rng = np.random.default_rng(8)
    # four layers, two widths each: eight cross-sections (Z0, loss per ns of delay), as on a real board
    xsec = [(float(z), float(a), float(r)) for z, a, r in zip(rng.uniform(42.0, 58.0, 8), rng.uniform(0.1, 0.35, 8),
                                                              rng.uniform(0.2, 0.8, 8))]
    nets = []
    for _ in range(1000):
        k = int(rng.integers(3, 6))
        pick = [xsec[i] for i in rng.integers(0, len(xsec), k)]
        z = [p[0] for p in pick]
        td = rng.uniform(0.05e-9, 0.6e-9, k)
        rise = float(rng.choice([150e-12, 300e-12, 500e-12, 1e-9, 3e-9]))
        td *= max(1.0, 0.6 * rise / td.sum())        # every net flagged: TD >= Tr/2
        drv = float(rng.choice([10.0, 25.0, 40.0, 60.0]))
        f0 = 0.5 / rise
        losses = [LineLoss(f_ref=f0, r_ac=2.0 * zi * a * np.sqrt(f0 / 1e9) * t / 1e-9, tan_delta=0.02,
                           r_dc=r * t / 1e-9) for (zi, a, r), t in zip(pick, td)]
        nets.append((z, list(td), rise, drv, losses))
    limits = Limits()
    sizes, counts = [], {}

    def run_all():
        t0 = time.perf_counter()
        for z, td, rise, drv, losses in nets:
            _, rec, cands = choose(z, td, rise, drv, 3.3, 2e-12, limits, losses=losses, keep_waves=True)
            counts[rec.scheme] = counts.get(rec.scheme, 0) + 1
            sizes.append(len(cands))
        return time.perf_counter() - t0
    total, done = recorded_irffts(run_all)
    print(f"1000 flagged nets (3-5 segments, 150 ps-3 ns edges, lossy), every candidate: {total:.2f} s "
          f"({total:.2f} ms per net; {sum(sizes)} simulations; chosen: {counts})")
    fl = irfft_floor(done, repeat=3)
    print(f"  floor: the same run's {len(done)} inverse FFTs alone: {fl:.3f} s (ratio {total / fl:.1f})")
    args = [((z, td, rise, drv, 3.3, 2e-12, limits), {"losses": losses, "keep_waves": True})
            for z, td, rise, drv, losses in nets]
    for label, frozen in (("", False), (", garbage collector frozen as in the review's workers", True)):
        if frozen:
            gc.freeze()
        t0, c0 = time.perf_counter(), time.process_time()
        got = choose_many(args)
        wall, cpu = time.perf_counter() - t0, time.process_time() - c0
        gc.unfreeze()
        same = sum(g[1].text == (r := choose(*a, **kw)[1]).text and g[1].meets == r.meets
                   for g, (a, kw) in zip(got[:100], args[:100]))
        print(f"  the same nets batched (choose_many{label}): {wall:.2f} s wall {cpu:.2f} s CPU "
              f"(ratio {total / wall:.2f} to one at a time; same choice on {same} of the first 100)")


def demo_board() -> None:
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
    print(f"demo board (closed forms): waveform stage for {flagged} flagged nets {full - base:.2f} s next to the "
          f"rest of the review {base:.2f} s ({(full - base) / max(flagged, 1) * 1e3:.1f} ms per net)")


def board_review(n_nets: int = 1000) -> None:
    """A synthetic board of n_nets nets of 3-5 segments on four layers, every one needing termination."""
    import tempfile

    from sicheck.resources import demo_dir
    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    rng = np.random.default_rng(11)
    rows = ["net,layer,length,width,rise_time,driver_ohm"]
    for i in range(n_nets):
        rise = float(rng.choice([150, 300, 500, 1000, 3000]))
        k = int(rng.integers(3, 6))
        total = max(0.6 * rise / 6.5, 20.0) * rng.uniform(1.0, 3.0)       # mm; about 6.5 ps/mm
        for part in rng.dirichlet(np.ones(k)) * total:
            layer = str(rng.choice(["TOP", "IN3", "IN4", "BOT"]))
            width = float(rng.choice([0.1, 0.15]))
            rows.append(f"N{i},{layer},{max(part, 0.2):.2f}mm,{width}mm,{rise:g}ps,{rng.choice([10, 25, 40])}")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "board.csv"
        path.write_text("\n".join(rows) + "\n")
        tl, st = read_traces(path), load_stackup(demo_dir() / "stackup.toml")
        rules = load_rules(None)
        t0 = time.perf_counter()
        build_review(tl, st, rules, waveforms=False)
        base = time.perf_counter() - t0
        t0 = time.perf_counter()
        rv = build_review(tl, st, rules)
        full = time.perf_counter() - t0
    nets = rv.nets
    flagged = int((nets["termination"] != "not-needed").sum())
    simulated = int((nets["termination_part"] != "").sum())
    lossy = int((nets["waveform_loss"] == True).sum())  # noqa: E712
    from sicheck.waveform_review import workers
    print(f"synthetic board, {len(rv.segments)} segments (closed forms, {workers()} worker processes): waveform "
          f"stage {full - base:.2f} s for "
          f"{simulated} of {flagged} flagged nets ({lossy} with loss) next to the rest of the review {base:.2f} s")


def main() -> None:
    if "--board-nets" in sys.argv:          # only the synthetic board, at the size given
        board_review(int(sys.argv[sys.argv.index("--board-nets") + 1]))
        return
    one_net()
    thousand_nets()
    board_review()
    demo_board()


if __name__ == "__main__":
    main()
