"""What every waveform simulation shares: the ramp source, the receiver loads and the metrics.

The source is a linear ramp of ``swing`` volts whose 10-90 % time is the rise time, so it
runs 0-100 % in Tr/0.8 starting at t = 0. Receiver loads are an input capacitance plus an
optional termination (a resistor to a voltage, or a series RC to ground). The engine that
solves a network of lines with them is sicheck/physics/line_network.py.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

RAMP_PER_RISE = 1.0 / 0.8      # 10-90 % rise time Tr -> 0-100 % ramp of Tr/0.8 (linear ramp)
SETTLE_BAND = 0.05             # +/- 5 % of v_final


@dataclass(frozen=True)
class Load:
    """Receiver end: input capacitance plus an optional termination.

    ``end_ohm`` to ``end_volts`` (a parallel termination; a Thevenin pair is given as its
    equivalent, see ``thevenin``); with ``end_cap`` the end resistor is in series with that
    capacitor to ground (an RC termination) instead.
    """

    cap: float = 0.0
    end_ohm: float | None = None
    end_volts: float = 0.0
    end_cap: float | None = None


@dataclass(frozen=True)
class LoadSet:
    """Several alternative loads at one node (one per candidate), as arrays; NaN = absent."""

    cap: np.ndarray
    end_ohm: np.ndarray
    end_volts: np.ndarray
    end_cap: np.ndarray

    @classmethod
    def of(cls, loads: Sequence[Load]) -> "LoadSet":
        nan = math.nan
        # a column at a time from plain lists (a net's handful of loads: a 2-d array and its transposed copy
        # cost more than the four small arrays)
        return cls(np.array([x.cap for x in loads], dtype=float),
                   np.array([nan if x.end_ohm is None else x.end_ohm for x in loads], dtype=float),
                   np.array([x.end_volts for x in loads], dtype=float),
                   np.array([nan if x.end_cap is None else x.end_cap for x in loads], dtype=float))

    def __len__(self) -> int:
        return len(self.cap)

    def take(self, idx) -> "LoadSet":
        return LoadSet(self.cap[idx], self.end_ohm[idx], self.end_volts[idx], self.end_cap[idx])

    def admittance(self, s: np.ndarray) -> np.ndarray:
        """(candidates, len(s)) admittance to ground (the termination voltage is a short for the edge)."""
        s = s[None, :]
        y = s * self.cap[:, None]
        r = self.end_ohm[:, None]
        ce = self.end_cap[:, None]
        has_r = ~np.isnan(r)
        rc = has_r & ~np.isnan(ce)
        r0 = np.where(has_r, r, 1.0)
        ce0 = np.where(rc, ce, 1.0)
        y_end = np.where(rc, s * ce0 / (1.0 + s * r0 * ce0), np.where(has_r, 1.0 / r0, 0.0))
        return y + y_end

    def dc_conductance(self) -> np.ndarray:
        """Conductance to the termination voltage at DC (capacitors open)."""
        plain = ~np.isnan(self.end_ohm) & np.isnan(self.end_cap)
        return np.where(plain, 1.0 / np.where(plain, self.end_ohm, 1.0), 0.0)


def thevenin(r_up: float, r_down: float, supply: float) -> tuple[float, float]:
    """Equivalent (R, V) of a resistor r_up to the supply and r_down to ground."""
    return r_up * r_down / (r_up + r_down), supply * r_down / (r_up + r_down)


def ramp_voltage(t: np.ndarray, swing: float, ramp: float) -> np.ndarray:
    return swing * np.clip(t / ramp, 0.0, 1.0)


@dataclass(slots=True)      # one per candidate and receiver of every net: made without a __dict__
class Waveform:
    t: np.ndarray
    v_rx: np.ndarray
    v_src: np.ndarray | None
    v_final: float
    ramp: float
    metrics: dict = field(default_factory=dict)
    preview: tuple | None = None       # (t, v_rx) at PREVIEW_POINTS evenly spaced samples, when worked out in bulk


PREVIEW_POINTS = 160                   # samples of a waveform kept for charts


@functools.lru_cache(maxsize=256)
def preview_index(length: int, n: int = PREVIEW_POINTS) -> np.ndarray:
    """The samples a chart keeps of a record of ``length``: n evenly spaced, first and last included."""
    return np.linspace(0, length - 1, min(n, length)).astype(int)


def metrics_batch(t: np.ndarray, v: np.ndarray, v_final, ramp: float) -> list[dict]:
    """The metrics defined in README for each row of v (times in ns, voltages in V).

    Crossing times (the 50 % point, the last exit from the +/-5 % band) are interpolated
    linearly between samples.
    """
    v = np.atleast_2d(np.asarray(v, dtype=float))
    vf = np.broadcast_to(np.asarray(v_final, dtype=float).reshape(-1), (v.shape[0],)).copy()
    m, n = v.shape
    rows = np.arange(m)
    v_max = v.max(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        over = np.where(vf != 0, (v_max - vf) / vf * 100.0, np.nan)
    # (argmax gives the first sample where a test holds, and 0 where none does: that sample then says
    # whether any does, without another pass over the record)
    above = v >= vf[:, None]
    first = above.argmax(axis=1)
    has_above = above[rows, first]
    after_min = _row_tail_min(v, first)
    ringback = np.where(has_above, np.maximum(0.0, vf - after_min), 0.0)
    band = SETTLE_BAND * np.abs(vf)
    dist = v - vf[:, None]
    outside = np.abs(dist, out=dist) > band[:, None]
    last = n - 1 - outside[:, ::-1].argmax(axis=1)
    any_out = outside[rows, last]
    nxt = np.minimum(last + 1, n - 1)
    e0, e1 = v[rows, last] - vf, v[rows, nxt] - vf
    edge = np.where(e0 > 0, band, -band)
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.clip(np.where(e1 != e0, (e0 - edge) / (e0 - e1), 0.0), 0.0, 1.0)
    settle = np.where(any_out, t[last] + np.where(nxt > last, frac * (t[nxt] - t[last]), 0.0), 0.0)
    half = 0.5 * vf
    cross = v >= half[:, None]
    ci = cross.argmax(axis=1)
    ok = cross[rows, ci] & (ci > 0)
    cp = np.maximum(ci - 1, 0)
    va, vb = v[rows, cp], v[rows, ci]
    with np.errstate(invalid="ignore", divide="ignore"):
        t_half = t[cp] + (half - va) / (vb - va) * (t[ci] - t[cp])
    flight = np.where(ok, t_half - ramp / 2.0, np.nan)
    settled = ~any_out | (last < n - 2)
    # the rows' dicts from plain floats (the same values: IEEE arithmetic either way), not numpy scalars
    window_ns = float(t[-1]) * 1e9
    nan = float("nan")
    return [{"v_final": f, "v_max": top, "overshoot_pct": o, "ringback": r,
             "ringback_pct": r / abs(f) * 100.0 if f else nan, "settle_ns": st * 1e9, "flight_ns": fl * 1e9,
             "settled_in_window": done, "window_ns": window_ns}
            for f, top, o, r, st, fl, done in zip(vf.tolist(), v_max.tolist(), over.tolist(), ringback.tolist(),
                                                  settle.tolist(), flight.tolist(), settled.tolist())]


def _row_tail_min(v: np.ndarray, start: np.ndarray) -> np.ndarray:
    """Each row's least value from its column start[row] on (one pass over the samples)."""
    m, n = v.shape
    if m == 0:
        return np.zeros(0)
    # one flat reduction over [row start, row end) for every row; the pieces between rows are dropped
    bounds = np.empty(2 * m - 1, dtype=np.intp)
    bounds[0::2] = np.arange(m) * n + start
    bounds[1::2] = np.arange(1, m) * n
    return np.minimum.reduceat(v.reshape(-1), bounds)[0::2]


def receiver_metrics(t: np.ndarray, v: np.ndarray, v_final: float, ramp: float) -> dict:
    """The metrics of one receiver waveform (see metrics_batch)."""
    return metrics_batch(t, v, v_final, ramp)[0]
