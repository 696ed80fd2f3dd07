"""Benchmark: the waveform engine per net, for 1 000 flagged nets, and the demo board's waveform stage.

Run: python tests/bench/bench_waveform.py. Prints figures, each next to a floor measured in the same
run; asserts nothing. Floors: one inverse FFT of the same record for all candidates (the engine's
irreducible work), and the method of characteristics that sicheck used before (tests/moc_reference.py).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
from scipy import fft as sfft

HERE = Path(__file__).resolve().parent
sys.path[:0] = [str(HERE.parent.parent), str(HERE.parent)]

from sicheck.physics.causal_line import LineLoss  # noqa: E402
from sicheck.physics.line_network import RECORD_FACTOR, SAMPLES_PER_RAMP  # noqa: E402
from sicheck.physics.termination_choice import Limits, choose  # noqa: E402
from sicheck.physics.transient import RAMP_PER_RISE  # noqa: E402


def best_of(fn, repeat=5, number=1):
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fn()
        best = min(best, (time.perf_counter() - t0) / number)
    return best


def fft_floor(n_samples: int, candidates: int) -> float:
    spec = np.ones((candidates, n_samples // 2 + 1), dtype=complex)
    return best_of(lambda: sfft.irfft(spec, n=n_samples, axis=-1), repeat=7, number=5)


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
    ramp = rise * RAMP_PER_RISE
    n = int(RECORD_FACTOR * (ramp + 8 * 2 * sum(td) + 12 * cap * 20 + 4 * ramp) / (ramp / SAMPLES_PER_RAMP))
    fl = fft_floor(sfft.next_fast_len(n, real=True), len(cands))
    print(f"  floor: one inverse FFT of that record ({n} samples) for {len(cands)} candidates: {fl * 1e3:.3f} ms "
          f"(ratio {t / fl:.1f})")
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
    from sicheck.physics import line_network
    done = []
    real_irfft = sfft.irfft

    def counting_irfft(x, n=None, axis=-1):
        done.append((x.shape, n))
        return real_irfft(x, n=n, axis=axis)
    line_network.sfft.irfft = counting_irfft
    try:
        t0 = time.perf_counter()
        sizes, counts = [], {}
        for z, td, rise, drv, losses in nets:
            _, rec, cands = choose(z, td, rise, drv, 3.3, 2e-12, limits, losses=losses, keep_waves=True)
            counts[rec.scheme] = counts.get(rec.scheme, 0) + 1
            sizes.append(len(cands))
        total = time.perf_counter() - t0
    finally:
        line_network.sfft.irfft = real_irfft
    print(f"1000 flagged nets (3-5 segments, 150 ps-3 ns edges, lossy), every candidate: {total:.2f} s "
          f"({total:.2f} ms per net; {sum(sizes)} simulations; chosen: {counts})")
    arrays = [(np.ones(shape, dtype=complex), n) for shape, n in done]
    fl = best_of(lambda: [real_irfft(a, n=n, axis=-1) for a, n in arrays], repeat=3)
    print(f"  floor: the same run's {len(done)} inverse FFTs alone: {fl:.3f} s (ratio {total / fl:.1f})")


def demo_board() -> None:
    from sicheck.cli import _merge_rules
    from sicheck.resources import demo_dir
    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    d = demo_dir()
    rules = _merge_rules(load_rules(None), load_rules(d / "rules.toml"))
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


def board_review() -> None:
    """A synthetic board of 1 000 nets of 3-5 segments on four layers, every one needing termination."""
    import tempfile

    from sicheck.resources import demo_dir
    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    rng = np.random.default_rng(11)
    rows = ["net,layer,length,width,rise_time,driver_ohm"]
    for i in range(1000):
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
    print(f"synthetic board, {len(rv.segments)} segments (closed forms): waveform stage {full - base:.2f} s for "
          f"{simulated} of {flagged} flagged nets ({lossy} with loss) next to the rest of the review {base:.2f} s")


def main() -> None:
    one_net()
    thousand_nets()
    board_review()
    demo_board()


if __name__ == "__main__":
    main()
