"""Choosing a termination by simulating each standard scheme (engine: line_network.py).

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
and low states. The schemes are simulated in stages, each stage's candidates together in
one vectorised run: the net as it is with the series values; then the RC values; then the
parallel and Thevenin values. A later stage runs only when nothing so far meets the limits
(a series part or an RC costs no static power, so nothing later could beat one that meets).
Every segment is kept with its exact delay (and its loss, when given).

A branched net (a tree of lines: `parents`) has a receiver at each of its listed leaves, each
with its own input capacitance. The schemes that fit such a multi-drop net are tried: series at
the driver, and the far-end schemes at the far end of the main path (the first receiver). A
candidate meets the limits only when every receiver does; its metrics are the worst receiver's,
and every receiver's are kept (`Candidate.receivers`).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from typing import Mapping, Sequence

from sicheck.physics import eseries
from sicheck.physics.chain_batch import RESULT_SAMPLES, samples_needed, simulate_many
from sicheck.physics.causal_line import Line, LineLoss
from sicheck.physics.line_network import Network, Series, Simulation, settle_times
from sicheck.physics.transient import RAMP_PER_RISE, Load, LoadSet, preview_index, thevenin


@dataclass(frozen=True)
class Limits:
    max_overshoot_pct: float = 15.0
    max_ringback_pct: float = 15.0
    max_settle_ns: float | None = None        # None: flight + ramp + settle_rise_times x Tr
    settle_rise_times: float = 2.0


class Candidate:
    """One termination simulated: its scheme, the part as text, the receiver's metrics, static power (W).

    A board's nets make a handful of candidates each, and their caller reads the texts of one or two of
    them: ``text``, ``violations`` and ``receivers`` are put into words when first read (the counts that
    rank candidates, ``n_violations``, are kept as numbers).
    """

    __slots__ = ("scheme", "_text", "metrics", "power_w", "series_ohm", "end_ohm", "end_cap", "meets",
                 "n_violations", "_violations", "_judged", "_per", "_names", "wave", "_receivers", "worst")

    def __init__(self, scheme: str, text, metrics: dict, power_w: float, series_ohm: float | None = None,
                 end_ohm: float | None = None, end_cap: float | None = None, meets: bool = False,
                 violations: list[str] | None = None, wave: tuple | None = None,
                 receivers: list[dict] | None = None, worst: int = 0):
        self.scheme = scheme
        self._text = text              # the text, or (template, values) for str.format when first read
        self.metrics = metrics
        self.power_w = power_w
        self.series_ohm = series_ohm
        self.end_ohm = end_ohm
        self.end_cap = end_cap
        self.meets = meets
        self._violations = None if violations is None else list(violations)
        self.n_violations = len(violations) if violations is not None else 0
        self._judged = None            # (settle limit ns, Limits) the metrics were judged against
        self._per = None               # a multi-drop net's: each receiver's own candidate (this one at `worst`)
        self._names = None             # the receivers' names
        self.wave = wave               # (t, v) decimated, for charts (the worst receiver's)
        self._receivers = receivers
        self.worst = worst             # index of the worst receiver

    @property
    def text(self) -> str:
        if not isinstance(self._text, str):
            template, values = self._text
            self._text = template.format(*values)
        return self._text

    @property
    def violations(self) -> list[str]:
        """Why the candidate does not meet the limits (at which receiver, on a multi-drop net)."""
        if self._violations is None:
            if self._per is not None:
                self._violations = [f"at {name}: {v}" for name, p in zip(self._names, self._per)
                                    for v in p._own_violations()]
            else:
                self._violations = self._own_violations()
        return self._violations

    @violations.setter
    def violations(self, value: list[str]) -> None:
        self._violations = list(value)
        self.n_violations = len(self._violations)

    def _own_violations(self) -> list[str]:
        return [] if self._judged is None else _violation_texts(self.metrics, *self._judged)

    @property
    def receivers(self) -> list[dict]:
        """Per receiver: name, metrics, meets, violations."""
        if self._receivers is None:
            if self._per is not None:
                self._receivers = [{"receiver": name, "metrics": p.metrics, "meets": p.meets,
                                    "violations": list(p.violations)} for name, p in zip(self._names, self._per)]
            elif self._names is not None:
                self._receivers = [{"receiver": self._names[0], "metrics": self.metrics, "meets": self.meets,
                                    "violations": list(self.violations)}]
            else:
                self._receivers = []
        return self._receivers

    @receivers.setter
    def receivers(self, value: list[dict]) -> None:
        self._receivers = value

    def receiver_results(self) -> list[tuple[dict, bool]]:
        """Per receiver (as ``receivers``): (metrics, meets), without putting the violations into words."""
        if self._receivers is not None:
            return [(r["metrics"], r["meets"]) for r in self._receivers]
        if self._per is not None:
            return [(p.metrics, p.meets) for p in self._per]
        return [] if self._names is None else [(self.metrics, self.meets)]

    def __repr__(self) -> str:
        return (f"Candidate(scheme={self.scheme!r}, text={self.text!r}, meets={self.meets!r}, "
                f"power_w={self.power_w!r}, violations={self.violations!r})")


def _neighbours(value: float, series: str = "E24", spread: int = 1) -> tuple[float, ...]:
    """The series value nearest to ``value`` with ``spread`` neighbours on each side."""
    return _around(eseries.nearest(value, series), series, spread)


@functools.lru_cache(maxsize=4096)
def _around(base: float, series: str, spread: int) -> tuple[float, ...]:
    mant = eseries.SERIES[series]
    decade = int(np.floor(np.log10(base) + 1e-12))
    all_vals = [m * 10.0**d for d in (decade - 1, decade, decade + 1) for m in mant]
    all_vals = sorted(set(round(v, 12 - decade) for v in all_vals))
    i = min(range(len(all_vals)), key=lambda k: abs(all_vals[k] - base))
    return tuple(all_vals[j] for j in range(max(0, i - spread), min(len(all_vals), i + spread + 1)))


def _power_parallel(swing, rs, r, vt):
    return 0.5 * sum((v - vt) ** 2 / (rs + r) for v in (swing, 0.0))


def _power_thevenin(swing, rs, r1, r2):
    tot = 0.0
    for v in (swing, 0.0):
        node = (v / rs + swing / r1) / (1 / rs + 1 / r1 + 1 / r2)
        tot += (swing - node) ** 2 / r1 + node**2 / r2 + (v - node) ** 2 / rs
    return 0.5 * tot


def _settle_limit_ns(td_total: float, rise: float, limits: Limits) -> float:
    if limits.max_settle_ns is not None:
        return limits.max_settle_ns
    return (td_total + rise / 0.8 + limits.settle_rise_times * rise) * 1e9


def _evaluate(c: Candidate, settle_limit: float, limits: Limits) -> None:
    """Judge the candidate's metrics against the limits: meets and the number of violations (their texts,
    _violation_texts, are written when asked for)."""
    m = c.metrics
    n = 0
    if m["overshoot_pct"] > limits.max_overshoot_pct:
        n += 1
    if m["ringback_pct"] > limits.max_ringback_pct:
        n += 1
    if not m["settled_in_window"] or m["settle_ns"] > settle_limit:
        n += 1
    c._judged = (settle_limit, limits)
    c._violations = None
    c.n_violations = n
    c.meets = not n


def _violation_texts(m: dict, settle_limit: float, limits: Limits) -> list[str]:
    v = []
    if m["overshoot_pct"] > limits.max_overshoot_pct:
        v.append(f"overshoot {m['overshoot_pct']:.0f} % > {limits.max_overshoot_pct:g} %")
    if m["ringback_pct"] > limits.max_ringback_pct:
        v.append(f"ringback {m['ringback_pct']:.0f} % > {limits.max_ringback_pct:g} %")
    if not m["settled_in_window"]:
        v.append(f"not settled within the {m['window_ns']:.2f} ns simulated (limit {settle_limit:.2f} ns)")
    elif m["settle_ns"] > settle_limit:
        v.append(f"settles at {m['settle_ns']:.2f} ns > {settle_limit:.2f} ns")
    return v


def _decimate(wf):
    if wf.preview is not None:
        return wf.preview
    idx = preview_index(len(wf.t))
    return wf.t[idx], wf.v_rx[idx]


def tree_network(z: Sequence[float], td: Sequence[float], losses: Sequence[LineLoss | None],
                 parents: Sequence[int], parts: Mapping[int, Series] | None = None) -> tuple[Network, list[int]]:
    """The lines as a tree rooted at the driver: line i starts at the far end of line parents[i] (-1: the
    driver). ``parts[i]``: a part in series at the far end of line i (what hangs there comes after it).
    Returns the network and each line's far-end node."""
    parts = parts or {}
    if (not parts and len(parents) == len(z) == len(td) == len(losses)
            and all(p == i - 1 for i, p in enumerate(parents))):
        # a plain chain (most nets): line i from node i to node i + 1
        net, _ = Network.chain([Line(float(a), float(d), lo) for a, d, lo in zip(z, td, losses)])
        return net, list(range(1, len(z) + 1))
    below: dict[int, list[int]] = {}
    for i, p in enumerate(parents):
        below.setdefault(int(p), []).append(i)
    if any(not 0 <= i < len(z) for i in parts):
        raise ValueError("a series part after a line that is not in the net")
    net = Network()
    node = {-1: 0}
    after = {-1: 0}          # where what hangs at a line's far end starts: after its part, if any
    todo = [-1]
    while todo:
        p = todo.pop()
        for i in below.get(p, []):
            node[i] = net.add(after[p], Line(float(z[i]), float(td[i]), losses[i]))
            after[i] = net.add(node[i], parts[i]) if i in parts else node[i]
            todo.append(i)
    if len(node) != len(z) + 1:
        raise ValueError("the lines' parents do not form a tree rooted at the driver")
    return net, [node[i] for i in range(len(z))]


def _badness(c: Candidate):
    return (not c.meets, c.n_violations, max(c.metrics["overshoot_pct"], 0.0) + c.metrics["ringback_pct"]
            + c.metrics["settle_ns"])


def choose(*args, **kwargs) -> tuple[Candidate, Candidate, list[Candidate]]:
    """(unterminated, recommended, all candidates simulated) for one net; arguments as choose_steps."""
    steps = choose_steps(*args, **kwargs)
    try:
        req = next(steps)
        while True:
            req = steps.send(req.run())
    except StopIteration as done:
        return done.value


def choose_many(nets: Sequence[tuple[tuple, dict]]) -> list:
    """choose() for many nets, their stages simulated together (physics/chain_batch.py).

    nets: (args, kwargs) of choose per net. Returns per net choose's result, or the ValueError it raised.
    """
    steps = [choose_steps(*a, **kw) for a, kw in nets]
    out: list = [None] * len(steps)
    pending = {}                      # net -> its Simulation waiting for an answer

    def advance(k, answer):
        try:
            pending[k] = steps[k].send(answer)
        except StopIteration as done:
            out[k] = done.value
        except ValueError as e:
            out[k] = e

    for k in range(len(steps)):
        advance(k, None)
    while pending:
        keys, held = [], 0             # a slice of the waiting simulations whose answers fit in memory
        for k in list(pending):
            held += samples_needed(pending[k])
            if keys and held > RESULT_SAMPLES:
                break
            keys.append(k)
        answers = simulate_many([pending.pop(k) for k in keys])
        for k, ans in zip(keys, answers):
            if isinstance(ans, ValueError):
                steps[k].close()
                out[k] = ans
            else:
                advance(k, ans)
    return out


def choose_steps(z: Sequence[float], td: Sequence[float], rise: float, driver_ohm: float, swing: float,
                 load_cap: float, limits: Limits, zdiff: float | None = None, keep_waves: bool = False,
                 losses: Sequence[LineLoss | None] | None = None, parents: Sequence[int] | None = None,
                 receivers: Sequence[tuple[int, float, str]] | None = None, driver_end: int | None = None,
                 on_die: tuple[float, float, str] | None = None, parts: Mapping[int, Series] | None = None):
    """The termination choice for one net as a generator: it yields a Simulation for each stage it needs and
    takes back the engine's answer (simulate_network's); it returns (unterminated, recommended, all
    candidates simulated). choose() drives it one net at a time; choose_many() drives many nets at once,
    so that their stages can be simulated together. The net: a chain of lines, driver end first.

    ``losses``: one LineLoss (or None for a lossless section) per line; None: all lossless.
    For a pair, z are the odd-mode impedances and swing is one leg's.
    A tree: ``parents[i]`` is the line before line i toward the driver (-1 at the driver); ``receivers``
    (line, input capacitance F, name) names the line ending at each receiver, the main path's far end
    first (``load_cap`` is then unused); ``driver_end`` is the line whose Z the series value matches
    (default: the first line on the way to the first receiver).
    ``on_die``: (ohm, volts, text) of a termination on every receiver's die, as the simulated mode sees it
    (a pair's differential R as R/2 to 0 V in the odd mode); it is part of the load, and the only
    candidates are the net as it is and a series part at the driver (a second parallel termination
    would load the line with both).
    ``parts[i]``: a part in series at the far end of line i (a resistor, or a coupling capacitor), part of
    the net in every candidate.
    """
    if losses is None:
        losses = [None] * len(z)
    if not (len(z) == len(td) == len(losses)) or not len(z):
        raise ValueError("need one impedance, delay and loss entry per line")
    if parents is None:
        parents = list(range(-1, len(z) - 1))
    if receivers is None:
        receivers = [(len(z) - 1, load_cap, "receiver")]
    net, far = tree_network(z, td, losses, parents, parts)
    main_line = receivers[0][0]
    path = [main_line]
    while parents[path[-1]] >= 0:
        path.append(parents[path[-1]])
    path.reverse()
    if driver_end is None:
        driver_end = path[0]
    end = far[main_line]
    rx_nodes = [far[i] for i, _, _ in receivers]
    names = [name for _, _, name in receivers]
    others = {far[i]: LoadSet.of([Load(cap=c)]) for i, c, _ in receivers[1:]}
    load_cap = receivers[0][1]
    # where a far-end part goes: on a multi-drop net, the far end of the main path (named)
    at = "the receiver" if len(receivers) == 1 else f"'{names[0]}', the far end of the main path"
    rx_at = "the receiver" if len(receivers) == 1 else f"the receiver '{names[0]}' (far end of the main path)"
    td_total = float(sum(td[i] for i in path))
    settle_limit = _settle_limit_ns(td_total, rise, limits)
    cands: list[Candidate] = []

    ramp = rise * RAMP_PER_RISE

    def inputs(specs):
        """The candidates' driver resistances and loads, as a Simulation takes them."""
        return np.array([sp[2] for sp in specs], dtype=float), {**others, end: LoadSet.of([sp[3] for sp in specs])}

    def window(rs, loads):
        times = settle_times(net, rs, loads, ramp)
        return math.nan if any(x != x for x in times) else max(times)      # (a NaN wins, as in numpy's max)

    def stage(specs, t_end=None, given=None):
        """specs: (scheme, text, r_source, Load, power, extra fields); simulated together. given: inputs(specs).
        A text is written when read (Candidate.text): a spec gives it as (str.format template, values)."""
        if not specs:
            return []
        rs, loads = inputs(specs) if given is None else given
        res = yield Simulation(net, rx_nodes, swing, rise, rs, loads, t_end)
        out = []
        for k, sp in enumerate(specs):
            per = []
            for node in rx_nodes:
                c = Candidate(sp[0], sp[1], res[node][k].metrics, sp[4], **sp[5])
                _evaluate(c, settle_limit, limits)
                per.append(c)
            if len(per) == 1:
                c = per[0]
            else:
                w = max(range(len(per)), key=lambda j: _badness(per[j]))
                c = per[w]
                c.worst = w
                c.meets = all(p.meets for p in per)
                c.n_violations = sum(p.n_violations for p in per)
                c._per = per
            c._names = names
            if keep_waves:
                c.wave = _decimate(res[rx_nodes[c.worst]][k])
            out.append(c)
        return out

    pin = Load(cap=load_cap)          # the receiver as it is (frozen: one object for every candidate with it)
    base = ("none", "unterminated", driver_ohm, pin, 0.0, {})
    if on_die is not None:
        r_od, v_od, od_text = on_die
        others = {far[i]: LoadSet.of([Load(cap=c, end_ohm=r_od, end_volts=v_od)]) for i, c, _ in receivers[1:]}
        od = Load(cap=load_cap, end_ohm=r_od, end_volts=v_od)
        p_od = _power_parallel(swing, driver_ohm, r_od, v_od)
        ideal = float(z[driver_end]) - driver_ohm
        specs = [("on-die", od_text, driver_ohm, od, p_od, {})] + [
            ("series", ("{:g} ohm in series at the driver{}, with the on-die termination",
                        (r, " (each leg)" if zdiff is not None else "")), driver_ohm + r, od, _power_parallel(swing, driver_ohm + r, r_od, v_od),
             {"series_ohm": r}) for r in (_neighbours(ideal) if ideal >= 1.0 else [])]
        cands = yield from stage(specs)
        if cands[0].meets:
            return cands[0], cands[0], cands[:1]
        return cands[0], _pick(cands, cands[0]), cands
    if zdiff is not None:
        # odd mode: each leg sees Zodd; the differential resistor is R/2 from each leg to the centre
        specs = [base] + [("differential", ("{:g} ohm across {}", (r, rx_at)), driver_ohm,
                           Load(cap=load_cap, end_ohm=r / 2), (swing * 2) ** 2 / (r + 2 * driver_ohm), {"end_ohm": r})
                          for r in _neighbours(zdiff)]
        cands = yield from stage(specs)
        return cands[0], _pick(cands, cands[0]), cands

    z_drv, z_end = float(z[driver_end]), float(z[main_line])
    ideal = z_drv - driver_ohm
    series = [("series", ("{:g} ohm in series at the driver", (r,)), driver_ohm + r, pin, 0.0,
               {"series_ohm": r}) for r in (_neighbours(ideal) if ideal >= 1.0 else [])]
    vt = swing / 2.0
    r2 = eseries.nearest(2.0 * z_end)
    req, veq = thevenin(r2, r2, swing)
    ends = ([("parallel", ("{:g} ohm to {:g} V at {}", (r, vt, at)), driver_ohm,
              Load(cap=load_cap, end_ohm=r, end_volts=vt), _power_parallel(swing, driver_ohm, r, vt),
              {"end_ohm": r}) for r in _neighbours(z_end, spread=1)]
            + [("thevenin", ("{0:g} ohm to the supply and {0:g} ohm to ground at {1}", (r2, at)), driver_ohm,
                Load(cap=load_cap, end_ohm=req, end_volts=veq), _power_thevenin(swing, driver_ohm, r2, r2),
                {"end_ohm": r2})])
    # the first and last stages share one window, so the last reuses the first's line two-ports; their inputs
    # are made once, each stage simulating its rows
    rs_all, loads_all = inputs([base] + series + ends)
    shared = window(rs_all, loads_all)

    def rows(sl):
        return rs_all[sl], {node: ls.take(sl) if node == end else ls for node, ls in loads_all.items()}

    n_first = 1 + len(series)
    first = yield from stage([base] + series, shared, rows(slice(0, n_first)))
    none = first[0]
    if none.meets:
        return none, none, [none]
    cands = list(first)
    if any(c.meets for c in first[1:]):      # a series part costs no power: no need to try more
        return none, _pick(cands, none), cands
    r_end = eseries.nearest(z_end)
    c_min = 3.0 * 2.0 * td_total / r_end
    rc_specs = [("rc", ("{:g} ohm + {:g} pF to ground at {}", (r_end, cval * 1e12, at)), driver_ohm,
                 Load(cap=load_cap, end_ohm=r_end, end_cap=cval), 0.0, {"end_ohm": r_end, "end_cap": cval})
                for cval in _neighbours(c_min, "E12", 1)[1:]]
    # An RC's capacitor charges for several of its time constants; pass or fail is decided by the
    # settling limit, so the window stops at four times it (a later settling is reported as not
    # settled within the window) and both values share it.
    rc_in = inputs(rc_specs)
    rc = yield from stage(rc_specs, min(window(*rc_in), 4e-9 * settle_limit), rc_in)
    cands += rc
    if any(c.meets for c in rc):
        return none, _pick(cands, none), cands
    cands += yield from stage(ends, shared, rows(slice(n_first, None)))
    return none, _pick(cands, none), cands


def _pick(cands: list[Candidate], none: Candidate) -> Candidate:
    ok = [c for c in cands if c.meets and c.scheme != "none"]
    if ok:
        return min(ok, key=lambda c: (round(c.power_w, 6), c.metrics["settle_ns"]))
    # nothing meets the limits: the terminated candidate with the fewest and mildest violations
    terminated = [c for c in cands if c.scheme != "none"] or [none]
    # (an undershoot, v_max below v_final, counts as no overshoot: it is not a merit)
    return min(terminated, key=lambda c: (c.n_violations, max(c.metrics["overshoot_pct"], 0.0)
                                          + c.metrics["ringback_pct"] + c.metrics["settle_ns"]))
