"""Benchmark: cold field solves of a 4-layer board, this code against `main`, same machine, same run.

Run: python tests/bench/bench_field.py [--main /work/main] [--repeat N]
Prints figures; asserts nothing.

The board is invented for this benchmark (the "Kestrel KS-4 sensor hub"): four copper layers
(TOP with a thin conformal mask, GND, IN3 between two different dielectrics, PWR), and a
trace list that uses 12 unique cross-sections: single lines and edge-coupled pairs on the
outer and the inner signal layer, net classes with their own loss frequency.

For each code tree (this worktree, and `main` when its checkout is found) one Python process
with PYTHONPATH set to that tree, driven command by command so that the two trees alternate
(the same cross-section on both, back to back; then the whole review on both), repeated:
  1. each of the 12 cross-sections solved cold with everything a review needs for it
     (impedance, modes, isolated line, loss-tangent share, Wheeler's dZ/dn), one at a time;
  2. `review --solver field` on the board with an empty cache (the CLI, in-process), next to
     the same review with `--solver formula` as the floor of everything that is not a field solve.
Wall-clock and CPU seconds are printed with their ratios; on a shared, noisy machine only the
ratios of the same run mean anything.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import textwrap
from pathlib import Path

HERE = Path(__file__).resolve().parents[2]

STACKUP = """\
name = "Kestrel KS-4 sensor hub (invented for the field-solver benchmark)"
units = "mm"

[[layers]]
type = "mask"
thickness = "15um"
er = 3.6
loss_tangent = 0.02

[[layers]]
type = "signal"
name = "TOP"
thickness = "40um"

[[layers]]
type = "dielectric"
kind = "prepreg"
thickness = 0.11
er = 3.9
loss_tangent = 0.018

[[layers]]
type = "plane"
name = "GND"
copper = "0.5oz"

[[layers]]
type = "dielectric"
kind = "core"
thickness = 0.5
er = 4.25
loss_tangent = 0.015

[[layers]]
type = "signal"
name = "IN3"
copper = "0.5oz"

[[layers]]
type = "dielectric"
kind = "prepreg"
thickness = 0.18
er = 3.8
loss_tangent = 0.019

[[layers]]
type = "plane"
name = "PWR"
copper = "1oz"
"""

RULES = """\
name = "KS-4 classes"

[[net_class]]
name = "SERDES"
match = ["SD_*"]
rise_time = "60ps"
freq = "6GHz"

[[net_class]]
name = "MIPI"
match = ["CSI_*"]
rise_time = "150ps"
freq = "1.25GHz"

[[net_class]]
name = "MEM"
match = ["QSPI_*"]
rise_time = "400ps"
freq = "300MHz"

[[net_class]]
name = "CLOCKS"
match = ["CLK_*"]
rise_time = "800ps"
"""

# (net, layer, length mm, width mm, pair, gap mm): 6 cross-sections on TOP, 6 on IN3
TRACES = [
    ("QSPI_CLK", "TOP", 22.0, 0.12, "", None),
    ("QSPI_D0", "TOP", 25.0, 0.20, "", None),
    ("QSPI_D1", "IN3", 31.0, 0.30, "", None),
    ("CLK_25M", "TOP", 40.0, 0.30, "", None),
    ("CSI_CLK_P", "TOP", 18.0, 0.10, "CSI_CLK_N", 0.15),
    ("CSI_D0_P", "TOP", 19.0, 0.15, "CSI_D0_N", 0.20),
    ("SD_TX_P", "TOP", 9.0, 0.09, "SD_TX_N", 0.25),
    ("QSPI_D2", "IN3", 28.0, 0.10, "", None),
    ("QSPI_D3", "IN3", 29.0, 0.15, "", None),
    ("CSI_D1_P", "IN3", 45.0, 0.10, "CSI_D1_N", 0.20),
    ("SD_TX_P", "IN3", 80.0, 0.08, "SD_TX_N", 0.15),
    ("SD_RX_P", "IN3", 95.0, 0.12, "SD_RX_N", 0.30),
]


def write_board(folder: Path) -> tuple[Path, Path, Path]:
    rows = ["Net,Layer,Length [mm],Width [mm],Rise Time,Pair,Gap [mm],Net Class,Driver Ohm,Load pF"]
    for net, layer, length, w, pair, gap in TRACES:
        rows.append(f"{net},{layer},{length},{w},,{pair},{'' if gap is None else gap},,,")
    (folder / "stackup.toml").write_text(STACKUP)
    (folder / "rules.toml").write_text(RULES)
    (folder / "traces.csv").write_text("\n".join(rows) + "\n")
    return folder / "traces.csv", folder / "stackup.toml", folder / "rules.toml"


# Runs inside a fresh interpreter with PYTHONPATH = the tree under test and answers commands on
# stdin, so that the parent can interleave the two trees cross-section by cross-section. Works with
# the API of `main` (solve_field, then wheeler_derivative by receded solves) and with this branch's.
CHILD = textwrap.dedent("""
    import json, os, sys, time
    from pathlib import Path
    folder = Path(sys.argv[1])
    proto = os.fdopen(os.dup(1), "w")             # answers go here; the review's own output to /dev/null
    os.dup2(os.open(os.devnull, os.O_WRONLY), 1)
    from sicheck.stackup import load_stackup
    from sicheck.physics import field2d
    from sicheck.physics.line_loss import wheeler_derivative
    rows = json.loads(sys.argv[2])
    st = load_stackup(folder / "stackup.toml")
    seen, xs_list = set(), []
    for layer, w, gap in rows:
        xs = st.cross_section(layer, w * 1e-3, None if gap is None else gap * 1e-3)
        if xs not in seen:
            seen.add(xs)
            xs_list.append(xs)

    def solve_all(lst):
        return [field2d.solve_field(x) for x in lst]

    def one(i):
        xs = xs_list[i]
        w0, c0 = time.perf_counter(), time.process_time()
        r = field2d.solve_field(xs)
        try:
            dz = wheeler_derivative([xs], solve_all, [r])[0]    # this branch: from the same solves
        except TypeError:
            dz = wheeler_derivative([xs], solve_all)[0]         # main: two receded solves
        return {"s": time.perf_counter() - w0, "cpu": time.process_time() - c0, "unc": r.uncertainty_pct,
                "dzdn": float(dz), "loss_unc": getattr(r, "loss_uncertainty_pct", None),
                "label": f"{xs.kind[:5]} w={xs.width * 1e3:.2f}" + ("" if xs.gap is None else
                                                                  f" s={xs.gap * 1e3:.2f}")}

    def review(k, solver):
        from sicheck.cli import main
        from sicheck.resources import default_rules_path
        os.environ["SICHECK_CACHE_DIR"] = str(folder / f"cache-{os.getpid()}-{k}")     # empty: cold
        w0 = time.perf_counter()
        code = 0
        try:
            main(["review", str(folder / "traces.csv"), "--stackup", str(folder / "stackup.toml"),
                  "--rules", str(default_rules_path()), "--rules", str(folder / "rules.toml"), "--solver", solver,
                  "--out", str(folder / f"r-{os.getpid()}.xlsx"), "--json", str(folder / f"r-{os.getpid()}.json")])
        except SystemExit as e:
            code = e.code
        if code not in (0, 1, None):
            raise SystemExit(f"review failed with exit code {code}")
        return {"s": time.perf_counter() - w0}

    print(json.dumps({"n": len(xs_list)}), file=proto, flush=True)
    for k, line in enumerate(sys.stdin):
        cmd, _, arg = line.strip().partition(" ")
        out = one(int(arg)) if cmd == "solve" else review(k, arg)
        print(json.dumps(out), file=proto, flush=True)
""")


class Child:
    """One interpreter running CHILD on one code tree."""

    def __init__(self, tree: Path, folder: Path):
        rows = [(layer, w, gap) for _, layer, _, w, _, gap in TRACES]
        env = dict(os.environ, PYTHONPATH=str(tree))
        env.pop("SICHECK_CACHE_DIR", None)
        self.p = subprocess.Popen([sys.executable, "-c", CHILD, str(folder), json.dumps(rows)], env=env, cwd=folder,
                                  stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
        self.n = self._read()["n"]

    def _read(self) -> dict:
        line = self.p.stdout.readline()
        if not line:
            raise RuntimeError(f"benchmark child failed (exit code {self.p.wait()})")
        return json.loads(line)

    def ask(self, cmd: str) -> dict:
        self.p.stdin.write(cmd + "\n")
        self.p.stdin.flush()
        return self._read()

    def close(self) -> None:
        self.p.stdin.close()
        self.p.wait()


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--main", default="/work/main", help="checkout of main to compare against")
    ap.add_argument("--repeat", type=int, default=3, help="interleaved repetitions; the best of each is printed")
    a = ap.parse_args()
    trees = [("this", HERE)]
    if (Path(a.main) / "sicheck" / "physics" / "field2d.py").exists():
        trees.append(("main", Path(a.main)))
    else:
        print(f"(no checkout of main at {a.main}: printing this tree only)")
    with tempfile.TemporaryDirectory() as work:
        folder = Path(work)
        write_board(folder)
        kids = {name: Child(tree, folder) for name, tree in trees}
        n = kids["this"].n
        per: dict[str, list[list[dict]]] = {name: [[] for _ in range(n)] for name in kids}
        board: dict[str, list[float]] = {name: [] for name in kids}
        floor: list[float] = []
        for _ in range(a.repeat):
            for i in range(n):                      # the same cross-section on both trees, back to back
                for name, kid in kids.items():
                    per[name][i].append(kid.ask(f"solve {i}"))
            for name, kid in kids.items():
                board[name].append(kid.ask("review field")["s"])
            floor.append(kids["this"].ask("review formula")["s"])
        for kid in kids.values():
            kid.close()

    def best(runs, key="s"):
        return min(r[key] for r in runs)
    has_main = "main" in kids
    print(f"Cold field solves of the KS-4 board: {n} unique cross-sections, each with impedance, modes, isolated "
          f"line, loss-tangent share and Wheeler's dZ/dn. Best of {a.repeat} interleaved runs; wall clock and CPU "
          f"seconds (CPU counts every thread).")
    head = f"{'cross-section':<20}{'this s':>8}{'cpu s':>7}{'unc %':>7}{'loss %':>7}"
    if has_main:
        head += f"{'main s':>8}{'cpu s':>7}{'unc %':>7}{'wall x':>8}{'cpu x':>7}{'dZ/dn vs main':>15}"
    print(head)
    tot = {name: [0.0, 0.0] for name in kids}
    for i in range(n):
        row = per["this"][i][0]
        for name in kids:
            tot[name][0] += best(per[name][i])
            tot[name][1] += best(per[name][i], "cpu")
        t, tc = best(per["this"][i]), best(per["this"][i], "cpu")
        lu = row["loss_unc"]
        line = f"{row['label']:<20}{t:>8.3f}{tc:>7.2f}{row['unc']:>7.3f}{'' if lu is None else f'{lu:.2f}':>7}"
        if has_main:
            m = per["main"][i][0]
            tm, tmc = best(per["main"][i]), best(per["main"][i], "cpu")
            line += (f"{tm:>8.3f}{tmc:>7.2f}{m['unc']:>7.3f}{tm / t:>7.1f}x{tmc / tc:>6.1f}x"
                     f"{(row['dzdn'] / m['dzdn'] - 1) * 100:>+14.2f}%")
        print(line)
    line = f"sum over cross-sections: this {tot['this'][0]:.2f} s (cpu {tot['this'][1]:.2f} s)"
    if has_main:
        line += (f", main {tot['main'][0]:.2f} s (cpu {tot['main'][1]:.2f} s); ratio "
                 f"{tot['main'][0] / tot['this'][0]:.1f}x wall, {tot['main'][1] / tot['this'][1]:.1f}x cpu")
    print(line)
    line = (f"review --solver field, cold cache, whole command in-process: this {min(board['this']):.2f} s "
            f"(the same review with --solver formula, no field solves: {min(floor):.2f} s)")
    if has_main:
        line += f"; main {min(board['main']):.2f} s; ratio {min(board['main']) / min(board['this']):.1f}x"
    print(line)


if __name__ == "__main__":
    main()
