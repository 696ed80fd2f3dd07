"""Many simulations at once: the waveform engine of line_network.py, batched across nets.

A board's flagged nets are mostly plain chains (lines in series from the driver to one receiver, the
load at the far end). For those, the whole chain is one two-port (the product of its sections' chain
matrices, independent of the candidates) and a candidate's receiver voltage is

    V_rx / V_source = g / ((A + B Y_L) + R_s (C + D Y_L))

with [[A, B], [C, D]] / g the chain's scaled matrix (see line_network.py), Y_L the load and R_s the
driver. Simulations that share a time step and a record length (same ramp, same record size: the
engine's sizes are few, line_network.record_ladder) are solved together: one array operation per
step for all their candidates, and one inverse FFT. The mathematics is line_network's, term for term
(the DC answer taken out, the damped inverse FFT of Wedepohl & Mohamed, exact delays), so the
waveforms agree with it to rounding (tests/test_chain_batch.py); what changes is that the Python work
per net and per stage is gone. Anything that is not a plain chain (a tree, a series part, a load
along the way, a distributed RG line at DC) is handed to simulate_network unchanged.
"""

from __future__ import annotations

import math
from collections import defaultdict
from typing import NamedTuple, Sequence

import numpy as np
from scipy import fft as sfft

from sicheck.physics.causal_line import ConstantRG, Line, LineLoss, front_delay, shape_key, smooth_per_delay_lines
from sicheck.physics.line_network import (RECORD_FACTOR, SAMPLES_PER_RAMP, SHAPE_NODES, WRAP_DAMPING,
                                          Simulation, _extend_unsettled)
from sicheck.physics.transient import RAMP_PER_RISE, LoadSet, Waveform, metrics_batch, preview_index, ramp_voltage


def plain_chain(sim: Simulation) -> list[Line] | None:
    """The sections of a simulation that is a plain chain (driver, lines, one loaded receiver), else None."""
    chain = _chain(sim.net)
    if chain is None:
        return None
    end = len(chain.lines)
    if list(sim.receivers) != [end] or len(sim.loads) != 1 or end not in sim.loads:
        return None
    return chain.lines


class _Chain(NamedTuple):
    """What the engine takes from a network that is a chain of lines (shared by a net's stages: net.memo)."""

    lines: list[Line]
    runs: list                 # the lines as uniform runs (_uniform_runs)
    r_dc: float                # the lines' DC resistance in series
    front: float               # when the edge's front can first reach the far end


def _chain(net) -> _Chain | None:
    """The network as a chain of lines driver end first (no RG line), else None; once per network."""
    if "chain_batch" in net.memo:
        return net.memo["chain_batch"]
    lines = []
    for k, (p, c, e) in enumerate(net.edges):
        if p != k or c != k + 1 or not isinstance(e, Line) or isinstance(e.loss, ConstantRG):
            lines = None
            break
        lines.append(e)
    chain = None if not lines else _Chain(lines, _uniform_runs(lines),
                                          sum(x.loss.r_dc for x in lines if isinstance(x.loss, LineLoss)),
                                          sum(front_delay(x) for x in lines))
    net.memo["chain_batch"] = chain
    return chain


def simulate_many(sims: Sequence[Simulation]) -> list:
    """Each simulation's answer (as Simulation.run returns it), or the ValueError it raised."""
    out: list = [None] * len(sims)
    # (ramp, record) -> [(sim, candidate, R_s, v_low, v_high, load key)]: what the solve takes of each candidate,
    # gathered once here, so that a batch's columns are one transposition (zip) rather than a lookup each
    groups: dict[tuple, list] = defaultdict(list)
    plan = {}
    for k, sim in enumerate(sims):
        chain = _chain(sim.net) if plain_chain(sim) is not None else None
        try:
            p = _prepare(sim, chain) if chain is not None else None
            if p is None or max(p["records"]) > BATCH_MAX_SAMPLES:
                out[k] = sim.run()
                continue
        except ValueError as e:
            out[k] = e
            continue
        plan[k] = p
        ramp = p["ramp"]
        for i, (n_rec, r, lo, hi, key) in enumerate(zip(p["records"], p["rs"], p["v_low"], p["v_high"],
                                                          p["load_keys"])):
            groups[(ramp, n_rec)].append((k, i, r, lo, hi, key))
    waves: dict[int, list] = {k: [None] * len(p["r_source"]) for k, p in plan.items()}
    for (ramp, n_rec), members in groups.items():
        _solve_group(sims, plan, ramp, n_rec, members, waves)
    for k, p in plan.items():
        sim = sims[k]
        end = p["end"]
        res = {end: waves[k]}
        if sim.t_end is None:
            try:
                _extend_unsettled(res, sim.net, [end], sim.swing, sim.rise, p["r_source"], sim.loads, p["ends"],
                                  p["dt"], False, SAMPLES_PER_RAMP)
            except ValueError as e:
                out[k] = e
                continue
        out[k] = res
    return out


# Longer records go one net at a time: their arithmetic outweighs the Python, and simulate_network reuses its
# line two-ports between the stages that share a window.
BATCH_MAX_SAMPLES = 4096
RESULT_SAMPLES = 1 << 24       # waveform samples one simulate_many call may hand back (128 MB)


def samples_needed(sim: Simulation) -> int:
    """The time samples a simulation's answer holds (all candidates), for callers that slice their work;
    0 when the simulation cannot run (simulate_many then reports why). The record sizes are the
    simulation's own (Simulation.records), which _prepare takes up again."""
    try:
        return sum(int(n / RECORD_FACTOR) for n in sim.records)
    except (ValueError, ZeroDivisionError):
        return 0


def _prepare(sim: Simulation, chain: _Chain) -> dict:
    """Checks, time step, record sizes and the DC levels of one simulation (as simulate_network does)."""
    if sim.rise <= 0 or sim.swing == 0:
        raise ValueError("the rise time must be positive and the swing non-zero")
    rs = np.atleast_1d(np.asarray(sim.r_source, dtype=float))
    rs_l = rs.tolist()
    if not all(r > 0 for r in rs_l):
        raise ValueError("the driver resistance must be above zero (an ideal source cannot be simulated)")
    m = len(rs)
    end = len(chain.lines)
    ls = sim.loads[end]
    if len(ls) not in (1, m):
        raise ValueError("every LoadSet needs one row or one row per candidate")
    if len(ls) != m:
        ls = ls.take(np.zeros(m, dtype=int))
    ramp = sim.rise * RAMP_PER_RISE
    dt = ramp / SAMPLES_PER_RAMP
    if isinstance(sim.t_end, float) or sim.t_end is not None and np.ndim(sim.t_end) == 0:   # one window for all
        ends = np.full(m, float(sim.t_end))
    else:
        ends = sim.ends
    records = sim.records
    # DC: the driver, the lines' DC resistance in series, the load's conductance to its voltage (on plain
    # floats: a handful of candidates, and numpy's per-call cost on arrays this small is most of the time)
    v_low, v_high, keys = [], [], []
    for r, cap, r_end, v_end, c_end in zip(rs_l, ls.cap.tolist(), ls.end_ohm.tolist(), ls.end_volts.tolist(),
                                           ls.end_cap.tolist()):
        g_src = 1.0 / (r + chain.r_dc)
        if not r_end > 0 and r_end == r_end:
            raise ValueError("a termination resistance must be above zero")
        g_load = 1.0 / r_end if r_end == r_end and c_end != c_end else 0.0      # a plain resistor (not an RC)
        v_t = v_end if g_load > 0 else 0.0
        v_low.append(g_load * v_t / (g_src + g_load))
        v_high.append((g_src * sim.swing + g_load * v_t) / (g_src + g_load))
        keys.append((cap, _no_nan(r_end), _no_nan(c_end)))
    return {"chain": chain, "end": end, "ramp": ramp, "dt": dt, "ends": ends, "records": records, "r_source": rs,
            "rs": rs_l, "load_keys": keys, "v_low": v_low, "v_high": v_high}


GROUP_BINS = 1 << 17     # complex bins per batch: 2 MB arrays stay in cache (7 % faster than 8 MB ones)
SHAPE_CACHE_BINS = 1 << 21   # K and M kept per cross-section for a record group's batches: at most 64 MB


def _batches(members, plan, k_bins):
    """Members in batches that hold at most GROUP_BINS complex bins (candidates and the lines they need)."""
    batch, size, seen = [], 0, set()
    for member in members:
        k = member[0]
        cost = k_bins * (1 + (0 if k in seen else len(plan[k]["chain"].lines)))
        if batch and size + cost > GROUP_BINS:
            yield batch
            batch, size, seen = [], 0, set()
            cost = k_bins * (1 + len(plan[k]["chain"].lines))
        batch.append(member)
        seen.add(k)
        size += cost
    if batch:
        yield batch


def _solve_group(sims, plan, ramp, n_rec, members, waves) -> None:
    dt = ramp / SAMPLES_PER_RAMP
    t_rec = n_rec * dt
    sigma = -math.log(WRAP_DAMPING) / t_rec
    k_bins = n_rec // 2 + 1
    s = sigma + 1j * (2.0 * math.pi / t_rec * np.arange(k_bins))
    ramp_s = -np.expm1(-s * ramp) / (ramp * s * s)
    n_keep = int(math.floor(n_rec / RECORD_FACTOR)) + 1
    t = np.arange(n_keep) * dt
    growth = np.exp(sigma * t) / dt
    idx = preview_index(n_keep)
    t_shown = t[idx]
    shapes: dict = {}                  # shape_key -> (K, M) on this grid, for all the group's batches
    for batch in _batches(members, plan, k_bins):
        ks, cand, rs, v_low, v_high, load_keys = zip(*batch)
        nets = list(dict.fromkeys(ks))
        where = {k: j for j, k in enumerate(nets)}
        # the candidates of a net that share a load (a stage's series values) share its solve
        distinct: dict = {}
        of_load = np.array([distinct.setdefault((k, *key), len(distinct)) for k, key in zip(ks, load_keys)],
                           dtype=int)
        owner = np.array([where[key[0]] for key in distinct])
        loads = LoadSet(np.array([key[1] for key in distinct]), np.array([_nan(key[2]) for key in distinct]),
                        np.zeros(len(distinct)), np.array([_nan(key[3]) for key in distinct]))
        p, q, at, g, rank = _loaded_chains([plan[k]["chain"].runs for k in nets], owner, _admittance(loads, s), s,
                                           shapes)
        net_of = rank[[where[k] for k in ks]]                 # each candidate's row in g
        u = at[of_load]                                        # and in p, q
        finals = v_high                                        # (as plain floats, for the waveforms)
        rs, v_low, v_high = np.array(rs), np.array(v_low), np.array(v_high)
        # per net (rows in g's order): the swing, and where the reference taken out starts: when the edge's
        # front can first arrive
        by_rank = np.empty(len(nets), dtype=int)
        by_rank[rank] = np.arange(len(nets))
        swing = np.array([sims[nets[j]].swing for j in by_rank])
        t0 = np.minimum(np.array([plan[nets[j]]["chain"].front for j in by_rank]), n_rec * dt / RECORD_FACTOR)
        h0 = (v_high - v_low) / swing[net_of]
        # V_rx / V_source = g / (p + R_s q); the spectra scaled by the ramp and the swing once per net
        scale = ramp_s * swing[:, None]
        g *= scale
        ref = _delays(sigma, 2.0 * math.pi / t_rec, t0, k_bins)
        ref *= scale
        den = q[u]
        den *= rs[:, None]
        den += p[u]
        spec = g[net_of]
        spec /= den
        ref_c = ref[net_of]
        ref_c *= h0[:, None]
        spec -= ref_c
        v = sfft.irfft(spec, n=n_rec, axis=-1)[:, :n_keep] * growth
        v += v_low[:, None]
        step = (swing[:, None] * ramp_voltage(t[None, :] - t0[:, None], 1.0, ramp))[net_of]
        step *= h0[:, None]
        v += step
        rows = metrics_batch(t, v, v_high, ramp)
        shown = v[:, idx]                  # what a chart keeps, for the whole batch at once
        for j, (k, i, f) in enumerate(zip(ks, cand, finals)):
            waves[k][i] = Waveform(t=t, v_rx=v[j], v_src=None, v_final=f, ramp=ramp, metrics=rows[j],
                                   preview=(t_shown, shown[j]))


def _delays(sigma: float, step: float, t0: np.ndarray, k_bins: int) -> np.ndarray:
    """e^(-s t0) on the grid s_k = sigma + j k step, one row per t0: a geometric series in k, so a running
    product instead of a complex exponential per bin (the rounding grows by about k ulp: 1e-12 at 10^4 bins)."""
    out = np.empty((len(t0), k_bins), dtype=complex)
    out[:, 0] = np.exp(-sigma * t0)
    out[:, 1:] = np.exp(-1j * step * t0)[:, None]
    return np.cumprod(out, axis=1, out=out)


def _no_nan(x) -> float:
    return -1.0 if x != x else float(x)        # a key that compares equal (NaN does not); values are >= 0


def _nan(x: float) -> float:
    return math.nan if x < 0 else x


def _loaded_chains(chains: list[list[_Run]], owner: np.ndarray, y: np.ndarray, s: np.ndarray, shapes: dict):
    """Each loaded chain as the two entries that matter of its scaled chain matrix applied to its load.

    chains: each net's sections as uniform runs (_uniform_runs), driver end first; owner[u]: the net of load u;
    y[u]: its admittance on s.
    With [[A, B], [C, D]] / g a chain's scaled matrix (line_network.py), returns p = A + B y, q = C + D y per
    load and g per net, so that V_rx / V_source = g / (p + R_s q). Rather than multiplying 2 x 2 matrices,
    the vector [1, y] is carried from the load to the driver through each section, [[1 + E^2, Zc (1 - E^2)],
    [(1 - E^2)/Zc, 1 + E^2]] (scaled by 2E, E = e^(-gl)): with a = P + Zc Q, b = E^2 (P - Zc Q) the next
    vector is (a + b, (a - b)/Zc), three products per section instead of eight.

    Sections of one cross-section end to end are one uniform line (_uniform_runs, by the caller): a trace list
    often splits a trace at its corners. Nets are taken longest first and their sections position by position from
    the far end, so that every step works on a leading slice. Returns (p, q, at, g, rank): p and q in that order (load
    u is row at[u]), g's row for net j is rank[j]. shapes: K and M per shape key on s, filled in as needed.
    """
    order = sorted(range(len(chains)), key=lambda j: -len(chains[j]))
    rank = np.empty(len(chains), dtype=int)
    rank[order] = np.arange(len(chains))
    n_max = len(chains[order[0]])
    count = [sum(1 for j in order if len(chains[j]) > pos) for pos in range(n_max)]   # nets with a section here
    lines = [chains[j][len(chains[j]) - 1 - pos] for pos in range(n_max) for j in order[:count[pos]]]
    # sections of one cross-section (same Z and loss per unit delay: shape_key) share K and M, worked out
    # once from the key itself, so that a section's answer does not depend on the nets batched with it
    index: dict = {}
    which = np.array([index.setdefault(x.key, len(index)) for x in lines])
    new = [key for key in index if key not in shapes]
    if new and (len(shapes) + len(new)) * len(s) > SHAPE_CACHE_BINS:     # a board of many cross-sections:
        shapes.clear()                                                   # keep only what this batch needs
        new = list(index)
    if new:
        k_new, m_new = smooth_per_delay_lines([_unit_line(key) for key in new], s, SHAPE_NODES)
        shapes.update((key, (k_new[j], m_new[j])) for j, key in enumerate(new))
    k = np.array([shapes[key][0] for key in index])
    m = np.array([shapes[key][1] for key in index])
    e1 = (-s[None, :] * k)[which]                 # - s K per section (K and M may be one array: no in-place)
    e1 *= np.array([x.delay for x in lines])[:, None]
    np.exp(e1, out=e1)
    e2 = e1 * e1
    z0 = np.array([x.z0 for x in lines])[:, None]
    zc = m[which]
    zc *= z0
    yc = (1.0 / m)[which]
    yc /= z0
    # g: the product of each net's 2E (rows in rank order)
    g = 2.0 * e1[:count[0]]
    off = count[0]
    for pos in range(1, n_max):
        g[:count[pos]] *= 2.0 * e1[off:off + count[pos]]
        off += count[pos]
    # the loads in their net's rank order (stable), so that the loads still on the way are a leading slice
    net_rank = rank[owner]
    by = np.argsort(net_rank, kind="stable")
    at = np.empty(len(owner), dtype=int)
    at[by] = np.arange(len(owner))
    ranks = net_rank[by]
    one_each = len(owner) == len(chains)           # one load per net: its sections are the block's rows as they are
    p = np.empty((len(owner), len(s)), dtype=complex)
    q = y[by]
    off = 0
    for pos in range(n_max):
        n_u = int(np.searchsorted(ranks, count[pos]))
        rows = slice(off, off + n_u) if one_each else off + ranks[:n_u]
        off += count[pos]
        pp, qq = p[:n_u], q[:n_u]
        # at the far end (every load is still on the way) P = 1: the scalar, the same operations as on ones
        one = 1.0 if pos == 0 else pp
        a = zc[rows] * qq
        b = one - a
        b *= e2[rows]
        a += one
        np.add(a, b, out=pp)
        np.subtract(a, b, out=qq)
        qq *= yc[rows]
    return p, q, at, g, rank


class _Run(NamedTuple):
    """Sections of one cross-section end to end: one uniform line of their summed delay (the same line exactly)."""
    key: tuple | None
    z0: float
    delay: float


# shape_key keeps its answers for the sections asked about again and again; here each section is asked about
# once (chain_batch keeps a network's runs), so its cache would only hash each section and store the answer
_shape_key_once = getattr(shape_key, "__wrapped__", shape_key)


def _uniform_runs(lines: list[Line]) -> list[_Run]:
    runs: list[_Run] = []
    for x in lines:
        key = _shape_key_once(x)
        if runs and runs[-1].key == key and runs[-1].z0 == x.z0:
            runs[-1] = _Run(key, x.z0, runs[-1].delay + x.delay)
        else:
            runs.append(_Run(key, x.z0, x.delay))
    return runs


def _unit_line(key) -> Line:
    """A section of one second's delay with the shape key's Z and loss per unit delay (same K and M)."""
    if key is None:
        return Line(50.0, 1.0)
    kind, z0, r_ac, r_dc, tan_delta, f_ref = key
    if kind != "ds":
        raise ValueError(f"no batched shape for a {kind} line")
    return Line(z0, 1.0, LineLoss(f_ref=f_ref, r_ac=r_ac, tan_delta=tan_delta, r_dc=r_dc))


def _admittance(loads: LoadSet, s: np.ndarray) -> np.ndarray:
    """LoadSet.admittance, each row's termination worked out only where it has one (most rows are a pin)."""
    y = s[None, :] * loads.cap[:, None]
    r = ~np.isnan(loads.end_ohm)
    rc = r & ~np.isnan(loads.end_cap)
    plain = np.nonzero(r & ~rc)[0]
    if len(plain):
        y[plain] += 1.0 / loads.end_ohm[plain, None]
    rc = np.nonzero(rc)[0]
    if len(rc):
        sc = s[None, :] * loads.end_cap[rc, None]
        y[rc] += sc / (1.0 + sc * loads.end_ohm[rc, None])
    return y
