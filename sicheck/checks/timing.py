"""Timing: match groups that must arrive together, the two legs of a pair, and per-class delay budgets.

Delays are each net's own segments' delays on their own layers (review._net_table sums them), never
lengths: equal lengths on a microstrip and a stripline layer arrive at different times.
"""

from __future__ import annotations

import math

import numpy as np

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label, plain_rows
from sicheck.checks.loss import first_rows
from sicheck.skew import group_timing, pair_skew

MAX_PAIR_SKEW = Param("max_pair_skew", "time", 5e-12, "ps", "largest delay difference between the two legs of "
                      "a pair (common practice for links of a few Gb/s: a few ps, about 1 mm of FR-4 trace; from "
                      "memory)", section="timing", per_class=True, hi=100e-9, scale=1e12)
MAX_DELAY = Param("max_delay", "time", None, "ps", "largest one-way delay of a net of this class (the class's "
                  "timing budget; unset: not checked)", per_class=True, hi=1e-6, scale=1e12)


def _rows(ctx) -> dict:
    """Each net's first trace-list row; a leg listed only through its partner gets the partner's."""
    rows = first_rows(ctx.segments)
    for net, pair in zip(ctx.nets["net"].to_numpy(object).tolist(), ctx.nets["pair"].to_numpy(object).tolist()):
        if net not in rows and pair in rows:
            rows[net] = rows[pair]
    return rows


def _ps(seconds: float) -> str:
    return f"{seconds * 1e12:.1f} ps"


def _mm(metres: float) -> str:
    return "" if not math.isfinite(metres) else f"{metres * 1e3:.2f} mm"


@check("delay-skew", "error")
def delay_skew(ctx, chk):
    """Delay spread of a match group above its max_skew.

    What it checks: for each `[[match_group]]` of the rules (nets by `match` patterns, the trace list's
    `match_group` column and the `reference` net), each net's delay from its own segments on their own
    layers; the spread (slowest minus fastest) or, with a `reference`, the largest distance from the
    reference's delay, against the group's `max_skew`. A pair's legs count as two nets.
    Why it matters: a parallel bus is sampled by one clock or strobe; a bit that arrives late eats the
    receiver's setup or hold margin. Length matching alone misses layers of different speed.
    How to fix: lengthen the fast nets (serpentine) or shorten the slow ones until all lie within
    max_skew; route the group's nets on the same layers, since equal lengths on a microstrip and a
    stripline layer do not give equal delays.
    """
    rows = _rows(ctx)
    groups = ctx.rules.match_groups
    found = {gt.group.name: gt for gt in group_timing(ctx.segments, ctx.nets, groups)}
    for g in groups:
        gt = found.get(g.name)
        if gt is None or len(gt.nets) < 2:
            yield chk.finding(g.name, "", f"match group '{g.name}' ({g.origin}) has "
                              f"{'no net' if gt is None else 'only one net'} on this board: check its match "
                              "patterns, reference and the trace list's match_group column",
                              key=make_key(chk.id, g.name, "members"), severity="info")
            continue
        if g.reference and gt.reference is None:
            yield chk.finding(g.name, "", f"reference net '{g.reference}' of match group '{g.name}' is not on this "
                              "board; the group's spread is checked instead", key=make_key(chk.id, g.name, "reference"),
                              severity="info")
        if not gt.over:
            continue
        limit = g.max_skew
        spm = gt.seconds_per_m
        if gt.reference:
            far = sorted(((n, v) for n, v in gt.offsets.items() if n != gt.reference and abs(v) > limit),
                         key=lambda t: -abs(t[1]))
            measure = f"largest distance from the reference {gt.reference}: {_ps(gt.skew)}"
            outside = f"outside +/-{_ps(limit)} of the reference"
        else:
            far = sorted(((n, v) for n, v in gt.offsets.items() if abs(v) > limit / 2), key=lambda t: -abs(t[1]))
            measure = f"spread {_ps(gt.skew)} (fastest {gt.fastest}, slowest {gt.slowest})"
            outside = "furthest from the group's median delay"
        eq = f" = {_mm(gt.skew_length)} on {gt.main_layer}" if math.isfinite(gt.skew_length) else ""
        listed = ", ".join(f"{n} {v * 1e12:+.1f} ps" + (f" ({v / spm * 1e3:+.2f} mm)" if spm > 0 else "")
                           for n, v in far[:6]) + (f" and {len(far) - 6} more" if len(far) > 6 else "")
        msg = (f"match group '{g.name}' ({len(gt.nets)} nets, delays {_ps(gt.min_delay)} to {_ps(gt.max_delay)}): "
               f"{measure}{eq}, over its {_ps(limit)} limit")
        if listed:
            msg += f"; {outside}: {listed}"
        worst = far[0][0] if far else gt.slowest
        yield chk.finding(g.name, gt.main_layer, msg, row=rows.get(worst), key=make_key(chk.id, g.name),
                          value=gt.skew * 1e12, limit=limit * 1e12, unit="ps")


@check("pair-skew", "warning", params=(MAX_PAIR_SKEW,))
def pair_skew_check(ctx, chk):
    """Delay difference between the two legs of a differential pair above max_pair_skew.

    What it checks: each pair whose two legs both have their own rows in the trace list: the delay of
    each leg from its own segments, and their difference, against the class's `max_pair_skew`. A leg
    listed only through its partner's `pair` cell has no route of its own and is not checked.
    Why it matters: the receiver sees the difference of the legs; when one leg is late, part of the
    differential signal turns into common mode, the edge slows and the pair radiates and picks up noise.
    How to fix: add a small serpentine to the shorter leg close to where the mismatch arises (a bend or a
    pin escape), and route both legs through the same layers.
    """
    rows = _rows(ctx)
    nets = ctx.nets
    skew = pair_skew(nets)
    net_col, pair_col = nets["net"].to_numpy(object).tolist(), nets["pair"].to_numpy(object).tolist()
    delay = dict(zip(net_col, nets["delay"].to_numpy(float)))
    length = dict(zip(net_col, nets["length"].to_numpy(float)))
    cls_col, layers_col = nets["net_class"].to_numpy(object).tolist(), nets["layers"].to_numpy(object).tolist()
    limits = {c: ctx.param("max_pair_skew", c) for c in set(cls_col)}
    done: set = set()
    for i in np.nonzero(np.isfinite(skew))[0].tolist():       # only pairs have a skew
        net, partner, s = net_col[i], pair_col[i], skew[i]
        ident = pair_id(net, partner)
        if ident in done:
            continue
        done.add(ident)
        net_class = cls_col[i]
        limit = limits[net_class]
        if limit is None or s <= limit:
            continue
        slow, fast = (net, partner) if delay[net] >= delay[partner] else (partner, net)
        eq = s * length[slow] / delay[slow] if delay[slow] > 0 else float("nan")
        msg = (f"legs differ by {_ps(s)} ({slow} {_ps(delay[slow])}, {fast} {_ps(delay[fast])}"
               + (f"; about {_mm(eq)} of trace" if math.isfinite(eq) else "") + f"), over the {_ps(limit)} limit"
               f" of class {net_class or '-'}: lengthen {fast}")
        yield chk.finding(pair_label(net, partner), layers_col[i], msg, row=rows.get(slow),
                          key=make_key(chk.id, ident), value=s * 1e12, limit=limit * 1e12, unit="ps")


@check("delay-budget", "error", params=(MAX_DELAY,))
def delay_budget(ctx, chk):
    """One-way delay of a net above its class's max_delay.

    What it checks: each net's delay from its own segments on their own layers against the `max_delay`
    of its net class (a class without one is not checked); a pair once, by its slower leg.
    Why it matters: the flight time is part of the interface's timing budget; a net that takes longer
    than its share leaves the receiver too little setup margin.
    How to fix: shorten the route, or move it to a faster layer (a microstrip layer has a lower eps_eff
    than a stripline layer); if the budget allows it, raise the class's max_delay.
    """
    order = ctx.nets.sort_values("delay", ascending=False, kind="stable")
    limits = {c: ctx.param("max_delay", c) for c in set(order["net_class"].to_numpy(object).tolist())}
    lim_row = ctx.param_per_row("max_delay", order["net_class"].to_numpy(object))
    with np.errstate(invalid="ignore"):
        over = ~np.isnan(lim_row) & ~(order["delay"].to_numpy(float) <= lim_row)
    if not over.any():
        return
    rows = _rows(ctx)
    done: set = set()
    first = []                  # a pair by its slower leg: the first of its legs in delay order
    for i, (net, pair) in enumerate(zip(order["net"].to_numpy(object).tolist(),
                                        order["pair"].to_numpy(object).tolist())):
        ident = pair_id(net, pair) if pair else net
        if ident not in done:
            done.add(ident)
            if over[i]:
                first.append(i)
    for r in plain_rows(order.iloc[first]):
        ident = pair_id(r.net, r.pair) if r.pair else r.net
        limit = limits[r.net_class]
        late = r.delay - limit
        eq = late * r.length / r.delay if r.delay > 0 else float("nan")
        label = pair_label(r.net, r.pair) if r.pair else r.net
        msg = (f"delay {_ps(r.delay)} ({_mm(r.length)} on {r.layers}) is {_ps(late)} over the {_ps(limit)} "
               f"budget of class {r.net_class}" + (f": about {_mm(eq)} too long" if math.isfinite(eq) else ""))
        yield chk.finding(label, r.layers, msg, row=rows.get(r.net), key=make_key(chk.id, ident),
                          value=r.delay * 1e12, limit=limit * 1e12, unit="ps")
