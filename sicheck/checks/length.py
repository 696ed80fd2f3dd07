"""Electrical length: which nets are transmission lines and need termination."""

from __future__ import annotations

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label, plain_rows
from sicheck.checks.loss import first_rows

LUMPED_MAX = Param("lumped_max_td_over_tr", "number", 1.0 / 6.0, "x Tr", "lumped (no termination) when the "
                   "one-way delay TD is at or below this fraction of the rise time (common practice, after Johnson "
                   "& Graham 1993)", section="electrical", hi=100)
REQUIRED_MIN = Param("required_min_td_over_tr", "number", 0.5, "x Tr", "termination required when TD is at or "
                     "above this fraction of the rise time (round trip at least the rise time)",
                     section="electrical", hi=100)


def _fmt_ps(seconds: float) -> str:
    return f"{seconds * 1e12:.0f} ps"


def lines_longest_first(nets):
    """Nets that need termination, longest delay first, a pair once (by its longer leg)."""
    from sicheck.physics.electrical import NOT_NEEDED
    done: set = set()
    # positions in the order nets.sort_values("delay", ascending=False) gives, without sorting every column
    order = nets["delay"].reset_index(drop=True).sort_values(ascending=False).index.to_numpy()
    order = order[(nets["termination"].to_numpy(object) != NOT_NEEDED)[order]]
    for r in plain_rows(nets.iloc[order]):
        if r.pair:
            ident = pair_id(r.net, r.pair)
            if ident in done:
                continue
            done.add(ident)
        yield r


def simulated(r) -> bool:
    part = getattr(r, "termination_part", "")
    return isinstance(part, str) and bool(part)


@check("electrical-length", "warning", params=(LUMPED_MAX, REQUIRED_MIN), waveforms=True)
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
    from sicheck.physics.electrical import REQUIRED
    rows = first_rows(ctx.segments)
    limits = {t: float(ctx.param("required_min_td_over_tr" if t == REQUIRED else "lumped_max_td_over_tr"))
              for t in set(ctx.nets["termination"].to_numpy(object).tolist())}
    for r in lines_longest_first(ctx.nets):
        label = pair_label(r.net, r.pair) if r.pair else r.net
        msg = (f"one-way delay {_fmt_ps(r.delay)} is {r.td_over_tr:.2f} x the {_fmt_ps(r.rise_time)} rise time "
               f"(critical length {r.critical_length * 1e3:.1f} mm on its layers, net is {r.length * 1e3:.1f} mm): "
               f"transmission line, termination {r.termination}")
        note = getattr(r, "topology_note", "")
        if isinstance(note, str) and note:      # how the path was found (from/to nodes, or rows in series)
            msg += f"; route: {note}"
        if simulated(r):
            msg += (f". Simulated: {r.termination_part} (overshoot {r.before_overshoot_pct:.0f} % -> "
                    f"{r.after_overshoot_pct:.0f} %, ringback {r.before_ringback_pct:.0f} % -> "
                    f"{r.after_ringback_pct:.0f} %, settled {r.before_settle_ns:.2f} -> {r.after_settle_ns:.2f} ns)")
            if r.waveform_assumptions:
                msg += f"; {r.waveform_assumptions}"
        elif r.advice:
            msg += f". Proposal: {r.advice}"
        ident = pair_id(r.net, r.pair) if r.pair else r.net
        yield chk.finding(label, r.layers, msg, row=rows.get(r.net, rows.get(r.pair)),
                          key=make_key(chk.id, ident), value=float(r.td_over_tr),
                          limit=limits[r.termination],
                          unit="x Tr", severity=None if r.termination == REQUIRED else "info")
