"""Time-domain engine against the lattice (bounce) diagram and ngspice."""

import shutil
import subprocess

import numpy as np
import pytest

from sicheck.physics.transient import Load, receiver_metrics, simulate, thevenin


def at(wf, t):
    return float(np.interp(t, wf.t, wf.v_rx))


def test_lattice_diagram_open_line():
    # Bounce diagram (any transmission-line text): a step through Rs into Z0 launches V Z0/(Z0+Rs);
    # the open end doubles it (gamma_L = +1); the source reflects with gamma_S = (Rs-Z0)/(Rs+Z0).
    V, z0, rs, td = 1.0, 50.0, 25.0, 1e-9
    wf = simulate([z0], [td], V, 20e-12, rs, Load())
    launched = V * z0 / (z0 + rs)
    gs = (rs - z0) / (rs + z0)
    plateaus = [2 * launched]
    for _ in range(3):
        plateaus.append(plateaus[-1] + 2 * launched * gs ** len(plateaus))
    for k, p in enumerate(plateaus):
        assert at(wf, td * (2 * k + 1) + 0.5 * td) == pytest.approx(p, rel=1e-9)
    assert wf.v_final == pytest.approx(V)


def test_lattice_two_lines_with_a_step():
    # A step from Z1 to Z2 reflects (Z2-Z1)/(Z2+Z1) and transmits 2 Z2/(Z1+Z2).
    z1, z2, rs = 50.0, 75.0, 50.0
    wf = simulate([z1, z2], [1e-9, 1e-9], 1.0, 20e-12, rs, Load(end_ohm=75.0))   # matched far end
    first = 0.5 * 2 * z2 / (z1 + z2)                                               # launched 0.5 V
    assert at(wf, 2.5e-9) == pytest.approx(first, rel=1e-9)
    # the step's reflection returns to a matched source: nothing comes back, so the end stays put
    assert at(wf, 6.5e-9) == pytest.approx(first, rel=1e-9)
    # v_final: DC divider Rs / 75 ohm
    assert wf.v_final == pytest.approx(75.0 / 125.0)


def test_line_terminated_in_z0_shows_no_reflection():
    tr = 0.3e-9
    wf = simulate([50.0], [2e-9], 1.0, tr, 50.0, Load(end_ohm=50.0))
    m = wf.metrics
    assert m["v_max"] == pytest.approx(m["v_final"], rel=1e-9)     # no overshoot
    assert m["overshoot_pct"] == pytest.approx(0.0, abs=1e-9)
    assert m["settle_ns"] <= (2e-9 + tr / 0.8 + tr) * 1e9          # settled within one rise after the flight


def test_thevenin_equivalent():
    r, v = thevenin(100.0, 100.0, 3.3)
    assert r == 50.0 and v == pytest.approx(1.65)


def test_metrics_definitions():
    # A piecewise-linear receiver waveform whose metrics are known by construction:
    # rises through 0.5 at 1.05 ns, peaks at 1.3 V, dips to 0.85 V, and enters +/-5 % of 1 V for good at 4 ns.
    t = np.linspace(0, 10e-9, 100001)
    v = np.interp(t, [0, 1e-9, 1.1e-9, 2e-9, 3e-9, 4e-9, 10e-9], [0, 0, 1.0, 1.3, 0.85, 0.95, 1.0])
    m = receiver_metrics(t, v, 1.0, 0.2e-9)
    assert m["v_max"] == pytest.approx(1.3)
    assert m["overshoot_pct"] == pytest.approx(30.0)
    assert m["ringback"] == pytest.approx(0.15)
    assert m["settle_ns"] == pytest.approx(4.0, abs=1e-3)
    assert m["flight_ns"] == pytest.approx(1.05 - 0.1, abs=1e-3)      # 50 % crossing minus ramp's 50 % time


NGSPICE = shutil.which("ngspice")


def ngspice_wave(tmp_path, z0, td, rs, swing, ramp, load_lines, t_end):
    cir = tmp_path / "c.cir"
    out = tmp_path / "out.txt"
    cir.write_text(f"""* sicheck comparison
V1 src 0 PWL(0 0 {ramp:.6e} {swing})
R1 src a {rs}
T1 a 0 b 0 Z0={z0} TD={td:.6e}
{load_lines}
.tran {ramp / 200:.4e} {t_end:.4e} 0 {ramp / 200:.4e}
.control
run
wrdata {out} v(b)
quit
.endc
.end
""")
    subprocess.run([NGSPICE, "-b", str(cir)], capture_output=True, check=True, timeout=120)
    data = np.loadtxt(out)
    return data[:, 0], data[:, 1]


CIRCUITS = [
    # name, rs, Load, ngspice lines for the far end
    ("open end", 15.0, Load(), "Rleak b 0 1e12"),
    ("series matched", 50.0, Load(), "Rleak b 0 1e12"),
    ("capacitive load", 25.0, Load(cap=5e-12), "C1 b 0 5p"),
    ("parallel termination", 15.0, Load(end_ohm=50.0, end_volts=1.65), "Rt b vt 50\nVt vt 0 1.65"),
    ("rc termination", 15.0, Load(end_ohm=50.0, end_cap=100e-12), "Rt b m 50\nCt m 0 100p"),
]


@pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed (.ci/run installs it)")
@pytest.mark.parametrize("name,rs,load,lines", CIRCUITS, ids=[c[0] for c in CIRCUITS])
def test_against_ngspice_lossless_line(tmp_path, name, rs, load, lines):
    # Reference: ngspice (general-purpose circuit simulator, OS package) with its lossless T element.
    z0, td, swing, rise = 50.0, 1e-9, 3.3, 0.4e-9
    ramp = rise / 0.8
    wf = simulate([z0], [td], swing, rise, rs, load, t_end=40e-9)
    t_ref, v_ref = ngspice_wave(tmp_path, z0, td, rs, swing, ramp, lines, 40e-9)
    ref = receiver_metrics(t_ref, v_ref, wf.v_final, ramp)
    ours = wf.metrics
    assert ours["v_max"] == pytest.approx(ref["v_max"], rel=0.02)
    assert ours["flight_ns"] == pytest.approx(ref["flight_ns"], abs=0.05)
    assert ours["settle_ns"] == pytest.approx(ref["settle_ns"], rel=0.02, abs=0.05)
    assert ours["ringback"] == pytest.approx(ref["ringback"], rel=0.02, abs=0.02 * swing)
    # and the waveforms themselves agree sample by sample
    assert np.max(np.abs(np.interp(t_ref, wf.t, wf.v_rx) - v_ref)) < 0.03 * swing
