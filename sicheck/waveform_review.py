"""The waveform stage of a review: simulate every net that needs termination, with loss.

For every net classified `recommended` or `required` (all of them unless the rules set
[waveform] max_nets, then the longest first), the net's own chain of segments (each with
its Z, exact delay and loss) is simulated unterminated and with each standard scheme
(physics/termination_choice.py on the frequency-domain engine physics/line_network.py);
the chosen part and its before/after receiver metrics are added to the nets table,
together with every value the simulation used and where it came from.

Loss per segment comes from the review's own loss columns at the net's frequency f0:
conductor attenuation alpha_c (skin effect and roughness, Wheeler's rule) gives the
segment's series resistance at f0, R = 2 Z alpha_c length; dielectric attenuation alpha_d
gives its effective loss tangent, tan d = alpha_d length / (pi f0 delay); the DC resistance
is copper's resistivity over the trace's cross-section (the plane's share neglected).
"""

from __future__ import annotations

import gc
import math
import os
from dataclasses import dataclass
from itertools import islice
from typing import Iterable, Iterator, NamedTuple

import numpy as np
import pandas as pd

from sicheck.physics.causal_line import LineLoss
from sicheck.physics.line_network import Series
from sicheck.physics.loss import NP_TO_DB, RHO_COPPER
from sicheck.physics.termination_choice import Limits, choose_many
from sicheck.on_die import driver_on_die, on_die_for
from sicheck.rules import Rules

METRIC_KEYS = ("overshoot_pct", "ringback_pct", "settle_ns", "flight_ns")
CHARTS = 12      # waveforms kept for the workbook: the worst nets by unterminated overshoot
RULES_SRC = "rules [waveform]"


def _trace_area(xs) -> float:
    """Copper cross-section of one trace (m^2): a trapezoid for an etched trace."""
    top = xs.top_width if xs.top_width is not None else xs.width
    return xs.thickness * 0.5 * (xs.width + top)


class SegmentLosses:
    """The loss model of every segment, worked out as arrays once; LineLoss objects made for the segments
    asked for (a segment of a net that is not simulated may lack what a model needs)."""

    def __init__(self, z, delay, length, freq, a_c_db, a_d_db, area):
        z, td, ln, f = (np.asarray(x, dtype=float) for x in (z, delay, length, freq))
        ac, ad = (np.asarray(x, dtype=float) for x in (a_c_db, a_d_db))
        ac = np.where(np.isfinite(ac), ac, 0.0) / NP_TO_DB
        ad = np.where(np.isfinite(ad), ad, 0.0) / NP_TO_DB
        if isinstance(area, np.ndarray) and area.dtype.kind == "f":
            ar = area.astype(float)
        else:
            ar = np.array([np.nan if a is None else a for a in area], dtype=float)
        ok = np.isfinite(ar) & (ar > 0)
        r_dc = np.where(ok, RHO_COPPER * ln / np.where(ok, ar, 1.0), 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            tand = np.minimum(ad * ln / (math.pi * f * td), 0.5)
        self.lossless = (ac == 0.0) & (ad == 0.0) & (r_dc == 0.0)
        self._z = z
        self._columns = (f, tand, r_dc, ac, ln)

    def of(self, segments, z=None) -> list[LineLoss | None]:
        """LineLoss (or None) of the given segments (indices, in any order; repeats allowed); z: their
        impedance, when not the one given at first. Each segment's arithmetic is elementwise on arrays."""
        j = np.asarray(segments if isinstance(segments, np.ndarray) else list(segments), dtype=np.intp)
        f, tand, r_dc, ac, ln = (a[j] for a in self._columns)
        zj = self._z[j] if z is None else np.asarray(z, dtype=float)
        r_ac = 2.0 * zj * ac * ln           # R at f0 = 2 Z alpha_c length
        lossy = np.flatnonzero(~self.lossless[j])
        out: list[LineLoss | None] = [None] * len(j)
        for k, lo in zip(lossy.tolist(), LineLoss.many(f[lossy], r_ac[lossy], tand[lossy], r_dc[lossy])):
            out[k] = lo
        return out


def _source(given: bool, cls, attr: str, key: str) -> str:
    if given:
        return "trace list"
    if cls is not None and getattr(cls, attr, None) is not None:
        return f"net class '{cls.name}'"
    return f"{RULES_SRC} {key}"


IN_ORDER_MAX = 7     # numpy sums up to this many float64 values strictly in order (tests/test_waveform_inputs.py)


class _Chains:
    """The segments of many nets laid end to end (net after net, each net's own order): per-net sums,
    first values and tests done once over whole arrays instead of once per net on tiny ones."""

    def __init__(self, ixs: list[np.ndarray]):
        self.counts = np.fromiter(map(len, ixs), dtype=np.intp, count=len(ixs))
        if (self.counts == 0).any():
            raise ValueError("a net without segments")
        self.cat = np.concatenate(ixs).astype(np.intp) if ixs else np.zeros(0, np.intp)
        self.starts = np.cumsum(self.counts) - self.counts
        self.first = self.cat[self.starts]
        self._bounds = list(zip(self.starts.tolist(), (self.starts + self.counts).tolist()))

    def split(self, a) -> list:
        """Each net's part of a per-segment array (a view) or list."""
        return [a[s:e] for s, e in self._bounds]

    def _reduce(self, ufunc, a, empty):
        return ufunc.reduceat(a, self.starts) if len(self.starts) else np.zeros(0, dtype=empty)

    def sums(self, a: np.ndarray) -> np.ndarray:
        """Each net's part's a.sum(), to the last bit: numpy adds fewer than IN_ORDER_MAX + 1 values one
        after the other from 0.0 (its pairwise summation starts at 8; ufunc.reduceat adds in another order),
        so those nets are summed a segment position at a time over all of them, longer ones one by one."""
        a = np.asarray(a, dtype=float)
        out = 0.0 + a[self.starts]
        short = self.counts <= IN_ORDER_MAX
        for k in range(1, min(IN_ORDER_MAX, int(self.counts.max(initial=1)))):
            m = np.flatnonzero(short & (self.counts > k))
            out[m] += a[self.starts[m] + k]
        for j in np.flatnonzero(~short).tolist():
            s, e = self._bounds[j]
            out[j] = a[s:e].sum()
        return out

    def any(self, mask: np.ndarray) -> np.ndarray:
        return self._reduce(np.logical_or, mask, bool)

    def all(self, mask: np.ndarray) -> np.ndarray:
        return self._reduce(np.logical_and, mask, bool)

    def first_true(self, mask: np.ndarray) -> np.ndarray:
        """Each net's first segment (0-based, in the net) where mask holds; 0 where none does (as argmax)."""
        local = np.arange(len(mask)) - np.repeat(self.starts, self.counts)
        k = self._reduce(np.minimum, np.where(mask, local, len(mask)), int)
        return np.where(k == len(mask), 0, k)


@dataclass(frozen=True)
class _ClassInputs:
    """What a net's class (or, without one, the rules) gives every net of it of one kind (single or pair)."""

    cls: object
    driver_on_die: float | None
    driver_src: str              # where driver_ohm and load_pf come from when the trace list does not give them
    load_src: str
    rise_src: str                # ... and the rise time
    swing: float
    swing_src: str
    leg_swing: float             # a pair's leg: half the swing (odd mode)
    limits: Limits               # one object for the class's nets: frozen, and pickled once per chunk of jobs
    overshoot_src: str
    ringback_src: str
    settle_src: str
    on_die: dict | None          # the on-die termination as reported (copied into each net's inputs)
    on_die_sim: tuple | None     # ... and as simulated


def _class_inputs(rules: Rules, cls, class_name: str, pair: bool) -> _ClassInputs:
    od, drv_od = on_die_for(rules, cls, pair), driver_on_die(rules, cls)
    swing = cls.swing if cls and cls.swing else None
    swing_src = f"net class '{cls.name}'" if swing is not None else f"{RULES_SRC} swing"
    if swing is None:
        swing = rules.swing

    def pick(attr, default):
        v = getattr(cls, attr, None) if cls else None
        return (v, f"net class '{cls.name}'") if v is not None else (default, f"{RULES_SRC} {attr}")

    over, over_src = pick("max_overshoot_pct", rules.max_overshoot_pct)
    ring, ring_src = pick("max_ringback_pct", rules.max_ringback_pct)
    settle = cls.max_settle_ns if cls else None
    settle_src = (f"net class '{cls.name}'" if settle is not None else
                  f"flight + ramp + {rules.settle_rise_times:g} x Tr ({RULES_SRC} settle_rise_times)")
    on_die = None if od is None else {
        "ohm": od.ohm, "to_v": None if pair else od.volts, "simulated_ohm": od.sim_ohm,
        "source": od.source + (" (odd mode: half the differential value from each leg to the centre)" if pair else "")}
    return _ClassInputs(
        cls=cls, driver_on_die=drv_od, driver_src=_source(False, cls, "driver_ohm", "driver_ohm"),
        load_src=_source(False, cls, "load_pf", "load_pf"), rise_src=f"net class '{class_name}'",
        swing=swing, swing_src=swing_src, leg_swing=swing / (2.0 if pair else 1.0),
        limits=Limits(max_overshoot_pct=over, max_ringback_pct=ring, max_settle_ns=settle,
                      settle_rise_times=rules.settle_rise_times),
        overshoot_src=over_src, ringback_src=ring_src, settle_src=settle_src, on_die=on_die,
        on_die_sim=None if od is None else (od.sim_ohm, od.sim_volts, od.text))


POOL_MIN_NETS = 400      # below this a process pool costs more than it saves
CHUNK_MIN = 50           # nets per piece of work sent to a process


def _choose_args(args) -> tuple[tuple, dict]:
    """choose()'s arguments for one job."""
    z, td, rise, drv, swing, cap, limits, zd, losses, tree, on_die, parts = args
    parents, receivers, driver_end = tree if tree is not None else (None, None, None)
    return (z, td, rise, drv, swing, cap, limits), dict(zdiff=zd, keep_waves=True, losses=losses, parents=parents,
                                                        receivers=receivers, driver_end=driver_end, on_die=on_die,
                                                        parts=parts)


class Outcome(NamedTuple):
    """What the review keeps of a net's simulation (unterminated `before`, chosen termination `after`),
    worked out where the net was simulated: a worker sends back these few values, not the candidates."""

    metrics: tuple                 # METRIC_KEYS before, then after
    scheme: str
    part: str                      # the termination part as the nets table says it
    power_w: float
    meets: bool
    violations: str
    meets_before: bool
    worst: int                     # the worst receiver's index (terminated)
    receivers: list                # per receiver: (metrics before, metrics after, meets after)
    wave: tuple | None             # (before, after, v_final) for a net that may be charted


def outcome(before, after) -> Outcome:
    return Outcome(
        metrics=tuple(map(before.metrics.__getitem__, METRIC_KEYS)) + tuple(map(after.metrics.__getitem__,
                                                                              METRIC_KEYS)),
        scheme=after.scheme,
        part=("no part: meets the limits as it is" if after.scheme == "none" else
              f"no external part: {after.text}" + ("" if after.meets else ", limits not met")
              if after.scheme == "on-die" else after.text),
        power_w=after.power_w, meets=after.meets, violations="; ".join(after.violations), meets_before=before.meets,
        worst=after.worst,
        receivers=[(b[0], a[0], a[1]) for b, a in zip(before.receiver_results(), after.receiver_results())],
        wave=None if before.wave is None else (before.wave, after.wave, before.metrics["v_final"]))


def _choose_chunk(jobs):
    """[(index, Outcome or the reason the net cannot be simulated)], the nets' stages simulated together
    (physics/chain_batch.py)."""
    # A chunk makes millions of short-lived objects (candidates, waveforms, keys) and no reference cycles:
    # reference counting frees them as it goes, and the garbage collector's passes over them found nothing
    # and cost about 5 % of a worker's time. It is off meanwhile, and collects whatever is left once back on.
    collecting = gc.isenabled()
    gc.disable()
    try:
        results = choose_many([_choose_args(a) for _, a in jobs])
        out = [(i, str(r) if isinstance(r, ValueError) else (r[0], r[1])) for (i, _), r in zip(jobs, results)]
        _chart_waves_only(out)
        return [(i, r if isinstance(r, str) else outcome(*r)) for i, r in out]
    finally:
        if collecting:
            gc.enable()


def _chart_waves_only(results) -> None:
    """Drop the waveforms of nets that cannot be among the CHARTS charted (the worst by unterminated
    overshoot): only this chunk's CHARTS worst (ties kept) can be, so only theirs travel back."""
    done = [r for _, r in results if not isinstance(r, str)]
    over = sorted((o for o in (b.metrics["overshoot_pct"] for b, _ in done) if o == o), reverse=True)   # not NaN
    if len(over) < CHARTS:
        return
    cut = over[CHARTS - 1]
    for before, after in done:
        if not before.metrics["overshoot_pct"] >= cut:
            before.wave = after.wave = None


def workers() -> int:
    """Processes for the waveform stage: $SICHECK_WORKERS, else the CPUs (at most 4), as for the field solver."""
    env = os.environ.get("SICHECK_WORKERS", "")
    return int(env) if env.isdigit() and int(env) > 0 else min(os.cpu_count() or 1, 4)


def run_jobs(jobs: Iterable, count: int, meanwhile=None) -> Iterator[tuple]:
    """(index, result) for each of the `count` jobs, in their order; the nets are independent, so large boards
    use a process pool. Each chunk of jobs goes to the pool as soon as it is made (jobs may come from a
    generator that prepares them), so the workers start while the later jobs are still being prepared; and
    the results are handed on as the chunks finish, so they are sorted out while the last ones run.
    ``meanwhile()`` is called once every job is handed out, before the first result is waited for."""
    n = workers()
    if count < POOL_MIN_NETS or n < 2:
        results = _choose_chunk(list(jobs))
        if meanwhile is not None:
            meanwhile()
        yield from results
        return
    from concurrent.futures import ProcessPoolExecutor
    size = max(CHUNK_MIN, count // (8 * n))
    it = iter(jobs)
    futures: list = []
    try:
        with ProcessPoolExecutor(max_workers=n) as pool:
            while chunk := list(islice(it, size)):
                # the review's tables and the jobs so far are a large heap of long-lived objects: frozen, the
                # workers' (forked) garbage collector no longer walks them each time the results pile up
                gc.freeze()
                futures.append(pool.submit(_choose_chunk, chunk))
            if meanwhile is not None:
                meanwhile()
            for f in futures:
                yield from f.result()
    except BaseException:
        for f in futures:          # the waveform stage stops here: what has not started need not run
            f.cancel()
        raise
    finally:
        gc.unfreeze()


def series_parts_of(ix, part_ohm, part_farad) -> dict:
    """{segment (in the net's order): Series} for the parts a joined net has (sicheck/series_parts.py).

    A capacitor is a coupling capacitor: its time constant is far longer than the window, so the
    level the receiver settles to within it is taken with the capacitor passing the edge (dc_open False).
    """
    out = {}
    for k, j in enumerate(ix):
        if np.isfinite(part_ohm[j]):
            c = float(part_farad[j]) if np.isfinite(part_farad[j]) else None
            out[k] = Series(ohm=float(part_ohm[j]), farad=c, dc_open=False)
    return out


def simulate_nets(seg: pd.DataFrame, nets: pd.DataFrame, rules: Rules, xs: list | None = None, topology=None,
                  meanwhile=None) -> tuple[pd.DataFrame, dict]:
    """The nets table with the waveform stage's columns, and the charted nets' waves. ``meanwhile``: work of
    the caller's that needs no waveform, run once every job is handed out, while the processes work."""
    classes = {c.name: c for c in rules.classes}
    n = len(nets)
    cols = {f"{w}_{k}": np.full(n, np.nan) for w in ("before", "after") for k in METRIC_KEYS}
    scheme = np.full(n, "", dtype=object)
    part = np.full(n, "", dtype=object)
    power = np.full(n, np.nan)
    meets = np.full(n, None, dtype=object)
    notes = np.full(n, "", dtype=object)
    violations = np.full(n, "", dtype=object)
    lossy = np.full(n, None, dtype=object)
    inputs = np.full(n, None, dtype=object)
    rx_out = np.full(n, None, dtype=object)     # every receiver's metrics (before, after)
    topology = topology or {}
    waves: dict[str, tuple] = {}

    flagged = nets.index[nets["termination"] != "not-needed"]
    order = nets.loc[flagged].sort_values("delay", ascending=False).index
    if rules.max_nets is not None:
        order = order[:rules.max_nets]
    area = (np.array([_trace_area(x) for x in xs], dtype=float) if xs is not None else None)
    pos = {net: np.asarray(ix) for net, ix in seg.groupby("net", sort=False).indices.items()}
    arr = {c: seg[c].to_numpy() for c in ("z0", "zodd", "delay", "length", "freq", "conductor_loss_db_per_m",
                                          "dielectric_loss_db_per_m", "xs", "rise_time", "load_pf")}
    given = {c: (seg[f"{c}_given"].to_numpy(bool) if f"{c}_given" in seg.columns else np.zeros(len(seg), bool))
             for c in ("driver_ohm", "load_pf", "rise_time")}
    driver_end = seg["driver_end"].to_numpy(bool) if "driver_end" in seg.columns else None
    part_ohm = seg["part_ohm"].to_numpy(float) if "part_ohm" in seg.columns else np.full(len(seg), np.nan)
    part_farad = seg["part_farad"].to_numpy(float) if "part_farad" in seg.columns else np.full(len(seg), np.nan)
    done_pair: dict[frozenset, int] = {}
    partners: list[tuple[int, int]] = []
    copy_cols = (scheme, part, power, meets, notes, violations, lossy, inputs, rx_out)
    keys = ("net", "pair", "net_class", "driver_ohm", "load_pf", "rise_time", "z_driver_end")
    sim = []          # the nets simulated: (index, net, pair, class, driver_ohm, load_pf, rise_time, z_driver_end)
    for row in zip(order.tolist(), *(nets.loc[order, k].tolist() for k in keys)):
        i, net, pair = row[:3]
        if pair:
            key = frozenset((net, pair))
            if key in done_pair:      # the partner leg: same result (filled in below)
                partners.append((i, done_pair[key]))
                continue
            done_pair[key] = i
        sim.append(row)
    # the simulated nets' segments end to end: per-net sums, first values and tests over whole arrays
    ixs = [pos[r[1]] for r in sim]
    ch = _Chains(ixs)
    cat = ch.cat
    is_pair = np.repeat(np.array([bool(r[2]) for r in sim], dtype=bool), ch.counts)
    z_cat = np.where(is_pair, arr["zodd"][cat].astype(float), arr["z0"][cat].astype(float))
    td_cat = arr["delay"][cat].astype(float)
    # per segment: the loss models (single-ended and odd mode) and the loss totals
    xs_area = (area[arr["xs"].astype(int)] if area is not None else [None] * len(seg))
    seg_losses = SegmentLosses(arr["z0"], arr["delay"], arr["length"], arr["freq"], arr["conductor_loss_db_per_m"],
                               arr["dielectric_loss_db_per_m"], xs_area)
    losses_cat = seg_losses.of(cat, z_cat)
    length = arr["length"].astype(float)
    db_c = length * arr["conductor_loss_db_per_m"].astype(float)
    db_d = length * arr["dielectric_loss_db_per_m"].astype(float)
    db_all = np.nan_to_num(db_c + db_d)
    db_c, db_d = np.nan_to_num(db_c), np.nan_to_num(db_d)
    rise_net = np.array([float(r[6]) for r in sim], dtype=float)
    per_net = zip(
        # a net's impedances and delays as lists of floats: a job is pickled to a worker, and a small numpy
        # array costs ten times a list to pickle and to unpickle
        ch.split(z_cat.tolist()), ch.split(td_cat.tolist()), ch.split(losses_cat), ch.counts.tolist(),
        (ch.sums(td_cat) * 1e12).tolist(), ch.sums(db_all[cat]).tolist(), ch.sums(db_c[cat]).tolist(),
        ch.sums(db_d[cat]).tolist(), (~ch.all(seg_losses.lossless[cat])).tolist(),
        given["driver_ohm"][ch.first].tolist(), given["load_pf"][ch.first].tolist(),
        # the net's edge is given in the trace list when a row giving it has that edge
        ch.any(given["rise_time"][cat] & (arr["rise_time"][cat] == np.repeat(rise_net, ch.counts))).tolist(),
        (ch.first_true(driver_end[cat]) if driver_end is not None else np.zeros(len(sim), int)).tolist(),
        ch.any(np.isfinite(part_ohm[cat])).tolist(), arr["freq"][ch.first].tolist(),
        (arr["freq"][ch.first] * 1e-9).tolist())
    per_class: dict[tuple[str, bool], _ClassInputs] = {}
    ramps: dict[float, str] = {}
    pending: dict = {}

    def prepared():
        """Each net's job, made as the pool takes them: the first chunks are simulated meanwhile."""
        for (i, net, pair, net_class, drv_in, cap_in, rise_in, zde), (
                z, td, losses, n_seg, delay_ps, loss_db, cond_db, diel_db, has_loss, drv_given, cap_given, rise_given,
                de_local, has_parts, f0, f0_ghz) in zip(sim, per_net):
            ix = pos[net]
            c = per_class.get((net_class, bool(pair)))
            if c is None:
                c = per_class[net_class, bool(pair)] = _class_inputs(rules, classes.get(net_class), net_class,
                                                                     bool(pair))
            cls = c.cls
            assumed = []
            drv = float(drv_in)
            drv_src = "trace list" if drv_given else c.driver_src
            if c.driver_on_die is not None and not drv_given:
                drv, drv_src = float(c.driver_on_die), f"net class '{cls.name}' driver_on_die_ohm"
            if math.isnan(drv):
                drv = rules.driver_ohm
                assumed.append(f"driver {drv:g} ohm")
            cap = float(cap_in)
            cap_src = "trace list" if cap_given else c.load_src
            if math.isnan(cap):
                cap = rules.load_pf
                assumed.append(f"load {cap:g} pF")
            topo = topology.get(net)
            # the segment whose impedance the driver sees (review._topology: not a short neck-down): de_local
            tree, rx_used = (None, None, de_local), [{"receiver": "far end", "load_pf": cap, "source": cap_src}]
            if topo is not None:       # a tree: each receiver its own load, the driver end on the main path
                rx_used, rx = [], []
                for name, k in zip(topo.receivers, topo.receiver_segment):
                    c_k = float(arr["load_pf"][ix[k]])
                    src_k = _source(bool(given["load_pf"][ix[k]]), cls, "load_pf", "load_pf")
                    if np.isnan(c_k):
                        c_k = rules.load_pf
                    rx.append((int(k), c_k * 1e-12, name))
                    rx_used.append({"receiver": name, "load_pf": c_k, "source": src_k})
                assumed = [a for a in assumed if not a.startswith("load ")] + (
                    [f"load {rules.load_pf:g} pF"] if any(u["source"].startswith(RULES_SRC) for u in rx_used) else [])
                tree = (list(topo.parent), rx, de_local)
                cap, cap_src = rx_used[0]["load_pf"], rx_used[0]["source"]
                delay_ps = float(np.array(td)[list(topo.path)].sum() * 1e12)
            rise = float(rise_in)
            ramp = ramps.get(rise)
            if ramp is None:
                ramp = ramps[rise] = (f"linear ramp 0-100 % in {rise / 0.8 * 1e12:.4g} ps (Tr/0.8) behind the driver "
                                      "resistance")
            zd = float(zde) if pair else None
            used = {
                "engine": ("frequency domain: the chain of lines solved with exact delays (a model of the net: "
                           "an estimate)" if tree is None else "frequency domain: the tree of lines (each branch a "
                           "shunt input admittance at its node) solved with exact delays (a model of the net: an "
                           "estimate)"),
                "source": ramp,
                "mode": "odd mode of the pair: one leg, half the swing, Zodd per segment" if pair else "single-ended",
                "segments": n_seg,
                "delay_ps": {"value": delay_ps,
                             "source": "segments (field solver or closed form)" + ("" if topo is None else
                                                                                   ", along the main path")},
                "driver_ohm": {"value": drv, "source": drv_src},
                "load_pf": {"value": cap, "source": cap_src},
                "receivers": rx_used,
                "swing_v": {"value": c.swing, "source": c.swing_src},
                "rise_time_ps": {"value": rise * 1e12, "source": ("trace list" if rise_given else c.rise_src)
                                 + " (fastest edge on the net's rows)"},
                "max_overshoot_pct": {"value": c.limits.max_overshoot_pct, "source": c.overshoot_src},
                "max_ringback_pct": {"value": c.limits.max_ringback_pct, "source": c.ringback_src},
                "max_settle_ns": {"value": c.limits.max_settle_ns, "source": c.settle_src},
                "loss": {"included": has_loss, "freq_ghz": f0_ghz, "insertion_loss_db": loss_db,
                         "conductor_db": cond_db,
                         "dielectric_db": diel_db,
                         "dc_resistance_ohm": float(sum(lo.r_dc for lo in losses if lo is not None)),
                         "source": "segment loss columns at the net's frequency: conductor as a causal skin-effect "
                                   "impedance from the DC resistance (copper resistivity over the trace section), "
                                   "dielectric as a Djordjevic-Sarkar wideband loss tangent"},
            }
            if c.on_die is not None:
                used["on_die"] = dict(c.on_die)
            if topo is not None:
                used["topology"] = {"driver": topo.driver, "driver_source": topo.driver_source,
                                    "open_ends": list(topo.open_ends),
                                    "stubs": [{"node": b.node, "end": b.end, "length_mm": b.length * 1e3}
                                              for b in topo.stubs]}
            parts = series_parts_of(ix, part_ohm, part_farad) if has_parts else {}
            if parts:
                used["series_parts"] = [{"after_row": int(seg["row"].iat[ix[k]]), "ohm": p.ohm,
                                         "farad": p.farad} for k, p in parts.items()]
            pending[i] = (net, used, has_loss, loss_db, f0, assumed)     # before its job is handed out
            yield (i, (z, td, rise, drv, c.leg_swing, cap * 1e-12, c.limits, zd, losses, tree, c.on_die_sim,
                       parts or None))

    done, metric_rows = [], []       # the nets simulated and their metrics (before then after, as in cols)
    for i, result in run_jobs(prepared(), len(sim), meanwhile):
        net, used, has_loss, loss_db, f0, assumed = pending[i]
        inputs[i] = used
        if isinstance(result, str):
            notes[i] = f"not simulated: {result}"
            continue
        done.append(i)
        metric_rows.append(result.metrics)
        scheme[i] = result.scheme
        part[i] = result.part
        power[i] = result.power_w
        meets[i] = result.meets
        violations[i] = result.violations
        lossy[i] = has_loss
        loss_note = (f"simulated with loss ({loss_db:.2f} dB at {f0 * 1e-9:.3g} GHz)" if has_loss
                     else "simulated lossless (no loss data)")
        notes[i] = loss_note + ("; assumed " + ", ".join(assumed) + f" ({RULES_SRC})" if assumed else "")
        rx_used = used["receivers"]
        rx_out[i] = [{"receiver": u["receiver"], "load_pf": u["load_pf"], "before": b, "after": a, "meets": m}
                     for u, (b, a, m) in zip(rx_used, result.receivers)]
        if len(rx_used) > 1:
            notes[i] += (f"; multi-drop, {len(rx_used)} receivers, worst '{rx_used[result.worst]['receiver']}'"
                         + ("" if result.meets else "; no scheme that fits a multi-drop net (series at the driver; "
                            f"parallel, Thevenin or RC at the far end of the main path, '{rx_used[0]['receiver']}') "
                            "meets the limits at every receiver"))
        if "on_die" in used and not result.meets_before:
            notes[i] += ("; terminated on the die, limits not met with it: only a series part at the driver was "
                         "tried on top of it (no second parallel termination)")
        if result.wave is not None:
            waves[net] = result.wave
    if done:
        for c, values in zip(cols.values(), np.array(metric_rows, dtype=float).T):
            c[done] = values
    if partners:
        legs, firsts = (np.array(x, dtype=np.intp) for x in zip(*partners))
        for c in cols.values():
            c[legs] = c[firsts]
        for a in copy_cols:          # object columns: the same objects, as one leg's result is the pair's
            a[legs] = a[firsts]
    out = nets.copy()
    for c, v in cols.items():
        out[c] = v
    out["recommended_termination"] = scheme
    out["termination_part"] = part
    out["termination_power_w"] = power
    out["waveform_meets_limits"] = meets
    out["waveform_violations"] = violations
    out["waveform_assumptions"] = notes
    out["waveform_loss"] = lossy
    out["waveform_inputs"] = inputs
    out["receivers"] = rx_out
    # the order depends on the sorted column alone: the other columns are not copied along
    worst = out.loc[order, ["net", "pair", "before_overshoot_pct"]].sort_values("before_overshoot_pct", ascending=False)
    keep, seen = [], set()
    for net, pair in zip(worst["net"], worst["pair"]):
        key = frozenset((net, pair)) if pair else net
        if key in seen or net not in waves:
            continue
        seen.add(key)
        keep.append(net)
        if len(keep) >= CHARTS:
            break
    return out, {n: waves[n] for n in keep}
