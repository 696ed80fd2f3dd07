"""TEST REFERENCE ONLY: the method-of-characteristics engine sicheck used before physics/line_network.py.

Kept unchanged (apart from this note) so the tests can compare the new engine with it on lossless
chains; nothing in sicheck imports it.

Time-domain response of a net: a chain of ideal lines, a driver and a receiver load.

Method of characteristics (Bergeron's method; H. W. Dommel, "Digital computer solution
of electromagnetic transients in single- and multiphase networks", IEEE Trans. PAS
88(4), 1969): on a lossless line the wave leaving one end at t reaches the other end
unchanged at t + TD. Each line's delay is rounded to a whole number of time steps
(dt is at most Tr/100, so a delay is off by at most Tr/200).

Because every delay is at least one block long, a whole block of samples can be
computed at once: the source and the junctions between lines are algebraic, and a
reactive receiver (a capacitance, a series RC) is a linear filter from the incident
wave to the node voltage, discretised with the bilinear (trapezoidal) rule, the same
rule circuit simulators use, and run with scipy.signal.lfilter. No per-step Python loop.

The network is linear, so a termination voltage is handled by superposition: the DC
state it sets up before the edge, plus the response to the driver's edge alone.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.signal import lfilter

# the shared definitions (load, ramp, settling band) are the engine's own, so both engines model the same thing
from sicheck.physics.transient import RAMP_PER_RISE, SETTLE_BAND, Load, thevenin  # noqa: E402,F401


@dataclass
class Waveform:
    t: np.ndarray
    v_rx: np.ndarray
    v_src: np.ndarray
    v_final: float
    ramp: float
    metrics: dict = field(default_factory=dict)


def dc_final(swing: float, r_source: float, load: Load) -> float:
    """Receiver DC voltage with the driver high (lines are wires at DC; capacitors open)."""
    if load.end_ohm is None or load.end_cap is not None:
        return swing
    g_s, g_t = 1.0 / r_source, 1.0 / load.end_ohm
    return (swing * g_s + load.end_volts * g_t) / (g_s + g_t)


def dc_initial(r_source: float, load: Load) -> float:
    """Receiver DC voltage with the driver low (at 0 V)."""
    if load.end_ohm is None or load.end_cap is not None:
        return 0.0
    g_s, g_t = 1.0 / r_source, 1.0 / load.end_ohm
    return load.end_volts * g_t / (g_s + g_t)


def _load_filter(z: float, load: Load, dt: float):
    """(b, a) of the discrete filter from u = 2 a_inc / Z to the node voltage v.

    Node: (2 a_inc - v)/Z = Y(s) v with Y = sC [+ 1/R | + sCe/(1 + s R Ce)], so
    v = u / (1/Z + Y(s)). Bilinear transform s = (2/dt)(1 - z^-1)/(1 + z^-1).
    """
    g = 1.0 / z
    c = load.cap
    # numerator/denominator of 1/(g + Y(s)) as polynomials in s (highest power first)
    if load.end_ohm is not None and load.end_cap is not None:
        r, ce = load.end_ohm, load.end_cap
        # Y = sC + sCe/(1+sRCe): 1/(g+Y) = (1 + sRCe) / (g + s(gRCe + C + Ce) + s^2 C R Ce)
        num = [r * ce, 1.0]
        den = [c * r * ce, g * r * ce + c + ce, g]
    elif load.end_ohm is not None:
        num = [1.0]
        den = [c, g + 1.0 / load.end_ohm]
    else:
        num = [1.0]
        den = [c, g]
    # trim leading zeros (no capacitance: a purely resistive node)
    while len(den) > 1 and den[0] == 0.0:
        den = den[1:]
        if len(num) > len(den):
            num = num[1:]
    if len(den) == 1:
        return np.array([num[-1] / den[0]]), np.array([1.0])
    from scipy.signal import bilinear
    b, a = bilinear(num, den, fs=1.0 / dt)
    return b, a


def merge_short(z: list[float], td: list[float], min_td: float) -> tuple[list[float], list[float]]:
    """Fold segments shorter than ``min_td`` into their longer neighbour (delay kept).

    A segment whose delay is a small fraction of the edge reflects about
    Gamma x 2 TD / Tr of it; below Tr/10 that is at most a fifth of its own small step
    (a few percent of the edge for the usual 10-20 % impedance steps), and keeping it
    would force blocks far shorter than the edge needs.
    """
    z, td = list(z), list(td)
    while len(td) > 1 and min(td) < min_td:
        i = int(np.argmin(td))
        if i == 0:
            j = 1
        elif i == len(td) - 1:
            j = i - 1
        else:
            j = i - 1 if td[i - 1] >= td[i + 1] else i + 1
        td[j] += td[i]
        del z[i], td[i]
    return z, td


def simulate(z: list[float], td: list[float], swing: float, rise: float, r_source: float, load: Load,
             t_end: float | None = None, dt: float | None = None) -> Waveform:
    """Receiver and source voltages for a ramp of `swing` volts (10-90 % time `rise`).

    z, td: each line's impedance and one-way delay, driver end first. r_source is the
    driver's resistance plus any series resistor.
    """
    if not z or len(z) != len(td):
        raise ValueError("need one impedance and one delay per line")
    if min(td) <= 0 or rise <= 0 or r_source <= 0:
        raise ValueError("delays, rise time and source resistance must be positive")
    ramp = rise * RAMP_PER_RISE
    total = float(sum(td))
    if dt is None:
        dt = min(rise / 100.0, min(td) / 2.0)
    steps_td = [max(1, int(round(d / dt))) for d in td]
    if t_end is None:
        tau = 0.0
        if load.cap:
            tau = max(tau, load.cap * min(min(z), r_source))
        if load.end_cap:
            tau = max(tau, load.end_cap * ((load.end_ohm or 0.0) + min(z)))
        # enough round trips for a badly mismatched line to settle, and the end's time constants
        gamma = max(abs((r_source - z[0]) / (r_source + z[0])), 0.5)
        trips = min(400.0, max(8.0, np.log(SETTLE_BAND / 4.0) / np.log(gamma) + 4.0))
        t_end = ramp + trips * 2.0 * total + 12.0 * tau + 4.0 * ramp
    n = int(np.ceil(t_end / dt)) + 1
    t = np.arange(n) * dt
    vs = swing * np.clip(t / ramp, 0.0, 1.0)

    k = len(z)
    block = min(steps_td)
    a = np.zeros((k, n))   # forward wave entering line i at its driver end
    b = np.zeros((k, n))   # backward wave entering line i at its receiver end
    v_rx = np.zeros(n)
    v_src = np.zeros(n)
    fb, fa = _load_filter(z[-1], load, dt)
    zi = np.zeros(max(len(fa), len(fb)) - 1)
    gs, g1 = 1.0 / r_source, 1.0 / z[0]
    for n0 in range(0, n, block):
        sl = slice(n0, min(n0 + block, n))
        idx = np.arange(sl.start, sl.stop)
        # waves arriving now left their far end D steps ago (zero before t = 0)
        def arrived(arr, i):
            j = idx - steps_td[i]
            out = np.zeros(len(idx))
            ok = j >= 0
            out[ok] = arr[i, j[ok]]
            return out
        b_in0 = arrived(b, 0)
        v0 = (vs[sl] * gs + 2.0 * b_in0 * g1) / (gs + g1)
        v_src[sl] = v0
        a[0, sl] = v0 - b_in0
        for i in range(k - 1):
            a_in = arrived(a, i)
            b_in = arrived(b, i + 1)
            gl, gr = 1.0 / z[i], 1.0 / z[i + 1]
            vj = (2.0 * a_in * gl + 2.0 * b_in * gr) / (gl + gr)
            b[i, sl] = vj - a_in
            a[i + 1, sl] = vj - b_in
        a_end = arrived(a, k - 1)
        u = 2.0 * a_end / z[-1]
        if len(fa) == 1:
            v_end = fb[0] * u
        else:
            v_end, zi = lfilter(fb, fa, u, zi=zi)
        v_rx[sl] = v_end
        b[k - 1, sl] = v_end - a_end
    # superposition: DC state of the termination voltage with the driver low
    v0_dc = dc_initial(r_source, load)
    v_rx = v_rx + v0_dc
    v_src = v_src + v0_dc
    v_final = dc_final(swing, r_source, load)
    wf = Waveform(t=t, v_rx=v_rx, v_src=v_src, v_final=v_final, ramp=ramp)
    wf.metrics = receiver_metrics(t, v_rx, v_final, ramp)
    return wf


def receiver_metrics(t: np.ndarray, v: np.ndarray, v_final: float, ramp: float) -> dict:
    """The metrics defined in README (times in ns, voltages in V)."""
    v_max = float(np.max(v))
    over = (v_max - v_final) / v_final * 100.0 if v_final else float("nan")
    above = np.nonzero(v >= v_final)[0]
    if len(above):
        after = v[above[0]:]
        ringback = max(0.0, float(v_final - np.min(after)))
    else:
        ringback = 0.0
    outside = np.nonzero(np.abs(v - v_final) > SETTLE_BAND * abs(v_final))[0]
    settle = float(t[outside[-1]]) if len(outside) else 0.0
    half = 0.5 * v_final
    cross = np.nonzero(v >= half)[0]
    if len(cross) and cross[0] > 0:
        i = cross[0]
        t_half = t[i - 1] + (half - v[i - 1]) / (v[i] - v[i - 1]) * (t[i] - t[i - 1])
        flight = float(t_half - ramp / 2.0)
    else:
        flight = float("nan")
    return {
        "v_final": float(v_final),
        "v_max": v_max,
        "overshoot_pct": float(over),
        "ringback": ringback,
        "ringback_pct": ringback / abs(v_final) * 100.0 if v_final else float("nan"),
        "settle_ns": settle * 1e9,
        "flight_ns": flight * 1e9,
        "settled_in_window": bool(len(outside) == 0 or outside[-1] < len(t) - 2),
    }
