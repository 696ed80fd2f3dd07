"""Electrical length: which nets are transmission lines and need termination."""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label, plain_columns, plain_rows, prepared
from sicheck.checks.loss import first_rows

LUMPED_MAX = Param("lumped_max_td_over_tr", "number", 1.0 / 6.0, "x Tr", "lumped (no termination) when the "
                   "one-way delay TD is at or below this fraction of the rise time (common practice, after Johnson "
                   "& Graham 1993)", section="electrical", hi=100)
REQUIRED_MIN = Param("required_min_td_over_tr", "number", 0.5, "x Tr", "termination required when TD is at or "
                     "above this fraction of the rise time (round trip at least the rise time)",
                     section="electrical", hi=100)


def _fmt_ps(seconds: float) -> str:
    return f"{seconds * 1e12:.0f} ps"


def line_positions(nets) -> np.ndarray:
    """Positions (as for .iloc) of the nets that need termination, longest delay first, a pair once (by its
    longer leg): the order nets.sort_values("delay", ascending=False) gives, without sorting every column."""
    from sicheck.physics.electrical import NOT_NEEDED
    order = nets["delay"].reset_index(drop=True).sort_values(ascending=False).index.to_numpy()
    order = order[(nets["termination"].to_numpy(object) != NOT_NEEDED)[order]]
    net, pair = nets["net"].to_numpy(object)[order], nets["pair"].to_numpy(object)[order]
    keep = np.ones(len(order), dtype=bool)
    done: set = set()
    for k in np.flatnonzero(pair != "").tolist():        # only a pair can repeat, by its other leg
        ident = pair_id(net[k], pair[k])
        if ident in done:
            keep[k] = False
        else:
            done.add(ident)
    return order[keep]


def lines_longest_first(nets):
    """Nets that need termination, longest delay first, a pair once (by its longer leg)."""
    return plain_rows(nets.iloc[line_positions(nets)])


class _Lines(NamedTuple):
    """What the electrical-length findings say before the waveform stage's part (one entry per line)."""
    positions: np.ndarray
    labels: list
    layers: list
    keys: list
    rows: list
    values: list
    limits: list
    severities: list
    unsimulated: list       # the message of a net the waveform stage did not simulate
    simulated: list         # the start of the message of one it did


def _lines_before_waveforms(ctx, chk) -> _Lines:
    from sicheck.physics.electrical import REQUIRED
    nets = ctx.nets
    pos = line_positions(nets)
    rows = first_rows(ctx.segments)
    limits = {t: float(ctx.param("required_min_td_over_tr" if t == REQUIRED else "lumped_max_td_over_tr"))
              for t in set(nets["termination"].to_numpy(object).tolist())}
    c = plain_columns(nets, ("net", "pair", "layers", "delay", "td_over_tr", "rise_time", "critical_length", "length",
                             "termination", "advice"), pos)
    note = (plain_columns(nets, ("topology_note",), pos)["topology_note"] if "topology_note" in nets.columns
            else [""] * len(pos))
    out = _Lines(pos, [], c["layers"], [], [], [], [], [], [], [])
    for net, pair, delay, ratio, rise, crit, length, term, advice, nt in zip(
            c["net"], c["pair"], c["delay"], c["td_over_tr"], c["rise_time"], c["critical_length"], c["length"],
            c["termination"], c["advice"], note):
        out.labels.append(pair_label(net, pair) if pair else net)
        out.keys.append(make_key(chk.id, pair_id(net, pair) if pair else net))
        out.rows.append(rows.get(net, rows.get(pair)))
        out.values.append(float(ratio))
        out.limits.append(limits[term])
        out.severities.append(None if term == REQUIRED else "info")
        msg = (f"one-way delay {_fmt_ps(delay)} is {ratio:.2f} x the {_fmt_ps(rise)} rise time "
               f"(critical length {crit * 1e3:.1f} mm on its layers, net is {length * 1e3:.1f} mm): "
               f"transmission line, termination {term}")
        if isinstance(nt, str) and nt:      # how the path was found (from/to nodes, or rows in series)
            msg += f"; route: {nt}"
        out.simulated.append(msg)
        out.unsimulated.append(f"{msg}. Proposal: {advice}" if advice else msg)
    return out


@check("electrical-length", "warning", params=(LUMPED_MAX, REQUIRED_MIN), waveforms=True,
       prepare=_lines_before_waveforms)
def electrical_length(ctx, chk):
    """One-way delay against rise time: a net that must be treated and terminated as a transmission line.

    What it checks: each net's delay TD over its fastest rise time Tr; at or above
    `required_min_td_over_tr` termination is required (the finding has the rule's severity), between
    the two limits it is recommended (info). The proposed part and value come with it, simulated
    when the waveform stage ran.
    Why it matters: when the round trip is comparable to the edge, reflections from an unterminated
    end arrive while the edge is still rising and show up as overshoot, ringing and false edges.
    How to fix: fit the proposed termination, or shorten the route below the critical length.
    """
    ln = prepared(ctx, chk)       # all but the waveform stage's part, worked out while that stage ran
    nets, pos = ctx.nets, ln.positions
    parts = (plain_columns(nets, ("termination_part",), pos)["termination_part"] if "termination_part" in nets.columns
             else [""] * len(pos))
    texts = ln.unsimulated
    done = np.flatnonzero(np.array([isinstance(p, str) and bool(p) for p in parts], dtype=bool))   # a part: simulated
    if len(done):
        figures = plain_columns(nets, ("before_overshoot_pct", "after_overshoot_pct", "before_ringback_pct",
                                       "after_ringback_pct", "before_settle_ns", "after_settle_ns",
                                       "waveform_assumptions"), pos[done])
        texts = list(texts)
        for k, *fig in zip(done.tolist(), *figures.values()):
            texts[k] = ln.simulated[k] + _simulated_text(parts[k], *fig)
    for label, layers, msg, row, key, value, limit, severity in zip(
            ln.labels, ln.layers, texts, ln.rows, ln.keys, ln.values, ln.limits, ln.severities):
        yield chk.finding(label, layers, msg, row=row, key=key, value=value, limit=limit, unit="x Tr",
                          severity=severity)


def _simulated_text(part, o_before, o_after, r_before, r_after, s_before, s_after, assumptions) -> str:
    text = (f". Simulated: {part} (overshoot {o_before:.0f} % -> {o_after:.0f} %, ringback {r_before:.0f} % -> "
            f"{r_after:.0f} %, settled {s_before:.2f} -> {s_after:.2f} ns)")
    return f"{text}; {assumptions}" if assumptions else text
