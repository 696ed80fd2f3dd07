"""Stubs: branches off a net's main path (nets whose trace-list rows name their nodes)."""

from __future__ import annotations

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label

MAX_STUB = Param("max_stub_td_over_tr", "number", 0.1, "x Tr", "longest stub accepted, as its one-way delay over "
                 "the rise time (common practice, from memory: a stub under a tenth of the edge acts as a lumped "
                 "load)", section="electrical", per_class=True, hi=100)


@check("stub", "warning", params=(MAX_STUB,))
def stub(ctx, chk):
    """A stub off the main path whose delay is a meaningful fraction of the rise time.

    What it checks: for each net whose rows name their nodes (`from`/`to`), every branch that leaves
    the main path (driver to the farthest receiver), measured along its longest route, against
    `max_stub_td_over_tr` x the net's fastest rise time. A branch to another receiver is a stub too.
    Why it matters: the edge splits at the branch node, travels to the stub's end and back, and
    arrives at the receivers as a step or ring delayed by the stub's round trip; a short stub only
    adds its capacitance.
    How to fix: shorten the stub (route the bus through the pins, daisy chain, fly-by), move the branch
    point next to the receiver, or slow the edge.
    """
    if not ctx.topology:
        return
    seg = ctx.segments
    nets = ctx.nets.set_index("net")
    rows_of = {n: ix for n, ix in seg.groupby("net", sort=False).indices.items()}
    row_col, layer_col = seg["row"].to_numpy(), seg["layer"].to_numpy()
    done: set = set()
    for net, ix in rows_of.items():
        topo = ctx.topology.get(net)
        if topo is None or not topo.stubs or net not in nets.index:
            continue
        r = nets.loc[net]
        ident = pair_id(net, r["pair"]) if r["pair"] else net
        if ident in done:
            continue
        done.add(ident)
        label = pair_label(net, r["pair"]) if r["pair"] else net
        limit = float(ctx.param("max_stub_td_over_tr", r["net_class"]))
        tr = float(r["rise_time"])
        for s in topo.stubs:
            ratio = s.delay / tr
            if ratio <= limit:
                continue
            first = min(s.segments, key=lambda k: row_col[ix[k]])
            layers = " > ".join(dict.fromkeys(layer_col[ix[k]] for k in sorted(s.segments)))
            yield chk.finding(
                label, layers,
                f"stub of {s.length * 1e3:.1f} mm at node '{s.node}' (to '{s.end}'): its delay "
                f"{s.delay * 1e12:.0f} ps is {ratio:.2f} x the {tr * 1e12:.0f} ps rise time (limit {limit:g} x Tr)",
                row=int(row_col[ix[first]]), key=make_key(chk.id, ident, s.node, s.end), value=float(ratio),
                limit=limit, unit="x Tr")
