"""Waveform engine: a network of line sections and series parts, solved in the frequency domain.

The network is a tree rooted at the driver (node 0): each edge is a uniform line section
(causal_line.Line, lossless or lossy) or a series part (R, L, C in series); shunt loads
(transient.LoadSet: one row per candidate termination) sit at any node. The driver is a
linear ramp behind a resistance (one value per candidate). Everything is linear, so the
answer is exact for this network up to the sampling of the result:

1. Each edge is a two-port, its chain (ABCD) matrix. For a line, A = D = cosh(gl),
   B = Zc sinh(gl), C = sinh(gl)/Zc; stored scaled by 2 e^(-gl) (entries 1 + E^2,
   Zc (1 - E^2), (1 - E^2)/Zc and the scale 2E, E = e^(-gl), |E| < 1), so that long or
   very lossy lines never overflow. Runs of sections with no load between them are
   multiplied into one two-port first (cost independent of the candidates).
2. The tree is solved by input-admittance recursion from the leaves to the driver,
   Y_in = (C + D Y_L)/(A + B Y_L); each node's voltage follows from its parent's by
   V_child/V_parent = 1/(A + B Y_child) (a branch is a shunt admittance at its node).
3. Back to time by the modified Fourier transform (L. M. Wedepohl, S. E. T. Mohamed,
   "Multiconductor transmission lines. Theory of natural modes and Fourier integral
   applied to transient analysis", Proc. IEE 116(9), 1969): the transfer function is
   evaluated at s_k = sigma + j k 2 pi / T and the damped record inverted by one inverse
   FFT per batch; sigma T = ln(1e3) damps what wraps around from beyond the record. To
   make the part that wraps around decay, the DC answer (nodal analysis, lines as their
   DC resistance, capacitors open) is taken out first: v(t) = v_before + H(0) ramp(t - t0)
   + L^-1{(H(s) - H(0) e^(-s t0)) Ramp(s)}, whose last term settles to zero with the
   network; t0 is the earliest arrival of the edge's front at the node, so that nothing
   artificial happens before it.
   Delays enter as e^(-s TD): exact, no rounding to the time step.

Sampling: dt = ramp/24, and the record is at least 1.25 times the window the candidate needs to
settle (bounce estimate below). Truncating the ramp's spectrum at the Nyquist frequency leaves a
small ripple around its kinks; undoing the damping multiplies what is left at time t by
e^(sigma t), at most (1/WRAP_DAMPING)^(1/RECORD_FACTOR) = 251 at the window's end, which is why
a weaker damping and a shorter record beat a stronger damping and a longer one. On 3 000 nets of a
synthetic board (13 432 candidate waveforms) the overshoot and ringback were within 0.45 % of the
final level and the settling within 14 ps of a solution at 96 samples per ramp with a 2x record,
99 % of them within 0.21 % and 3 ps (32 samples per ramp and a 1.5x record: 0.51 %); the ngspice
comparisons in the tests hold.
Memory: at most MAX_SAMPLES samples per simulation (a clear ValueError beyond), and
candidates are batched so that no batch holds more than BATCH_BINS complex bins.
"""

from __future__ import annotations

import bisect
import functools
import math
from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np
from scipy import fft as sfft

from sicheck.physics.causal_line import (ConstantRG, Line, LineLoss, dc_resistance, front_delay, per_delay, shape_key,
                                         smooth_per_delay_lines)
from sicheck.physics.transient import (RAMP_PER_RISE, SETTLE_BAND, Load, LoadSet, Waveform, metrics_batch,
                                       ramp_voltage)

SAMPLES_PER_RAMP = 24
RECORD_FACTOR = 1.25           # record length / window kept
WRAP_DAMPING = 1e-3            # e^(-sigma T): what wraps around from one record length later is damped by this
MAX_SAMPLES = 3 << 20          # about three million samples: one simulation stays within about 350 MB
BATCH_BINS = 1 << 21           # complex frequency bins per batch (32 MB per array)
CHUNK_BINS = 1 << 16           # frequency bins evaluated at once
MIN_SAMPLES = 256
SHAPE_NODES = 512              # K(s), M(s) of a lossy line: exact at this many frequencies, interpolated between
SHORT_OHM = 1e-6               # below a micro-ohm a DC path is a short (the nodes are merged)
LEAK_S = 1e-12                 # siemens to ground at every node for the DC solve (a floating node stays at 0 V)


@dataclass(frozen=True)
class Series:
    """A part in series between two nodes: R + sL (+ 1/(sC) when farad is given).

    dc_open: a capacitor is open at DC, so the level every node settles to is worked out with it
    open. False for a coupling capacitor whose time constant (microseconds) is far longer than the
    window simulated (nanoseconds): within the window it holds its working charge and passes the
    edge, so the level the receiver settles to is the one with the capacitor shorted.
    """

    ohm: float = 0.0
    henry: float = 0.0
    farad: float | None = None
    dc_open: bool = True

    def __post_init__(self):
        if self.ohm < 0 or self.henry < 0 or (self.farad is not None and self.farad <= 0):
            raise ValueError(f"series part out of range: {self}")


class Network:
    """A tree of line sections and series parts rooted at the driver, node 0.

    ``add(parent, element)`` returns the new node at the element's far end. Nodes are
    numbered in creation order, so a parent always precedes its children.
    """

    def __init__(self) -> None:
        self.edges: list[tuple[int, int, Line | Series]] = []
        self._folded: dict = {}      # frequency grid -> folded two-ports (reused across candidate stages)
        # what is worked out from the edges alone, by name (settle_window's, chain_batch's): a net's candidate
        # stages are simulated one after the other on the same network and share it
        self.memo: dict = {}

    @property
    def size(self) -> int:
        return len(self.edges) + 1

    def add(self, parent: int, element: Line | Series) -> int:
        if not 0 <= parent < self.size:
            raise ValueError(f"no node {parent} in the network")
        if not isinstance(element, (Line, Series)):
            raise TypeError(f"an edge is a Line or a Series part, not {type(element).__name__}")
        child = self.size
        self.edges.append((parent, child, element))
        self._folded.clear()
        self.memo.clear()
        return child

    @classmethod
    def chain(cls, elements: Sequence[Line | Series]) -> tuple["Network", int]:
        """Elements in series, driver end first; returns (network, far-end node)."""
        net = cls()
        for e in elements:
            if not isinstance(e, (Line, Series)):
                raise TypeError(f"an edge is a Line or a Series part, not {type(e).__name__}")
        # each element's far end is the next node: the edges add() would make, without its checks per edge
        net.edges = [(k, k + 1, e) for k, e in enumerate(elements)]
        return net, len(net.edges)

    def lines(self) -> list[Line]:
        return [e for _, _, e in self.edges if isinstance(e, Line)]

    def front_delay(self, node: int) -> float:
        """Earliest time an edge launched at the driver can reach ``node`` (s)."""
        parent = {c: (p, e) for p, c, e in self.edges}
        t = 0.0
        while node != 0:
            node, e = parent[node]
            if isinstance(e, Line):
                t += front_delay(e)
        return t


# ---------------------------------------------------------------- two-ports in the frequency domain

def _two_port(e: Line | Series, s: np.ndarray, shapes: dict | None = None):
    """(a, b, c, d, g): the chain matrix [[a, b], [c, d]] / g of one edge (shapes: cache of per_delay)."""
    if isinstance(e, Line):
        if e.loss is None:
            e1 = np.exp(-e.delay * s)
            zc = e.z0
        else:
            key = shape_key(e)
            if shapes is None or key not in shapes:
                km = _smooth_per_delay(e, s)
                if shapes is not None:
                    shapes[key] = km
            else:
                km = shapes[key]
            e1 = np.exp(-e.delay * s * km[0])
            zc = e.z0 * km[1]
        e2 = e1 * e1
        a = 1.0 + e2
        b = 1.0 - e2
        return a, zc * b, b / zc, a, 2.0 * e1
    z = e.ohm + s * e.henry
    if e.farad is None:
        return 1.0, z, 0.0, 1.0, 1.0
    sc = s * e.farad          # scaled by sC: [[sC, sC z + 1], [0, sC]] / sC
    return sc, sc * z + 1.0, 0.0, sc, sc


def _smooth_per_delay(e: Line, s: np.ndarray):
    """per_delay(e, s), interpolated on long grids (causal_line.smooth_per_delay_lines)."""
    if len(s) <= 4 * SHAPE_NODES:
        return per_delay(e, s)
    k, m = smooth_per_delay_lines([e], s, SHAPE_NODES)
    return k[0], m[0]


def _cascade(p, q):
    a1, b1, c1, d1, g1 = p
    a2, b2, c2, d2, g2 = q
    return (a1 * a2 + b1 * c2, a1 * b2 + b1 * d2, c1 * a2 + d1 * c2, c1 * b2 + d1 * d2, g1 * g2)


def _fold(net: Network, s: np.ndarray, keep: set):
    """Edge two-ports at s, with runs of edges that have nothing attached between them multiplied into one.

    Returns (two-port per remaining child node, children, parent); independent of the candidates.
    """
    parent = {c: p for p, c, _ in net.edges}
    children: dict[int, list[int]] = {n: [] for n in range(net.size)}
    tp = {}
    shapes: dict = {}
    for p, c, e in net.edges:
        children[p].append(c)
        tp[c] = _two_port(e, s, shapes)
    for x in range(net.size - 1, 0, -1):
        if x in keep or len(children[x]) != 1:
            continue
        y = children[x][0]
        tp[y] = _cascade(tp[x], tp[y])
        px = parent[x]
        parent[y] = px
        children[px] = [y if k == x else k for k in children[px]]
        del tp[x]
        children[x] = []
    return tp, children, parent


def _transfer(net: Network, s: np.ndarray, r_source: np.ndarray, loads: Mapping[int, LoadSet],
              wanted: Sequence[int], grid_key=None) -> dict[int, np.ndarray]:
    """V(node)/V(source) at complex frequencies s for each wanted node: (candidates, len(s)).

    grid_key: a hashable name of the grid s, to reuse the folded two-ports between calls.
    """
    keep = set(loads) | set(wanted) | {0}
    key = None if grid_key is None else (grid_key, frozenset(keep))
    if key is not None and key in net._folded:
        tp, children, parent = net._folded[key]
    else:
        tp, children, parent = _fold(net, s, keep)
        if key is not None:
            if len(net._folded) >= 4:
                net._folded.pop(next(iter(net._folded)))
            net._folded[key] = (tp, children, parent)
    y_in: dict[int, np.ndarray] = {}
    ratio: dict[int, np.ndarray] = {}
    live = [0] + sorted(tp)
    for x in reversed(live):
        y = loads[x].admittance(s) if x in loads else 0.0
        for k in children[x]:
            a, b, c, d, g = tp[k]
            den = a + b * y_in[k]
            y = y + (c + d * y_in[k]) / den
            ratio[k] = g / den
        y_in[x] = y
    h = {0: 1.0 / (1.0 + r_source[:, None] * y_in[0])}
    for x in live[1:]:
        if x in h:
            continue
        path = []
        while x not in h:
            path.append(x)
            x = parent[x]
        for k in reversed(path):
            h[k] = h[parent[k]] * ratio[k]
    return {w: np.broadcast_to(h[w], (len(r_source), len(s))) for w in wanted}


# ---------------------------------------------------------------- DC state (nodal analysis)

def _dc(net: Network, r_source: np.ndarray, loads: Mapping[int, LoadSet], swing: float):
    """(v_before, v_after): node voltages (candidates, nodes) with the driver low and high."""
    rep = list(range(net.size))

    def find(x):
        while rep[x] != x:
            rep[x] = rep[rep[x]]
            x = rep[x]
        return x

    stamps = []          # (node, node, self admittance, mutual admittance) of each two-port at DC
    shunts = []          # (node, conductance to ground)
    for p, c, e in net.edges:
        g_line = e.loss.g if isinstance(e, Line) and isinstance(e.loss, ConstantRG) else 0.0
        if isinstance(e, Line):
            r = dc_resistance(e)
        else:
            r = None if (e.farad is not None and e.dc_open) else e.ohm
        if r is None:
            continue
        if r < SHORT_OHM:
            rep[find(c)] = find(p)
            if g_line:
                shunts.append((p, g_line))
        elif g_line:
            # a distributed RG line at DC: gamma = sqrt(RG), Zc = sqrt(R/G); Y11 = cosh/(Zc sinh), Y12 = -1/(Zc sinh)
            gam, zc = math.sqrt(r * g_line), math.sqrt(r / g_line)
            b = zc * math.sinh(gam)
            stamps.append((p, c, math.cosh(gam) / b, -1.0 / b))
        else:
            stamps.append((p, c, 1.0 / r, -1.0 / r))
    roots = sorted({find(x) for x in range(net.size)})
    col = {r: i for i, r in enumerate(roots)}
    n = len(roots)
    g = np.eye(n) * LEAK_S
    for p, c, y_self, y_mut in stamps:
        i, j = col[find(p)], col[find(c)]
        if i == j:
            continue
        g[i, i] += y_self
        g[j, j] += y_self
        g[i, j] += y_mut
        g[j, i] += y_mut
    for p, y in shunts:
        g[col[find(p)], col[find(p)]] += y
    m = len(r_source)
    gm = np.repeat(g[None], m, axis=0)
    rhs = np.zeros((m, n, 2))
    i0 = col[find(0)]
    gm[:, i0, i0] += 1.0 / r_source
    rhs[:, i0, 1] += swing / r_source
    for node, ls in loads.items():
        i = col[find(node)]
        gl = np.broadcast_to(ls.dc_conductance(), (m,))
        gm[:, i, i] += gl
        vt = np.broadcast_to(ls.end_volts, (m,))
        cur = gl * np.where(gl > 0, vt, 0.0)
        rhs[:, i, 0] += cur
        rhs[:, i, 1] += cur
    v = np.linalg.solve(gm, rhs)
    idx = [col[find(x)] for x in range(net.size)]
    return v[:, idx, 0], v[:, idx, 1]


# ---------------------------------------------------------------- time window

def settle_window(net: Network, r_source: np.ndarray, loads: Mapping[int, LoadSet], ramp: float) -> np.ndarray:
    """Time each candidate needs to be simulated (s): enough round trips and time constants to settle.

    Bounces decay by the product of the source and far-end reflections per round trip (taken as at
    least 0.3, for the steps along the net); a reflection of gamma^k falls below a quarter of the
    settling band after k = ln(band/4)/ln(gamma) trips (plus 2, at least 4, at most 400). Pass or
    fail needs far less: the settling limit is about one round trip after the flight.
    """
    return np.array(settle_times(net, r_source, loads, ramp))


def settle_times(net: Network, r_source, loads: Mapping[int, LoadSet], ramp: float) -> list[float]:
    """settle_window as plain floats. Worked out per candidate on plain floats: a net has a handful of
    candidates, and this runs once per stage of every net on a board (numpy's per-call cost on arrays this
    small was most of its time)."""
    total, z_min, z1, before, z_end, stretch = _window_shape(net, ramp)
    # the first line seen from the driver, and any series resistance before it
    rs_l = np.asarray(r_source, dtype=float).tolist()
    for ohm in before:
        rs_l = [r + ohm for r in rs_l]
    # the far end: a resistive termination reflects (R - Z)/(R + Z); an open end or a capacitor fully
    m = len(rs_l)
    cols = [(_per_candidate(ls.cap, m), _per_candidate(ls.end_ohm, m), _per_candidate(ls.end_cap, m))
            for ls in loads.values()]
    log_band = math.log(SETTLE_BAND / 4.0)
    # (max(a, b) and min(a, b) of two floats written as the builtins decide them: b only when b > a, resp.
    # b < a, so that NaN and ties come out the same; the calls cost more than the arithmetic here)
    out = []
    for i, rs in enumerate(rs_l):
        g_end = 1.0
        for _, end_ohm, _ in cols:
            r = end_ohm[i]
            if r == r:
                g_end = abs((r - z_end) / (r + z_end))
        gamma = abs((rs - z1) / (rs + z1)) * g_end
        if 0.3 > gamma:
            gamma = 0.3
        # (gamma >= 1 cannot decay: the least number of trips, as the logarithm's sign gives)
        if gamma >= 1.0:
            trips = 4.0
        else:
            trips = log_band / math.log(gamma) + 2.0
            trips = 4.0 if 4.0 > trips else trips
            trips = 400.0 if 400.0 < trips else trips
        tau = tau_end = 0.0
        r_wire = rs if rs < z_min else z_min
        r_drive = z_min if z_min > rs else rs
        for cap, end_ohm, end_cap in cols:
            x = cap[i] * r_wire
            tau = x if x > tau else tau
            # an RC termination's capacitor charges, once the line has settled into a wire, through its
            # resistor and the driver: e^-6 of the step is a twentieth of the settling band
            ce, ro = end_cap[i], end_ohm[i]
            if ce == ce and ro == ro:
                x = ce * (ro + r_drive)
                tau_end = x if x > tau_end else tau_end
        a, b = 12.0 * tau, 6.0 * tau_end
        out.append(ramp + trips * 2.0 * total * stretch + (b if b > a else a) + 4.0 * ramp)
    return out


def _window_shape(net: Network, ramp: float) -> tuple:
    """What settle_window takes from the network alone: (total delay, least Z, the first line's Z, the series
    resistances before it, the last line's Z, the stretch for loss); once per network (net.memo)."""
    got = net.memo.get("settle_window")
    if got is not None and got[0] == ramp:
        return got[1]
    lines = net.lines()
    total = sum(x.delay for x in lines) or ramp
    z_min = min((x.z0 for x in lines), default=50.0)
    z1 = z_min
    before = []
    node = 0
    while True:
        first = next(((c, e) for p, c, e in net.edges if p == node), None)     # the node's first edge
        if first is None:
            break
        node, e = first
        if isinstance(e, Line):
            z1 = e.z0
            break
        before.append(e.ohm)
    z_end = _last_line(net).z0 if lines else z_min
    atten = sum(x.loss.r_ac / (2.0 * x.z0) + math.pi * x.loss.f_ref * x.delay * x.loss.tan_delta
                for x in lines if isinstance(x.loss, LineLoss))
    # loss adds a slow tail (the skin effect's step response approaches its end like 1/sqrt(t)):
    # more time in proportion to the lines' attenuation at their reference frequencies
    shape = (total, z_min, z1, tuple(before), z_end, 1.0 + min(atten, 2.0))
    net.memo["settle_window"] = (ramp, shape)
    return shape


def _per_candidate(values, m: int) -> list[float]:
    if isinstance(values, np.ndarray) and values.ndim == 1 and values.dtype == np.float64:
        v = values.tolist()          # (the usual case, without numpy's conversions)
    else:
        v = np.asarray(values, dtype=float).reshape(-1).tolist()
    return v * m if len(v) == 1 else v


def _last_line(net: Network) -> Line:
    """The line nearest the deepest node along the first branch (the far end of a chain)."""
    last = None
    for _, _, e in net.edges:
        if isinstance(e, Line):
            last = e
    return last


def record_size(t_end: float, dt: float) -> int:
    """Samples needed in the record for a window t_end; ValueError above MAX_SAMPLES."""
    need = max(MIN_SAMPLES, int(math.ceil(RECORD_FACTOR * t_end / dt)))
    if need > MAX_SAMPLES:
        raise ValueError(f"the simulation would need {need:,} time samples (more than {MAX_SAMPLES:,}): a "
                         f"{t_end * 1e9:.4g} ns window at {dt * 1e12:.4g} ps steps; the rise time is too short "
                         "for this net's length")
    return need


def record_ladder(need: int) -> int:
    """The smallest size 2^k x (1, 1.25, 1.5 or 1.75) >= need: fast FFT sizes at most 25 % above the need,
    few enough that candidates of different stages share a record (and its two-ports)."""
    sizes = _ladder(int(need).bit_length())
    return sizes[bisect.bisect_left(sizes, need)]


@functools.lru_cache(maxsize=64)
def _ladder(bits: int) -> tuple[int, ...]:
    return tuple(sorted(((1 << j) * m) // 4 for j in range(max(2, bits - 2), bits + 2) for m in (4, 5, 6, 7)))


def record_groups(needs: np.ndarray) -> list[tuple[int, np.ndarray]]:
    """Candidates grouped on shared records: (record size, members)."""
    sizes = np.array([record_ladder(int(n)) for n in needs])
    return [(int(n), np.nonzero(sizes == n)[0]) for n in np.unique(sizes)]


# ---------------------------------------------------------------- the simulation

def simulate_network(net: Network, receivers: Sequence[int], swing: float, rise: float, r_source,
                     loads: Mapping[int, LoadSet], t_end: float | None = None, with_source: bool = False,
                     samples_per_ramp: int = SAMPLES_PER_RAMP) -> dict[int, list[Waveform]]:
    """Each receiver's waveform for each candidate (r_source[i] with row i of every LoadSet).

    r_source: the driver's resistance per candidate (ohm, > 0); a LoadSet with one row applies to
    all candidates. t_end: the window (one value, or one per candidate); default settle_window.
    Returns {receiver: [Waveform per candidate]}; with ``with_source`` each
    Waveform also carries the driver-node voltage.
    """
    if rise <= 0 or swing == 0:
        raise ValueError("the rise time must be positive and the swing non-zero")
    r_source = np.atleast_1d(np.asarray(r_source, dtype=float))
    if np.any(~(r_source > 0)):
        raise ValueError("the driver resistance must be above zero (an ideal source cannot be simulated)")
    m = len(r_source)
    for node, ls in loads.items():
        if not 0 <= node < net.size:
            raise ValueError(f"no node {node} in the network")
        if len(ls) not in (1, m):
            raise ValueError("every LoadSet needs one row or one row per candidate")
    for r in receivers:
        if not 0 <= r < net.size:
            raise ValueError(f"no node {r} in the network")
    ramp = rise * RAMP_PER_RISE
    dt = ramp / samples_per_ramp
    ends = (np.broadcast_to(np.asarray(t_end, dtype=float), (m,)) if t_end is not None
            else settle_window(net, r_source, loads, ramp))
    needs = np.array([record_size(te, dt) for te in ends])
    wanted = list(dict.fromkeys(list(receivers) + ([0] if with_source else [])))
    v_low, v_high = _dc(net, r_source, loads, swing)
    out: dict[int, list] = {r: [None] * m for r in receivers}
    src: list = [None] * m
    for n_rec, members in record_groups(needs):
        k_bins = n_rec // 2 + 1
        per_batch = max(1, BATCH_BINS // k_bins)
        for b0 in range(0, len(members), per_batch):
            idx = members[b0:b0 + per_batch]
            sub_loads = {k: (ls if len(ls) == 1 else ls.take(idx)) for k, ls in loads.items()}
            t, waves = _run(net, wanted, swing, ramp, dt, int(n_rec), r_source[idx], sub_loads,
                            v_low[idx], v_high[idx])
            for w in wanted:
                vf = v_high[idx, w]
                if w == 0 and with_source and w not in receivers:
                    continue
                rows = metrics_batch(t, waves[w], vf, ramp)
                for j, i in enumerate(idx):
                    out[w][i] = Waveform(t=t, v_rx=waves[w][j], v_src=None, v_final=float(vf[j]), ramp=ramp,
                                         metrics=rows[j])
            if with_source:
                for j, i in enumerate(idx):
                    src[i] = waves[0][j]
    if with_source:
        for r in receivers:
            for i in range(m):
                out[r][i].v_src = src[i]
    if t_end is None:
        _extend_unsettled(out, net, receivers, swing, rise, r_source, loads, ends, dt, with_source, samples_per_ramp)
    return out


def _extend_unsettled(out, net, receivers, swing, rise, r_source, loads, ends, dt, with_source, samples_per_ramp):
    """Candidates still ringing at the end of the estimated window, simulated again over 4x the window.

    settle_window's estimate of the decay comes from the end reflections; steps inside a net can trap a
    slower mode (a low-impedance section between two high ones behind a strong driver). A window the
    caller chose is kept as given; only the estimated one grows (at most twice, within MAX_SAMPLES).
    """
    for _ in range(2):
        redo = [i for i in range(len(r_source))
                if any(not out[r][i].metrics["settled_in_window"] for r in receivers)]
        if not redo:
            return
        longer = ends[redo] * 4.0
        try:
            for te in longer:
                record_size(te, dt)
        except ValueError:
            return                       # reported as not settled within the window simulated
        sub_loads = {k: (ls if len(ls) == 1 else ls.take(redo)) for k, ls in loads.items()}
        again = simulate_network(net, receivers, swing, rise, r_source[redo], sub_loads, t_end=longer,
                                 with_source=with_source, samples_per_ramp=samples_per_ramp)
        for r in receivers:
            for j, i in enumerate(redo):
                out[r][i] = again[r][j]
        ends = ends.copy()
        ends[redo] = longer


def _run(net, wanted, swing, ramp, dt, n_rec, r_source, loads, v_low, v_high):
    """One batch on one record: (t, {node: (candidates, samples)})."""
    t_rec = n_rec * dt
    sigma = -math.log(WRAP_DAMPING) / t_rec
    k_bins = n_rec // 2 + 1
    w = 2.0 * math.pi / t_rec * np.arange(k_bins)
    m = len(r_source)
    h0 = {x: (v_high[:, x] - v_low[:, x]) / swing for x in wanted}
    # the reference taken out starts when the edge's front can first arrive: no artificial kink before it
    t0 = {x: min(net.front_delay(x), n_rec * dt / RECORD_FACTOR) for x in wanted}
    spec = {x: np.empty((m, k_bins), dtype=complex) for x in wanted}
    for k0 in range(0, k_bins, CHUNK_BINS):
        s = sigma + 1j * w[k0:k0 + CHUNK_BINS]
        ramp_s = swing * -np.expm1(-s * ramp) / (ramp * s * s)
        h = _transfer(net, s, r_source, loads, wanted, grid_key=(n_rec, dt, k0))
        for x in wanted:
            spec[x][:, k0:k0 + CHUNK_BINS] = (h[x] - h0[x][:, None] * np.exp(-s * t0[x])) * ramp_s
    n_keep = int(math.floor(n_rec / RECORD_FACTOR)) + 1
    t = np.arange(n_keep) * dt
    growth = np.exp(sigma * t)
    waves = {}
    for x in wanted:
        d = sfft.irfft(spec[x], n=n_rec, axis=-1)[:, :n_keep] * (growth / dt)
        waves[x] = d + v_low[:, x][:, None] + (h0[x] * swing)[:, None] * ramp_voltage(t - t0[x], 1.0, ramp)
    return t, waves


@dataclass(frozen=True)
class Simulation:
    """One call of simulate_network, as data (so that a caller can hand many to physics/chain_batch.py)."""

    net: Network
    receivers: list[int]
    swing: float
    rise: float
    r_source: np.ndarray
    loads: dict
    t_end: float | None = None

    @functools.cached_property
    def estimated_window(self) -> np.ndarray:
        """settle_window for the candidates (a batching engine asks for it more than once: worked out once)."""
        return settle_window(self.net, np.atleast_1d(np.asarray(self.r_source, dtype=float)), self.loads,
                             self.rise * RAMP_PER_RISE)

    @functools.cached_property
    def records(self) -> list[int]:
        """Each candidate's record size (record_ladder's) at the engine's time step, as simulate_network and
        chain_batch size them; worked out once (a batching engine asks for it to plan and to run). ValueError
        (or ZeroDivisionError at a zero rise time) when a candidate cannot be sized."""
        dt = self.rise * RAMP_PER_RISE / SAMPLES_PER_RAMP
        m = len(np.atleast_1d(np.asarray(self.r_source, dtype=float)))
        if isinstance(self.t_end, float) or self.t_end is not None and np.ndim(self.t_end) == 0:   # one for all
            return [record_ladder(record_size(float(self.t_end), dt))] * m
        return [record_ladder(record_size(te, dt)) for te in self.ends]

    @property
    def ends(self) -> np.ndarray:
        """Each candidate's window: the one given, else the estimated one."""
        if self.t_end is None:
            return self.estimated_window
        m = len(np.atleast_1d(np.asarray(self.r_source, dtype=float)))
        return np.broadcast_to(np.asarray(self.t_end, dtype=float), (m,))

    def run(self) -> dict[int, list[Waveform]]:
        return simulate_network(self.net, self.receivers, self.swing, self.rise, self.r_source, self.loads,
                                t_end=self.t_end)


def simulate_chain(sections: Sequence[Line | Series], swing: float, rise: float, r_source: float, load: Load,
                   t_end: float | None = None, samples_per_ramp: int = SAMPLES_PER_RAMP) -> Waveform:
    """One chain of sections (driver end first) into one load: the receiver's waveform with the driver's."""
    net, end = Network.chain(sections)
    wf = simulate_network(net, [end], swing, rise, [r_source], {end: LoadSet.of([load])}, t_end=t_end,
                          with_source=True, samples_per_ramp=samples_per_ramp)[end][0]
    return wf
