"""Pairs: the two legs of a differential pair routed alike."""

from __future__ import annotations

import numpy as np

from sicheck.checks.engine import check, make_key, pair_id, pair_label

GAP_SAME_PCT = 1.0      # gaps within 1 % are the same gap (unit round-off in exports, e.g. 4 mil vs 0.1 mm)


def _leg(seg, idx):
    """(layers in route order, {layer: (length-weighted gap, Zdiff)}, mean Zdiff, delay) of one leg's rows."""
    length = seg["length"].to_numpy(float)[idx]
    layers = seg["layer"].to_numpy(object)[idx]
    gap = seg["gap"].to_numpy(float)[idx]
    zd = seg["zdiff"].to_numpy(float)[idx]
    per = {}
    for lay in dict.fromkeys(layers):
        m = layers == lay
        w = length[m] / length[m].sum()
        per[lay] = (float(np.sum(w * gap[m])), float(np.sum(w * zd[m])))
    return (tuple(dict.fromkeys(layers)), per, float(np.sum(length * zd) / length.sum()),
            float(seg["delay"].to_numpy(float)[idx].sum()))


@check("pair-mismatch", "warning")
def pair_mismatch(ctx, chk):
    """The two legs of a pair on different layers or with different gaps.

    What it checks: pairs whose two legs both have rows of their own: the layers each leg visits (in
    route order), and on each shared layer the gap each leg gives (gaps within 1 % are the same). The
    finding gives both legs' values: layers, gaps, Zdiff (length-weighted) and delay.
    Why it matters: the pair's Zdiff and delay are those of both legs together; legs on different
    layers or with different gaps are not one coupled line, so the differential impedance is not the
    one reviewed, and the legs' delays differ (skew turns part of the signal into common mode).
    How to fix: route both legs together on the same layers with one gap, or correct the export.
    """
    seg = ctx.segments
    idx = seg.groupby("net", sort=False).indices
    pair_of = dict(zip(seg["net"].to_numpy(object).tolist(), seg["pair"].to_numpy(object).tolist()))
    done: set = set()
    for net, partner in pair_of.items():
        if not partner or partner not in idx or pair_of.get(partner) != net:
            continue
        ident = pair_id(net, partner)
        if ident in done:
            continue
        done.add(ident)
        a, b = _leg(seg, idx[net]), _leg(seg, idx[partner])
        label = pair_label(net, partner)
        row = int(seg["row"].to_numpy()[min(idx[net][0], idx[partner][0])])
        if a[0] != b[0]:
            yield chk.finding(
                label, " > ".join(a[0]),
                f"legs on different layers: {net} on {' > '.join(a[0])} (Zdiff {a[2]:.1f} ohm, {a[3] * 1e12:.0f} ps), "
                f"{partner} on {' > '.join(b[0])} (Zdiff {b[2]:.1f} ohm, {b[3] * 1e12:.0f} ps)",
                row=row, key=make_key(chk.id, ident, "layers"), value=abs(a[2] - b[2]), unit="ohm")
            continue
        for lay in a[0]:
            (ga, za), (gb, zb) = a[1][lay], b[1][lay]
            if abs(ga - gb) <= GAP_SAME_PCT / 100.0 * max(ga, gb):
                continue
            yield chk.finding(
                label, lay,
                f"legs with different gaps on {lay}: {net} {ga * 1e3:.3f} mm (Zdiff {za:.1f} ohm), {partner} "
                f"{gb * 1e3:.3f} mm (Zdiff {zb:.1f} ohm); delays {a[3] * 1e12:.0f} and {b[3] * 1e12:.0f} ps",
                row=row, key=make_key(chk.id, ident, lay, "gap"), value=abs(za - zb), unit="ohm")
