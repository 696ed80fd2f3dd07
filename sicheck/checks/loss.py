"""Loss checks: insertion loss against a budget."""

from __future__ import annotations

import numpy as np

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label, plain_rows

MAX_LOSS = Param("max_loss_db", "number", None, "dB", "insertion-loss budget of a net at its class's `freq` "
                 "(else the knee frequency)", per_class=True, lo=0.0, lo_open=False, hi=1e4)


def first_rows(seg) -> dict:
    """Each net's first trace-list row (where its route starts in the export)."""
    first = seg.groupby("net", sort=False)["row"].first()
    return dict(zip(first.index.to_numpy(object).tolist(), first.to_numpy(int).tolist()))


@check("loss-budget", "error", params=(MAX_LOSS,))
def loss_budget(ctx, chk):
    """Insertion loss of a net at its frequency above its class's max_loss_db.

    What it checks: the sum of conductor and dielectric loss over the net's segments at the class's
    `freq`, once per pair.
    Why it matters: the receiver needs enough of the signal's amplitude left at that frequency to open
    its eye; the budget is where the channel's loss was allotted.
    How to fix: shorten the route, widen the trace (less conductor loss), move it to a layer with a
    lower-loss dielectric, or re-allot the budget.
    """
    rows = first_rows(ctx.segments)
    nets = ctx.nets
    limit = {c: ctx.param("max_loss_db", c) for c in set(nets["net_class"].to_numpy(object).tolist())}
    lim_row = ctx.param_per_row("max_loss_db", nets["net_class"].to_numpy(object))
    with np.errstate(invalid="ignore"):        # only nets over a budget reach the loop (NaN loss is over)
        over = ~np.isnan(lim_row) & ~(nets["loss_db"].to_numpy(float) <= lim_row)
    seen: set = set()
    for r in plain_rows(nets[over]):
        lim = limit[r.net_class]
        ident = pair_id(r.net, r.pair) if r.pair else r.net
        if ident in seen:
            continue
        seen.add(ident)
        yield chk.finding(
            pair_label(r.net, r.pair) if r.pair else r.net, r.layers,
            f"insertion loss {r.loss_db:.2f} dB at {r.freq * 1e-9:.3g} GHz over {r.length * 1e3:.0f} mm exceeds the "
            f"{r.net_class} budget of {lim:g} dB",
            row=rows.get(r.net, rows.get(r.pair)), key=make_key(chk.id, ident), value=float(r.loss_db),
            limit=float(lim), unit="dB")
