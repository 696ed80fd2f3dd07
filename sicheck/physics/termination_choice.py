"""Choosing a termination by simulating each standard scheme (see transient.py).

Candidates, with values from IEC 60063 series:
  none        the net as it is
  series      R at the driver, E24 values around Z0 - Rdrv
  rc          R (E24 nearest Z0) + C (E12, time constant from 3 x the round trip) to ground
  parallel    R (E24 around Z0) to a termination voltage of half the swing
  thevenin    R1 = R2 (E24 around 2 Z0) to the supply and to ground
  differential (pairs) R (E24 around Zdiff) across the receiver, simulated in the odd mode
The recommendation is the candidate that meets the limits (overshoot, ringback,
settling) at the least static power; among equals, the one that settles first.
Static power is the DC power in the driver and termination, averaged over the high
and low states. Segments shorter than Tr/10 are folded into their neighbours first
(transient.merge_short).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from sicheck.physics import eseries
from sicheck.physics.transient import Load, merge_short, simulate, thevenin


@dataclass(frozen=True)
class Limits:
    max_overshoot_pct: float = 15.0
    max_ringback_pct: float = 15.0
    max_settle_ns: float | None = None        # None: flight + ramp + settle_rise_times x Tr
    settle_rise_times: float = 2.0


@dataclass
class Candidate:
    scheme: str
    text: str
    metrics: dict
    power_w: float
    series_ohm: float | None = None
    end_ohm: float | None = None
    end_cap: float | None = None
    meets: bool = False
    violations: list[str] = field(default_factory=list)
    wave: tuple | None = None      # (t, v) decimated, for charts


def _neighbours(value: float, series: str = "E24", spread: int = 1) -> list[float]:
    mant = eseries.SERIES[series]
    base = eseries.nearest(value, series)
    decade = int(np.floor(np.log10(base) + 1e-12))
    all_vals = [m * 10.0**d for d in (decade - 1, decade, decade + 1) for m in mant]
    all_vals = sorted(set(round(v, 12 - decade) for v in all_vals))
    i = min(range(len(all_vals)), key=lambda k: abs(all_vals[k] - base))
    return [all_vals[j] for j in range(max(0, i - spread), min(len(all_vals), i + spread + 1))]


def _power_parallel(swing, rs, r, vt):
    return 0.5 * sum((v - vt) ** 2 / (rs + r) for v in (swing, 0.0))


def _power_thevenin(swing, rs, r1, r2):
    tot = 0.0
    for v in (swing, 0.0):
        node = (v / rs + swing / r1) / (1 / rs + 1 / r1 + 1 / r2)
        tot += (swing - node) ** 2 / r1 + node**2 / r2 + (v - node) ** 2 / rs
    return 0.5 * tot


def _evaluate(c: Candidate, td_total: float, rise: float, limits: Limits) -> None:
    m = c.metrics
    settle_limit = limits.max_settle_ns
    if settle_limit is None:
        settle_limit = (td_total + rise / 0.8 + limits.settle_rise_times * rise) * 1e9
    v = []
    if m["overshoot_pct"] > limits.max_overshoot_pct:
        v.append(f"overshoot {m['overshoot_pct']:.0f} % > {limits.max_overshoot_pct:g} %")
    if m["ringback_pct"] > limits.max_ringback_pct:
        v.append(f"ringback {m['ringback_pct']:.0f} % > {limits.max_ringback_pct:g} %")
    if m["settle_ns"] > settle_limit or not m["settled_in_window"]:
        v.append(f"settles at {m['settle_ns']:.2f} ns > {settle_limit:.2f} ns")
    c.violations = v
    c.meets = not v


def _decimate(wf, n=160):
    idx = np.linspace(0, len(wf.t) - 1, min(n, len(wf.t))).astype(int)
    return wf.t[idx], wf.v_rx[idx]


def choose(z: list[float], td: list[float], rise: float, driver_ohm: float, swing: float, load_cap: float,
           limits: Limits, zdiff: float | None = None, keep_waves: bool = False) -> tuple[Candidate, Candidate,
                                                                                           list[Candidate]]:
    """(unterminated, recommended, all candidates) for one net."""
    z, td = merge_short(z, td, rise / 10.0)
    td_total = float(sum(td))
    cands: list[Candidate] = []

    def run(scheme, text, rs, load, power, **kw):
        wf = simulate(z, td, swing, rise, rs, load)
        c = Candidate(scheme, text, wf.metrics, power, **kw)
        if keep_waves:
            c.wave = _decimate(wf)
        _evaluate(c, td_total, rise, limits)
        cands.append(c)
        return c

    if zdiff is not None:
        # odd mode: each leg sees Zodd; the differential resistor is R/2 from each leg to the centre
        none = run("none", "unterminated", driver_ohm, Load(cap=load_cap), 0.0)
        for r in _neighbours(zdiff):
            run("differential", f"{r:g} ohm across the receiver", driver_ohm, Load(cap=load_cap, end_ohm=r / 2),
                (swing * 2) ** 2 / (r + 2 * driver_ohm), end_ohm=r)
        return none, _pick(cands, none), cands

    z_drv, z_end = z[0], z[-1]
    none = run("none", "unterminated", driver_ohm, Load(cap=load_cap), 0.0)
    if none.meets:
        return none, none, cands
    zero_power = []
    ideal = z_drv - driver_ohm
    if ideal >= 1.0:
        for r in _neighbours(ideal):
            zero_power.append(run("series", f"{r:g} ohm in series at the driver", driver_ohm + r, Load(cap=load_cap),
                                  0.0, series_ohm=r))
    if any(c.meets for c in zero_power):      # a series part costs no power: no need to try more
        return none, _pick(cands, none), cands
    r_end = eseries.nearest(z_end)
    c_min = 3.0 * 2.0 * td_total / r_end
    for cval in _neighbours(c_min, "E12", 1)[1:]:
        zero_power.append(run("rc", f"{r_end:g} ohm + {cval * 1e12:g} pF to ground at the receiver", driver_ohm,
                              Load(cap=load_cap, end_ohm=r_end, end_cap=cval), 0.0, end_ohm=r_end, end_cap=cval))
    if any(c.meets for c in zero_power):
        return none, _pick(cands, none), cands
    vt = swing / 2.0
    for r in _neighbours(z_end, spread=1):
        run("parallel", f"{r:g} ohm to {vt:g} V at the receiver", driver_ohm, Load(cap=load_cap, end_ohm=r, end_volts=vt),
            _power_parallel(swing, driver_ohm, r, vt), end_ohm=r)
    r2 = eseries.nearest(2.0 * z_end)
    req, veq = thevenin(r2, r2, swing)
    run("thevenin", f"{r2:g} ohm to the supply and {r2:g} ohm to ground at the receiver", driver_ohm,
        Load(cap=load_cap, end_ohm=req, end_volts=veq), _power_thevenin(swing, driver_ohm, r2, r2), end_ohm=r2)
    return none, _pick(cands, none), cands


def _pick(cands: list[Candidate], none: Candidate) -> Candidate:
    ok = [c for c in cands if c.meets and c.scheme != "none"]
    if ok:
        return min(ok, key=lambda c: (round(c.power_w, 6), c.metrics["settle_ns"]))
    # nothing meets the limits: the terminated candidate with the fewest and mildest violations
    terminated = [c for c in cands if c.scheme != "none"] or [none]
    return min(terminated, key=lambda c: (len(c.violations), c.metrics["overshoot_pct"] + c.metrics["ringback_pct"]
                                          + c.metrics["settle_ns"]))
