"""Benchmark: closed-form throughput, a 100 000-segment review, and start-up time.

Run: python tests/bench/bench_review.py [--segments N]. Prints figures; asserts nothing.
"""

from __future__ import annotations

import argparse
import csv
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

# run from a checkout without installing: the repository root on the path
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))


def closed_form_throughput(n: int = 1_000_000) -> None:
    from sicheck.physics.coupled_microstrip import kirschning_jansen
    from sicheck.physics.microstrip import hammerstad_jensen
    from sicheck.physics.stripline import coupled_stripline, stripline
    rng = np.random.default_rng(1)
    w = rng.uniform(0.05e-3, 0.5e-3, n)
    h = rng.uniform(0.05e-3, 0.3e-3, n)
    t = np.full(n, 35e-6)
    er = rng.uniform(3.0, 4.6, n)
    s = rng.uniform(0.08e-3, 0.4e-3, n)
    for name, fn in (("microstrip (Hammerstad-Jensen)", lambda: hammerstad_jensen(w, h, t, er)),
                     ("stripline (Cohn x Wheeler, offset)", lambda: stripline(w, t, h, 1.5 * h, er, er)),
                     ("coupled microstrip (Kirschning-Jansen)", lambda: kirschning_jansen(w, h, t, s, er)),
                     ("coupled stripline (Cohn)", lambda: coupled_stripline(w, t, s, h, 1.5 * h, er, er))):
        fn()
        t0 = time.perf_counter()
        fn()
        dt = time.perf_counter() - t0
        print(f"closed form, {name:<40} {n / dt / 1e6:6.2f} M segments/s")


def synthetic_board(path: Path, n: int) -> None:
    rng = np.random.default_rng(2)
    layers = ["TOP", "IN3", "IN4", "IN6", "BOT"]
    with open(path, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["Net", "Layer", "Length [mm]", "Width [mm]", "Rise Time", "Pair", "Gap [mm]"])
        net = 0
        i = 0
        while i < n:
            segs = int(rng.integers(1, 4))
            pair = rng.random() < 0.2
            for _ in range(min(segs, n - i)):
                w.writerow([f"N{net}_P" if pair else f"N{net}", layers[int(rng.integers(0, 5))],
                            f"{rng.uniform(1, 80):.2f}", f"{rng.choice([0.1, 0.12, 0.15, 0.2]):.2f}",
                            f"{int(rng.choice([250, 400, 1000, 5000]))}ps", f"N{net}_N" if pair else "",
                            "0.15" if pair else ""])
                i += 1
            net += 1


class Clock:
    """Wall and CPU time of a block (the machine is shared: CPU time is the steadier of the two)."""

    @staticmethod
    def _cpu():
        return time.process_time()

    def __enter__(self):
        self.w0, self.c0 = time.perf_counter(), self._cpu()
        return self

    def __exit__(self, *exc):
        self.wall = time.perf_counter() - self.w0
        self.cpu = self._cpu() - self.c0

    def __str__(self):
        return f"{self.wall:6.2f} s wall {self.cpu:6.2f} s CPU"


class ClockWithChildren(Clock):
    """Clock whose CPU time also counts child processes waited for in the block (the forked JSON writer)."""

    @staticmethod
    def _cpu():
        t = os.times()
        return time.process_time() + t.children_user + t.children_system


def output_stage(rv, d: Path, repeat: int = 2) -> dict[str, Clock]:
    """The workbook and the JSON of one review, written one after the other with the garbage collector on
    (as run_review wrote them before), and as run_review writes them now (collector paused, JSON in a
    forked child). Best of `repeat` by CPU: the machine is shared."""
    from rich.console import Console

    from sicheck.reports.atomic import write_text_atomic
    from sicheck.reports.json_report import review_json
    from sicheck.reports.workbook import write_workbook
    from sicheck.review_cmd import _write_reports

    def one_after_the_other():
        write_workbook(rv, d / "seq.xlsx")
        write_text_atomic(d / "seq.json", review_json(rv))

    def as_run_review():
        _write_reports(rv, d / "now.xlsx", d / "now.json", Console(quiet=True), True)

    out: dict[str, Clock] = {}
    for name, fn in (("one after the other, collector on", one_after_the_other),
                     ("as run_review (JSON forked, collector off)", as_run_review)):
        best = None
        for _ in range(repeat):
            with ClockWithChildren() as c:
                fn()
            best = c if best is None or c.cpu < best.cpu else best
        out[name] = best
    return out


def floor(csv_path: Path, xlsx: Path) -> Clock:
    """The floor: pandas reads the CSV, openpyxl write-only (lxml) writes the same input rows."""
    import pandas as pd
    from openpyxl import Workbook
    with Clock() as c:
        df = pd.read_csv(csv_path)
        wb = Workbook(write_only=True)
        ws = wb.create_sheet("rows")
        ws.append(list(df.columns))
        for row in df.itertuples(index=False):
            ws.append([None if (isinstance(v, float) and v != v) else v for v in row])
        wb.save(xlsx)
    return c


def stages(csv_path: Path, stackup: Path, d: Path, waveforms: bool) -> tuple[dict[str, Clock], object]:
    """The review stage by stage, as run_review runs it (closed forms, so no field solves); and the review."""
    from sicheck.reports.atomic import write_text_atomic
    from sicheck.reports.json_report import review_json
    from sicheck.reports.workbook import write_workbook
    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    out: dict[str, Clock] = {}
    with Clock() as out["read trace list"]:
        tl = read_traces(csv_path)
        st, rs = load_stackup(stackup), load_rules(None)
    with Clock() as out["tables and findings"]:
        rv = build_review(tl, st, rs, waveforms=False)
    if waveforms:
        with Clock() as c:
            rv = build_review(tl, st, rs, waveforms=True)
        c.wall -= out["tables and findings"].wall
        c.cpu -= out["tables and findings"].cpu
        out["waveform stage (build with - without)"] = c
    with Clock() as out["workbook"]:
        write_workbook(rv, d / "stages.xlsx")
    with Clock() as out["JSON"]:
        write_text_atomic(d / "stages.json", review_json(rv))
    return out, rv


def full_review(csv_path: Path, stackup: Path, out: Path, js: Path) -> Clock:
    from sicheck.review_cmd import run_review
    with Clock() as c:
        run_review(csv_path, stackup, None, out, js, "formula", None, None, None, quiet=True)
    return c


def program_review(csv_path: Path, stackup: Path, out: Path, js: Path) -> Clock:
    """`python -m sicheck review` as a user runs it: its own process (start-up and exit included); the CPU time
    counts every process it ran (the waveform workers, the forked JSON writer)."""
    cmd = [sys.executable, "-m", "sicheck", "review", str(csv_path), "--stackup", str(stackup), "--solver", "formula",
           "--out", str(out), "--json", str(js)]
    root = str(Path(__file__).resolve().parents[2])
    env = {**os.environ, "PYTHONPATH": root + os.pathsep + os.environ.get("PYTHONPATH", "")}
    c = Clock()
    w0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env)
    _, status, usage = os.wait4(proc.pid, 0)
    c.wall = time.perf_counter() - w0
    c.cpu = usage.ru_utime + usage.ru_stime          # the process and the children it waited for
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode not in (0, 1):
        raise SystemExit(f"sicheck review failed ({proc.returncode}): {proc.stderr.read().decode()[-2000:]}")
    return c


def writer_comparison(csv_path: Path, stackup: Path, d: Path) -> None:
    """openpyxl write-only (lxml) against XlsxWriter (constant memory) on the same cells: the review's
    Segments, Nets and Findings values, numbers with a number format per column, text as text."""
    import math

    import pandas as pd
    import xlsxwriter
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell

    from sicheck.review import build_review
    from sicheck.rules import load_rules
    from sicheck.stackup import load_stackup
    from sicheck.traces import read_traces
    rv = build_review(read_traces(csv_path), load_stackup(stackup), load_rules(None), waveforms=False)
    tables = [rv.segments.drop(columns=["xs"]), rv.nets, pd.DataFrame([f.as_dict() for f in rv.findings])]
    data = []
    for df in tables:
        cols = []
        for c in df.columns:
            a = df[c].to_numpy()
            if a.dtype.kind in "fiub":
                cols.append([None if not math.isfinite(v) else v for v in a.astype(float).tolist()])
            else:
                cols.append([None if v is None or (isinstance(v, float) and v != v) else str(v) for v in a.tolist()])
        data.append(([str(c) for c in df.columns], list(zip(*cols))))
    cells = sum(len(h) * len(rows) for h, rows in data)

    def with_openpyxl(path):
        wb = Workbook(write_only=True)
        for k, (head, rows) in enumerate(data):
            ws = wb.create_sheet(f"t{k}")
            ws.append(head)
            styled = [WriteOnlyCell(ws, value=0.0) for _ in head]      # one styled cell per column, reused
            for c in styled:
                c.number_format = "0.000"
            for r in rows:
                out = []
                for j, v in enumerate(r):
                    if isinstance(v, float):
                        c = styled[j]
                        c.value = v
                        out.append(c)
                    else:
                        out.append(v)
                ws.append(out)
        wb.save(path)

    def with_xlsxwriter(path):
        wb = xlsxwriter.Workbook(str(path), {"constant_memory": True})
        fmt = wb.add_format({"num_format": "0.000"})
        for k, (head, rows) in enumerate(data):
            ws = wb.add_worksheet(f"t{k}")
            for j in range(len(head)):
                ws.set_column(j, j, 10, fmt)                              # the column's format, no per-cell style
            for j, h in enumerate(head):
                ws.write_string(0, j, h)
            for i, r in enumerate(rows, start=1):
                for j, v in enumerate(r):
                    if v is None:
                        continue
                    if isinstance(v, str):
                        ws.write_string(i, j, v)
                    else:
                        ws.write_number(i, j, v)
        wb.close()

    print(f"XLSX writers on the same {cells} cells (review's Segments, Nets, Findings):")
    for name, fn in (("openpyxl write-only + lxml", with_openpyxl), ("XlsxWriter constant_memory", with_xlsxwriter)):
        with Clock() as c:
            fn(d / f"writer-{name.split()[0]}.xlsx")
        print(f"  {name:<28} {c}  ({c.cpu / cells * 1e6:.2f} us CPU per cell)")


def json_encoder_comparison(rv) -> None:
    """The standard library's json against orjson on the same document (the review's, built once)."""
    import json

    import orjson

    from sicheck.reports.json_report import review_dict
    doc = review_dict(rv)
    print("JSON encoders on the review's document:")
    for name, fn in (("json (standard library, C encoder)",
                      lambda: json.dumps(doc, ensure_ascii=False, allow_nan=False, separators=(",", ":"))),
                     ("orjson", lambda: orjson.dumps(doc, option=orjson.OPT_SERIALIZE_NUMPY))):
        with Clock() as c:
            text = fn()
        print(f"  {name:<36} {c}  ({len(text) / 1e6:.0f} MB of text)")


def deflate_comparison(xlsx: Path) -> None:
    """zlib (levels 1 and 6) against ISA-L (isal, level 1) on the largest sheet XML of the review workbook."""
    import zipfile
    import zlib

    from isal import isal_zlib
    with zipfile.ZipFile(xlsx) as z:
        name = max(z.infolist(), key=lambda i: i.file_size).filename
        data = z.read(name)
    print(f"deflate of {name} ({len(data) / 1e6:.0f} MB of XML):")
    for label, mod, level in (("zlib level 1", zlib, 1), ("zlib level 6", zlib, 6), ("isal level 1", isal_zlib, 1)):
        with Clock() as c:
            z = mod.compressobj(level, mod.DEFLATED, -15)
            packed = sum(len(z.compress(data[i:i + (1 << 22)])) for i in range(0, len(data), 1 << 22)) + len(z.flush())
        print(f"  {label:<14} {c}  -> {packed / 1e6:.1f} MB")


def version_time() -> float:
    exe = Path(sys.executable).parent / "sicheck"
    cmd = [str(exe), "--version"] if exe.exists() else [sys.executable, "-m", "sicheck", "--version"]
    best = 1e9
    for _ in range(5):
        t0 = time.perf_counter()
        subprocess.run(cmd, capture_output=True, check=True)
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--segments", type=int, default=100_000)
    ap.add_argument("--waveforms", action="store_true", help="also time the waveform stage (slow today)")
    ap.add_argument("--no-writers", action="store_true", help="skip the openpyxl / XlsxWriter comparison")
    a = ap.parse_args()
    closed_form_throughput()
    from sicheck.resources import demo_dir
    stackup = demo_dir() / "stackup.toml"
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        csv_path = d / "big.csv"
        synthetic_board(csv_path, a.segments)
        base = floor(csv_path, d / "floor.xlsx")
        print(f"{a.segments} segments, closed-form solver")
        print(f"  floor (pandas read + openpyxl write-only of the input rows): {base}")
        st, rv = stages(csv_path, stackup, d, a.waveforms)
        total = Clock()
        total.wall = sum(c.wall for k, c in st.items() if not k.startswith("waveform"))
        total.cpu = sum(c.cpu for k, c in st.items() if not k.startswith("waveform"))
        for k, c in st.items():
            print(f"  {k:<40} {c}")
        print(f"  review without the waveform stage: {total} -> {total.wall / base.wall:.2f}x floor wall, "
              f"{total.cpu / base.cpu:.2f}x floor CPU (aim <= 5x)")
        print("  output stage (workbook + JSON), CPU including the forked writer:")
        for k, c in output_stage(rv, d).items():
            print(f"    {k:<44} {c} -> {c.wall / base.wall:.2f}x floor wall, {c.cpu / base.cpu:.2f}x floor CPU")
        json_encoder_comparison(rv)
        deflate_comparison(d / "now.xlsx")
        del rv
        if a.waveforms:
            full = full_review(csv_path, stackup, d / "review.xlsx", d / "review.json")
            print(f"  sicheck review as run from the CLI (CSV in, workbook + JSON out, waveforms on): {full} -> "
                  f"{full.wall / base.wall:.2f}x floor wall, {full.cpu / base.cpu:.2f}x floor CPU")
            prog = program_review(csv_path, stackup, d / "program.xlsx", d / "program.json")
            print(f"  the same as a program (python -m sicheck review; CPU of every process): {prog} -> "
                  f"{prog.wall / base.wall:.2f}x floor wall (aim <= 5x), {prog.cpu / base.cpu:.2f}x floor CPU")
            # the machine is shared: the program and the floor again, one after the other, three times each
            pairs = [(program_review(csv_path, stackup, d / "program.xlsx", d / "program.json"),
                      floor(csv_path, d / "floor.xlsx")) for _ in range(3)]
            ratios = sorted(p.wall / f.wall for p, f in pairs)
            print("  program and floor alternated: " + "; ".join(f"{p.wall:.2f} s / {f.wall:.2f} s" for p, f in pairs)
                  + f" -> median {ratios[1]:.2f}x floor wall (aim <= 5x)")
        if not a.no_writers:
            writer_comparison(csv_path, stackup, d)
    print(f"sicheck --version: {version_time() * 1e3:.0f} ms (best of 5, console script)")


if __name__ == "__main__":
    main()
