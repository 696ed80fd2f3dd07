"""Via checks: the unused barrel of a via (its stub) resonating inside the signal's band."""

from __future__ import annotations

import numpy as np
import pandas as pd

from sicheck.checks.engine import PAIR_SEP, Param, check, make_key, plain_rows

MIN_RESONANCE_RATIO = Param(
    "min_resonance_ratio", "number", 3.0, "x f", "a via stub's quarter-wave resonance must lie at least this many "
    "times above the net's frequency (class `freq`, else the knee 0.5/Tr) (common practice, from memory: keep "
    "the stub's notch about three times above the highest frequency that matters)", section="vias", lo=1.0,
    lo_open=False, hi=100)


def vias_of(ctx):
    """The review's via table, or one derived from the context's segments and stackup (None without a stackup)."""
    if ctx.vias is not None:
        return ctx.vias
    if ctx.stackup is None:
        return None
    from sicheck.via_table import via_table
    ctx.vias = via_table(ctx.segments, ctx.stackup)
    return ctx.vias


def transition_label(a: str, b: str, how: str) -> str:
    if how == "export":
        return f"{b} (via counted by the export)"
    return f"{a} → {b}" + (" (escape via)" if how == "escape" else "")


def grouped(vias):
    """Vias grouped per net (a pair once) and per pair of layers (either direction), in trace-list order.

    Yields (ident, label, first via row, all via rows of the group)."""
    rows = list(plain_rows(vias)) if not vias.empty else []
    for ident, label, at in grouped_positions(vias):
        group = [rows[i] for i in at]
        yield ident, label, group[0], group


def grouped_positions(vias):
    """grouped() with each group's vias as their positions in ``vias`` (the first via first), not as rows.

    Yields (ident, label, positions)."""
    if vias.empty:
        return
    # one key per via, grouped by pandas: a large board has a via per layer change
    net, pair = vias["net"].to_numpy(object), vias["pair"].to_numpy(object)
    paired = pair != ""
    label = np.where(paired, net + PAIR_SEP + pair, net)
    ident = np.where(paired & (pair < net), pair + PAIR_SEP + net, label)        # pair_id: names sorted
    a, b = (vias[c].str.lower().to_numpy(object) for c in ("from_layer", "to_layer"))
    lo, hi = np.where(a <= b, a, b), np.where(a <= b, b, a)
    key = np.zeros(len(vias), np.int64)        # the four parts as one integer (each part's code, mixed radix)
    for part in (ident, (vias["how"] == "export").to_numpy(), lo, hi):
        c, u = pd.factorize(part)
        key = key * (len(u) + 1) + c
    codes, _ = pd.factorize(key)
    order = np.argsort(codes, kind="stable")             # groups in order of their first via
    starts = np.flatnonzero(np.r_[True, codes[order][1:] != codes[order][:-1]])
    size = np.diff(np.r_[starts, len(order)])
    other_leg = net[order] != np.repeat(net[order][starts], size)
    both = np.bincount(np.repeat(np.arange(len(starts)), size), weights=other_leg, minlength=len(starts)) > 0
    names = net.tolist()
    order_list, ends = order.tolist(), np.r_[starts[1:], len(order)].tolist()
    for k, (s, e) in enumerate(zip(starts.tolist(), ends)):
        at = order_list[s:e]
        if both[k]:      # a pair listed on both legs has each via twice: count one leg's
            leg = min(names[i] for i in at)
            at = [i for i in at if names[i] == leg]
        i = order_list[s]
        yield ident[i], label[i], at


def _advice(kind: str, far: str) -> str:
    nearer = f"route on a layer nearer {far} so less barrel is left"
    if kind == "through":
        return f"Back-drill the via, use a blind via, or {nearer}"
    if kind == "backdrilled":
        return f"Drill deeper (a shorter residual stub in the stackup's [vias]), or {nearer}"
    return f"Use a via that starts on a layer nearer the connected layers (buried or from the other side), or {nearer}"


@check("via-stub", "warning", params=(MIN_RESONANCE_RATIO,))
def via_stub(ctx, chk):
    """A via's stub resonates too close to the net's frequency.

    What it checks: every via of a net (each layer change between consecutive rows, an escape via where the
    net starts or ends on an inner layer, and vias the export counts in a `vias` column). The stub is the
    barrel beyond the outermost connected layer, set by the stackup's `[vias]` construction (through,
    blind, or backdrilled with its residual stub); its quarter-wave resonance f = c / (4 L sqrt(er))
    (er: the thickness-weighted mean of the dielectrics it passes) must lie at least `min_resonance_ratio`
    times above the net's frequency (class `freq`, else the knee 0.5/Tr, Johnson & Graham 1993).
    Why it matters: an open stub is a quarter-wave resonator; near its resonance it shorts the signal
    to nothing (a deep notch in the channel's response) and well below it still adds capacitance and
    reflections.
    How to fix: back-drill the via (stackup `[vias] kind = "backdrilled"`), use a blind via, or route the
    net on a layer nearer the far side the stub reaches, so less barrel is left.
    """
    vias = vias_of(ctx)
    if vias is None or vias.empty:
        return
    ratio = float(ctx.param("min_resonance_ratio"))
    kind = ctx.stackup.vias.kind if ctx.stackup is not None else "through"
    cls_freq = {name: c.freq for name, c in ctx.classes.items() if c.freq}
    net_class = dict(zip(ctx.nets["net"].to_numpy(object).tolist(),          # mirrored partners included
                         ctx.nets["net_class"].to_numpy(object).tolist()))
    res, freq = vias["stub_resonance"].to_numpy(float), vias["freq"].to_numpy(float)
    low = np.isfinite(res) & (res < ratio * freq)        # only the vias that resonate too low are grouped
    for ident, label, first, rows in grouped(vias[low]):
        bad = rows
        if not bad:
            continue
        worst = min(bad, key=lambda r: r.stub_resonance / r.freq)
        where = transition_label(worst.from_layer, worst.to_layer, worst.how)
        cls = net_class.get(worst.net, "")
        fsrc = f"class {cls} freq" if cls in cls_freq else "knee 0.5/Tr"
        n = sum(r.count for r in bad)
        what = {"through": "through via", "blind": "blind via", "backdrilled": "back-drilled via"}[kind]
        yield chk.finding(
            label, where,
            f"{where}: {n} {what}{'s' if n > 1 else ''} leave{'s' if n == 1 else ''} a "
            f"{worst.stub_length * 1e3:.2f} mm stub to {worst.stub_to} (er {worst.stub_er:.2f}) resonating at "
            f"{worst.stub_resonance * 1e-9:.1f} GHz, below {ratio:g} x the net's {worst.freq * 1e-9:.3g} GHz "
            f"({fsrc}) = {ratio * worst.freq * 1e-9:.3g} GHz. {_advice(kind, worst.stub_to)}",
            row=int(worst.row), key=make_key(chk.id, ident, where), value=float(worst.stub_resonance * 1e-9),
            limit=float(ratio * worst.freq * 1e-9), unit="GHz")
