"""Return-path checks: where a layer change moves the return current between planes of different nets."""

from __future__ import annotations

import re

from sicheck.checks.engine import check, make_key, plain_columns
from sicheck.checks.vias import grouped_positions, transition_label, vias_of

# A plane net counts as ground when its name says so (common naming practice); every other plane net is a
# power net.
GROUND_NAME = re.compile(r"GND|VSS|^0V$|EARTH", re.IGNORECASE)


def is_ground(net: str) -> bool:
    return bool(GROUND_NAME.search(net))


def references(stackup, layer: str) -> tuple[str, ...] | None:
    """The reference planes of a signal layer (nearest plane above and below, as the stackup defines them)."""
    return stackup.geometry(layer).references if stackup.layer(layer) is not None else None


def _plane_nets(stackup) -> dict[str, str]:
    return {l.name: (l.net or l.name) for l in stackup.layers if l.type == "plane"}


def _planes(names, nets) -> str:
    return " and ".join(f"{p} ({nets[p]})" if nets[p] != p else p for p in names)


@check("return-path", "warning")
def return_path(ctx, chk):
    """A layer change whose reference planes before and after share no net.

    What it checks: at every via where a net changes signal layer (escape vias included), the reference
    planes of the layer before and after (the nearest planes above and below, as the stackup defines
    them; a plane's net is its `net`, else its name). No shared plane and no shared net: a warning naming
    both sides' planes. A shared net on different planes: an info. Also one info per routed signal layer
    whose only references are power nets (a plane net counts as ground when its name contains GND or VSS,
    or is 0V or EARTH).
    Why it matters: the return current follows the signal on its reference plane; where the signal
    dives to a layer referenced to another net, the return must jump between planes through whatever
    capacitance is nearby, making a loop that radiates, picks up noise and adds crosstalk between all nets
    sharing that transition (IPC-2141A; Johnson & Graham 1993).
    How to fix: a shared net on two planes: a stitching via of that net beside the signal via. Different
    nets: a stitching capacitor between the two planes' nets at the transition, or route on layers that
    reference the same net. A layer referenced only to power: decouple that plane well along the routes,
    or move fast nets to a layer next to ground.
    """
    st = ctx.stackup
    if st is None:
        return
    nets = _plane_nets(st)
    vias = vias_of(ctx)
    if vias is not None and not vias.empty:
        # only transitions between layers that share no plane are grouped (decided once per pair of layers)
        from_layer, to_layer = vias["from_layer"].to_numpy(object), vias["to_layer"].to_numpy(object)
        refs = {name: references(st, name) for name in set(from_layer.tolist()) | set(to_layer.tolist())}
        moved: dict[tuple[str, str], bool] = {}
        for a_name, b_name in set(zip(from_layer.tolist(), to_layer.tolist())):
            a, b = refs[a_name], refs[b_name]
            moved[(a_name, b_name)] = not (a is None or b is None or set(a) & set(b))
        keep = [how != "export" and moved[(x, y)]
                for how, x, y in zip(vias["how"].to_numpy(object).tolist(), from_layer.tolist(), to_layer.tolist())]
        kept = vias[keep]
        # plain column lists, read at each group's first via (a large board has tens of thousands of groups)
        col = plain_columns(kept, ("from_layer", "to_layer", "how", "row", "count"))
        sides: dict[tuple[str, str], tuple] = {}        # per pair of layers: the planes' text, once
        for ident, label, at in grouped_positions(kept):
            first = at[0]
            at_layers = (col["from_layer"][first], col["to_layer"][first])
            if at_layers not in sides:
                a, b = refs[at_layers[0]], refs[at_layers[1]]
                sides[at_layers] = (a, b, sorted({nets[p] for p in a} & {nets[p] for p in b}), _planes(a, nets),
                                    _planes(b, nets))
            a, b, shared, before, after = sides[at_layers]
            where = transition_label(at_layers[0], at_layers[1], col["how"][first])
            n = sum(col["count"][i] for i in at)
            vias_txt = f"{n} via{'s' if n > 1 else ''}"
            if shared:
                net = shared[0]
                msg = (f"{where} ({vias_txt}): the return current moves from {before} to {after}; both carry "
                       f"{net}, so place a stitching via to {net} beside each signal via")
                sev = "info"
            else:
                msg = (f"{where} ({vias_txt}): the reference changes from {before} to {after}, which share no "
                       f"net; place a stitching capacitor between {'/'.join(sorted({nets[p] for p in a}))} and "
                       f"{'/'.join(sorted({nets[p] for p in b}))} at the transition, or route on layers that "
                       "reference the same net")
                sev = None
            yield chk.finding(label, where, msg, row=int(col["row"][first]), key=make_key(chk.id, ident, where),
                              severity=sev)
    seg = ctx.segments
    for layer in dict.fromkeys(seg["layer"].to_numpy(object).tolist()):
        refs = references(st, layer)
        if not refs or any(is_ground(nets[p]) for p in refs):
            continue
        on = list(dict.fromkeys(seg.loc[seg["layer"] == layer, "net"].to_numpy(object).tolist()))
        shown = ", ".join(on[:4]) + (f" and {len(on) - 4} more" if len(on) > 4 else "")
        yield chk.finding("", layer, f"layer {layer} is referenced only to power ({_planes(refs, nets)}); "
                          f"{len(on)} net{'s' if len(on) > 1 else ''} route on it ({shown}): their return current "
                          "flows on the power plane and reaches ground through the decoupling capacitors, so "
                          "decouple that plane along the routes or move fast nets next to ground",
                          row=int(seg.loc[seg["layer"] == layer, "row"].iloc[0]), key=make_key(chk.id, layer),
                          severity="info")
