"""ngspice (the OS package) on a netlist a test writes: the outside reference for the waveform tests."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

NGSPICE = shutil.which("ngspice")
needs_ngspice = pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed (.ci/run installs it)")


def transient(folder: Path, title: str, body: str, step: float, t_end: float,
              probes: tuple[str, ...] = ("rx",)) -> tuple[np.ndarray, list[np.ndarray]]:
    """Transient analysis of ``body`` (sources included) at ``step`` up to ``t_end``: (t, [v(probe) ...]).

    ngspice's default trapezoidal integration can stop with "timestep too small" once a circuit of T lines
    has settled; the run is then repeated with Gear integration, and a run that still ends early fails.
    """
    cir, out = folder / "c.cir", folder / "out.txt"
    for method in ("", ".options method=gear\n"):
        cir.write_text(f"* {title}\n{body}\n{method}.tran {step:.4e} {t_end:.4e} 0 {step:.4e}\n.control\nrun\n"
                       f"wrdata {out} {' '.join(f'v({p})' for p in probes)}\nquit\n.endc\n.end\n")
        subprocess.run([NGSPICE, "-b", str(cir)], capture_output=True, check=True, timeout=300)
        data = np.loadtxt(out)
        if data[-1, 0] >= 0.99 * t_end:
            break
    assert data[-1, 0] >= 0.99 * t_end, f"ngspice stopped early: {data[-1, 0]:.4g} of {t_end:.4g} s"
    return data[:, 0], [data[:, 2 * k + 1] for k in range(len(probes))]     # wrdata: t v1 t v2 ...


def ramp_run(folder: Path, body: str, swing: float, ramp: float, t_end: float, step: float,
             probe: str = "rx") -> tuple[np.ndarray, np.ndarray]:
    """``body`` driven from node ``src`` by a linear ramp of ``swing`` volts over ``ramp``: (t, v(probe))."""
    t, (v,) = transient(folder, "sicheck comparison", f"V1 src 0 PWL(0 0 {ramp:.6e} {swing})\n{body}", step, t_end,
                        (probe,))
    return t, v


def ltra_lossless(name: str, a: str, b: str, z0: float, td: float) -> str:
    """A lossless line as ngspice's LTRA model (L = Z0 TD, C = TD / Z0 over a unit length), for circuits on
    which the T element stops with "timestep too small" (a line behind a series capacitor)."""
    return (f"O{name} {a} 0 {b} 0 m{name}\n"
            f".model m{name} ltra r=0 g=0 l={z0 * td:.9e} c={td / z0:.9e} len=1")
