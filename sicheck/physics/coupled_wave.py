"""Crosstalk waveforms: two identical coupled lines with their real terminations, in the frequency domain.

The weak-coupling coefficients (crosstalk.py) assume every end matched. With a real victim
driver at the near end and a receiver at the far end, the noise reflects; this module gives
the waveforms for such ends, exactly for lossless uniform lines.

A symmetric pair is decoupled by the even/odd modal transform V = T Vm, I = T Im with
T = [[1, 1], [1, -1]] (Paul 2008, modal decomposition of symmetric lines): each mode is a
line of its own with impedance Z_m and delay TD_m, whose chain matrix is
A = D = cosh(s TD_m), B = Z_m sinh(s TD_m), C = sinh(s TD_m)/Z_m. With the far-end loads
I(l) = Y V(l), the near end follows as V(0) = P V(l), I(0) = Q V(l), and the near-end
Thevenin sources give (P + Z_near Q) V(l) = [Vs, 0]: one 2x2 solve per frequency.

Back to time as in line_network.py (Wedepohl & Mohamed 1969): the transfer times the ramp's
Laplace transform is sampled at s_k = sigma + j 2 pi k/T and inverted with one inverse FFT,
sigma T = ln(1e4). The victim's voltages settle to zero (no DC path couples the lines), so
nothing needs taking out first; the aggressor's far end is returned as it is (it settles to
its DC share of the swing, which the damping handles within the record).

Validity: lossless, quasi-TEM, symmetric lines (same width), any linear R and C ends.
Checked against ngspice on a coupled LC ladder (tests/test_crosstalk_physics.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import fft as sfft

from sicheck.physics.transient import RAMP_PER_RISE

SAMPLES_PER_RAMP = 32
WRAP_DAMPING = 1e-4


@dataclass(frozen=True)
class End:
    """A line end to ground: a resistance in parallel with a capacitance (R = inf: capacitor only)."""

    r: float = float("inf")
    c: float = 0.0

    def admittance(self, s: np.ndarray) -> np.ndarray:
        g = 0.0 if not np.isfinite(self.r) else 1.0 / self.r
        return g + s * self.c


@dataclass(frozen=True)
class CoupledWaves:
    t: np.ndarray
    victim_near: np.ndarray
    victim_far: np.ndarray
    aggressor_near: np.ndarray
    aggressor_far: np.ndarray


def coupled_pair_waves(ls: float, lm: float, cs: float, cm: float, length: float, rise: float, swing: float,
                       r_driver: float, victim_near: End, victim_far: End, aggressor_far: End,
                       t_end: float | None = None) -> CoupledWaves:
    """Voltages at the four ends when the aggressor's driver (``swing`` behind ``r_driver``) ramps.

    ``ls, lm, cs, cm`` per length (SI) as in crosstalk.Coupling; ``rise`` is the 10-90 % time of
    the linear ramp (0-100 % in rise/0.8, the waveform engine's edge). ``victim_near`` is the
    victim's (quiet) driver; ``t_end`` defaults to the ramp plus twelve one-way delays.
    """
    ramp = rise * RAMP_PER_RISE
    z_e, z_o = np.sqrt((ls + lm) / (cs - cm)), np.sqrt((ls - lm) / (cs + cm))
    td_e, td_o = length * np.sqrt((ls + lm) * (cs - cm)), length * np.sqrt((ls - lm) * (cs + cm))
    if t_end is None:
        t_end = 2.0 * ramp + 12.0 * max(td_e, td_o)
    dt = ramp / SAMPLES_PER_RAMP
    n = 1 << int(np.ceil(np.log2(max(256, 1.5 * t_end / dt))))
    period = n * dt
    sigma = -np.log(WRAP_DAMPING) / period
    s = sigma + 2j * np.pi * np.arange(n // 2 + 1) / period
    # the source: a ramp of `swing` over `ramp`, Laplace transform swing (1 - e^(-s ramp)) / (ramp s^2)
    vs = swing * (1.0 - np.exp(-s * ramp)) / (ramp * s * s)
    a = np.stack([np.cosh(s * td_e), np.cosh(s * td_o)], axis=-1)          # per mode: A = D
    b = np.stack([z_e * np.sinh(s * td_e), z_o * np.sinh(s * td_o)], axis=-1)
    c = np.stack([np.sinh(s * td_e) / z_e, np.sinh(s * td_o) / z_o], axis=-1)
    tm = np.array([[1.0, 1.0], [1.0, -1.0]])
    tinv = 0.5 * tm
    y = np.zeros((len(s), 2, 2), dtype=complex)
    y[:, 0, 0] = aggressor_far.admittance(s)
    y[:, 1, 1] = victim_far.admittance(s)
    ty = tinv @ y                                                          # Tinv Y, per frequency
    p = tm @ (a[:, :, None] * tinv + b[:, :, None] * ty)
    q = tm @ (c[:, :, None] * tinv + a[:, :, None] * ty)
    z_near = np.diag([r_driver, victim_near.r if np.isfinite(victim_near.r) else 1e12])
    m = p + z_near @ q
    if victim_near.c:
        # a capacitor beside the victim's near-end resistor: V0 + Z I0 = 0 with Z = R || 1/(sC)
        zv = 1.0 / victim_near.admittance(s)
        m[:, 1, :] = p[:, 1, :] + zv[:, None] * q[:, 1, :]
    rhs = np.zeros((len(s), 2, 1), dtype=complex)
    rhs[:, 0, 0] = vs
    v_far = np.linalg.solve(m, rhs)[:, :, 0]
    v_near = (p @ v_far[:, :, None])[:, :, 0]
    t = np.arange(n) * dt
    grow = np.exp(sigma * t)

    def back(spec):
        return (sfft.irfft(spec / dt, n=n) * grow)

    keep = t <= t_end
    return CoupledWaves(t=t[keep], victim_near=back(v_near[:, 1])[keep], victim_far=back(v_far[:, 1])[keep],
                        aggressor_near=back(v_near[:, 0])[keep], aggressor_far=back(v_far[:, 0])[keep])
