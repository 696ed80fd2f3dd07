"""Benchmark: cold field solves of a 4-layer board, this code against `main`, same machine, same run.

Run: python tests/bench/bench_field.py [--main /work/main] [--repeat N]
Prints figures; asserts nothing.

The board is invented for this benchmark (the "Kestrel KS-4 sensor hub"): four copper layers
(TOP with a thin conformal mask, GND, IN3 between two different dielectrics, PWR), and a
trace list that uses 12 unique cross-sections: single lines and edge-coupled pairs on the
outer and the inner signal layer, net classes with their own loss frequency.

For each code tree (this worktree, and `main` when its checkout is found) a fresh Python
process with PYTHONPATH set to that tree:
  1. solves each of the 12 cross-sections cold, with everything a review needs for it
     (impedance, modes, isolated line, loss tangent share, Wheeler's dZ/dn), one at a time;
  2. runs `review --solver field` on the board with an empty cache (in-process CLI call).
The two trees run alternately, in the same run, so the ratios compare like with like on a
shared, noisy machine.
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


# Runs inside a fresh interpreter with PYTHONPATH = the tree under test. Works with the API of
# `main` (solve_field + wheeler_derivative) and with the one-call solve of this branch.
CHILD = textwrap.dedent("""
    import json, os, sys, time
    from pathlib import Path
    folder = Path(sys.argv[1])
    os.environ["SICHECK_CACHE_DIR"] = str(folder / "cache")
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
    per = []
    for xs in xs_list:
        t0 = time.perf_counter()
        r = field2d.solve_field(xs)
        solve = lambda lst: [field2d.solve_field(x) for x in lst]
        try:
            dz = wheeler_derivative([xs], solve, [r])[0]       # this branch: from the same solves
        except TypeError:
            dz = wheeler_derivative([xs], solve)[0]            # main: two receded solves
        per.append({"s": time.perf_counter() - t0, "unc": r.uncertainty_pct, "z": r.signal_z,
                    "dzdn": float(dz), "loss_unc": getattr(r, "loss_uncertainty_pct", None),
                    "label": f"{xs.kind[:5]} w={xs.width * 1e3:.2f}" + ("" if xs.gap is None else
                                                                      f" s={xs.gap * 1e3:.2f}")})
    from sicheck.cli import main
    from sicheck.resources import default_rules_path
    os.environ["SICHECK_CACHE_DIR"] = str(folder / "cache-review")
    t0 = time.perf_counter()
    code = 0
    try:
        main(["review", str(folder / "traces.csv"), "--stackup", str(folder / "stackup.toml"),
              "--rules", str(default_rules_path()), "--rules", str(folder / "rules.toml"), "--solver", "field",
              "--out", str(folder / "r.xlsx"), "--json", str(folder / "r.json")])
    except SystemExit as e:
        code = e.code
    if code not in (0, 1, None):
        raise SystemExit(f"review failed with exit code {code}")
    board = time.perf_counter() - t0
    print(json.dumps({"per": per, "board": board, "n": len(xs_list)}))
""")


def run_tree(tree: Path, workdir: Path) -> dict:
    with tempfile.TemporaryDirectory(dir=workdir) as tmp:
        folder = Path(tmp)
        write_board(folder)
        rows = [(layer, w, gap) for _, layer, _, w, _, gap in TRACES]
        env = dict(os.environ, PYTHONPATH=str(tree))
        env.pop("SICHECK_CACHE_DIR", None)
        out = subprocess.run([sys.executable, "-c", CHILD, str(folder), json.dumps(rows)], env=env, cwd=folder,
                             capture_output=True, text=True, check=False)
        if out.returncode != 0:
            raise RuntimeError(f"{tree}: {out.stderr[-2000:]}")
        return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--main", default="/work/main", help="checkout of main to compare against")
    ap.add_argument("--repeat", type=int, default=1)
    a = ap.parse_args()
    trees = [("this", HERE)]
    if (Path(a.main) / "sicheck" / "physics" / "field2d.py").exists():
        trees.append(("main", Path(a.main)))
    else:
        print(f"(no checkout of main at {a.main}: printing this tree only)")
    res: dict[str, list[dict]] = {k: [] for k, _ in trees}
    with tempfile.TemporaryDirectory() as work:
        for _ in range(a.repeat):
            for name, tree in trees:
                res[name].append(run_tree(tree, Path(work)))

    def best(name, f):
        return min(f(r) for r in res[name])
    this = res["this"][0]
    print(f"cold field solves, {this['n']} unique cross-sections (impedance, modes, isolated line, loss), "
          f"best of {a.repeat}")
    head = f"{'cross-section':<24}{'this [s]':>10}{'unc %':>8}{'loss unc %':>11}"
    if "main" in res:
        head += f"{'main [s]':>10}{'unc %':>8}{'speed-up':>10}{'dZ/dn diff %':>14}"
    print(head)
    for i, row in enumerate(this["per"]):
        t = best("this", lambda r: r["per"][i]["s"])
        lu = row["loss_unc"]
        line = f"{row['label']:<24}{t:>10.3f}{row['unc']:>8.3f}{'' if lu is None else f'{lu:.2f}':>11}"
        if "main" in res:
            m = res["main"][0]["per"][i]
            tm = best("main", lambda r: r["per"][i]["s"])
            line += (f"{tm:>10.3f}{m['unc']:>8.3f}{tm / t:>9.1f}x"
                     f"{(row['dzdn'] / m['dzdn'] - 1) * 100:>+13.2f}")
        print(line)
    tot = best("this", lambda r: sum(p["s"] for p in r["per"]))
    brd = best("this", lambda r: r["board"])
    line = f"sum of cross-sections: this {tot:.2f} s"
    line2 = f"review --solver field, cold cache: this {brd:.2f} s"
    if "main" in res:
        totm = best("main", lambda r: sum(p["s"] for p in r["per"]))
        brdm = best("main", lambda r: r["board"])
        line += f", main {totm:.2f} s, ratio {totm / tot:.1f}x"
        line2 += f", main {brdm:.2f} s, ratio {brdm / brd:.1f}x"
    print(line)
    print(line2)


if __name__ == "__main__":
    main()
