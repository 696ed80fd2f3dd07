"""Impedance checks: targets per segment, steps along a net, classes without a target."""

from __future__ import annotations

import numpy as np

from sicheck.checks.engine import PAIR_SEP, Param, check, make_key, pair_id, pair_label

TOLERANCE = Param("tolerance_pct", "number", 10.0, "%", "allowed deviation from the class's target, +/- "
                  "(common practice fabrication tolerance)", section="impedance", per_class=True, hi=100)
Z0 = Param("z0", "number", None, "ohm", "single-ended target", per_class=True, hi=1e4)
ZDIFF = Param("zdiff", "number", None, "ohm", "differential target", per_class=True, hi=1e4)
IGNORE_SHORT = Param("ignore_shorter_than_tr", "number", 0.1, "x Tr",
                     "segments whose delay is below this fraction of the net's rise time are summarised in one "
                     "info per net instead of one finding each (common practice: Tr/10; 0 reports all)",
                     section="impedance", lo=0.0, lo_open=False, hi=10)
Z_STEP = Param("z_step_pct", "number", 10.0, "%", "largest change of Z0 (Zdiff for pairs) along a "
               "transmission-line net before a finding (common practice)", section="impedance")


def _short_mask(seg, frac: float) -> np.ndarray:
    """Segments whose own delay is below frac x the net's fastest rise time (they act as lumped bits)."""
    if frac <= 0:
        return np.zeros(len(seg), dtype=bool)
    net_tr = seg.groupby("net", sort=False)["rise_time"].transform("min").to_numpy(float)
    return seg["delay"].to_numpy(float) < frac * net_tr


def _target_check(ctx, chk, diff: bool):
    seg = ctx.segments
    is_pair = (seg["pair"] != "").to_numpy()
    rows_here = is_pair if diff else ~is_pair
    target_name, q = ("zdiff", "Zdiff") if diff else ("z0", "Z0")
    cls_names = seg["net_class"].to_numpy()
    target = ctx.param_per_row(target_name, cls_names)
    tol = ctx.param_per_row("tolerance_pct", cls_names)
    z = seg[target_name].to_numpy(float)
    with np.errstate(invalid="ignore"):
        err = (z - target) / target * 100.0
    miss = rows_here & (np.abs(err) > tol)
    short = _short_mask(seg, ctx.param("ignore_shorter_than_tr"))
    seen: set = set()
    summary: dict[str, list[int]] = {}
    for i in np.nonzero(miss)[0]:
        net, layer = seg["net"].iat[i], seg["layer"].iat[i]
        w, g = seg["width"].iat[i], seg["gap"].iat[i]
        if diff:
            partner = seg["pair"].iat[i]
            ident, label = pair_id(net, partner), pair_label(net, partner)
            once = (ident, layer, w, g)
            if once in seen:           # the pair listed on both nets: report it once
                continue
            seen.add(once)
        else:
            ident = label = net
        if short[i]:
            summary.setdefault(label, []).append(i)
            continue
        geom = f"w {w * 1e3:.3f} mm" + (f", gap {g * 1e3:.3f} mm" if diff else "")
        bound = target[i] * (1 + np.sign(err[i]) * tol[i] / 100.0)
        yield chk.finding(
            label, layer,
            f"{q} {z[i]:.1f} ohm on {layer} ({geom}) misses the {cls_names[i]} target {target[i]:g} ohm "
            f"+/-{tol[i]:g} % by {err[i]:+.1f} %",
            row=int(seg["row"].iat[i]), key=make_key(chk.id, ident, layer, geom.replace(" ", "")),
            value=float(z[i]), limit=float(bound), unit="ohm")
    frac = ctx.param("ignore_shorter_than_tr")
    for label, idx in summary.items():
        worst = max(idx, key=lambda j: abs(err[j]))
        total = float(seg["length"].to_numpy(float)[idx].sum())
        layers = " > ".join(dict.fromkeys(seg["layer"].iat[j] for j in idx))
        ident = pair_id(*label.split(PAIR_SEP, 1)) if diff else label
        yield chk.finding(
            label, layers,
            f"{len(idx)} segment(s) shorter than {frac:g} x Tr ({total * 1e3:.1f} mm in all) miss the "
            f"{cls_names[worst]} target {target[worst]:g} ohm +/-{tol[worst]:g} % (worst {q} {z[worst]:.1f} ohm "
            f"on {seg['layer'].iat[worst]}, {err[worst]:+.1f} %); pieces this short, such as pad entries and "
            f"neck-downs, barely reflect, so they are not listed one by one ([impedance] ignore_shorter_than_tr)",
            row=int(seg["row"].iat[worst]), key=make_key(chk.id, ident, "short"), value=float(z[worst]),
            unit="ohm", severity="info")


@check("z0-target", "error", params=(Z0, TOLERANCE, IGNORE_SHORT))
def z0_target(ctx, chk):
    """Single-ended Z0 of each segment within its net class's target +/- tolerance.

    What it checks: every single-ended segment whose class sets `z0`; segments shorter than
    `ignore_shorter_than_tr` x Tr are summarised in one info per net.
    Why it matters: an impedance away from the driver's and terminator's design value reflects part of
    every edge, which shows up as overshoot, ringing and lost margin.
    How to fix: change the width on that layer (`sicheck plan` proposes one), or correct the class target
    or the stackup if the fabricator's report differs.
    """
    return _target_check(ctx, chk, diff=False)


@check("zdiff-target", "error", params=(ZDIFF, TOLERANCE, IGNORE_SHORT))
def zdiff_target(ctx, chk):
    """Differential Zdiff of each pair segment within its net class's target +/- tolerance.

    What it checks: every pair segment whose class sets `zdiff`, reported once per pair; segments
    shorter than `ignore_shorter_than_tr` x Tr are summarised in one info per pair.
    Why it matters: the receiver's termination is sized for the target; a mismatch reflects part of the
    differential signal and converts some of it to common mode at every discontinuity.
    How to fix: change the width or the gap of the pair on that layer (`sicheck plan --zdiff`), or
    correct the class target.
    """
    return _target_check(ctx, chk, diff=True)


@check("z-step", "warning", params=(Z_STEP,))
def z_step(ctx, chk):
    """Impedance step along a transmission-line net (a layer or width change) larger than z_step_pct.

    What it checks: on nets long enough to be transmission lines, the lowest and highest Z0 (Zdiff for
    a pair, once per pair) along the net, and the layers they are on.
    Why it matters: each step reflects part of the edge back to the driver; on lumped nets the steps are
    too short to matter, which is why they are not checked.
    How to fix: keep the impedance equal across layers: change the width (and gap) on one of the layers.
    """
    import pandas as pd
    seg = ctx.segments
    nets = ctx.nets
    lines = set(nets.loc[nets["electrical"] != "lumped", "net"].to_numpy(object).tolist())
    limit = ctx.param("z_step_pct")
    paired = (seg["pair"] != "").to_numpy()
    z = np.where(paired, seg["zdiff"].to_numpy(float), seg["z0"].to_numpy(float))
    t = pd.DataFrame({"net": seg["net"].to_numpy(), "paired": paired, "z": z})
    t = t[t["net"].isin(lines)]
    g = t.groupby(["net", "paired"], sort=False)["z"]
    stats = pd.DataFrame({"lo": g.min(), "hi": g.max(), "lo_at": g.idxmin(), "hi_at": g.idxmax()})
    stats = stats[(stats["hi"] - stats["lo"]) / stats["lo"] * 100.0 > limit]      # vectorised; loop over steps only
    # plain Python values in the loop: a large board has tens of thousands of steps (iterrows costs ~50 us
    # each, and numpy scalars format and add slower than floats)
    pair_col, layer_col = seg["pair"].to_numpy(object).tolist(), seg["layer"].to_numpy(object).tolist()
    row_col, z = seg["row"].to_numpy().tolist(), z.tolist()
    done: set = set()
    for (net, is_pair), lo, hi, lo_at, hi_at in zip(stats.index.tolist(), *(stats[c].to_numpy().tolist()
                                                                           for c in ("lo", "hi", "lo_at", "hi_at"))):
        partner = pair_col[int(lo_at)] if is_pair else ""
        ident = pair_id(net, partner) if is_pair else net
        if ident in done:
            continue
        done.add(ident)
        q = "Zdiff" if is_pair else "Z0"
        a, b = sorted((int(lo_at), int(hi_at)))       # in the order the net runs
        za, zb = z[a], z[b]
        la, lb = layer_col[a], layer_col[b]
        step = (hi - lo) / lo * 100.0
        where = la if la == lb else f"{la} → {lb}"
        label = pair_label(net, partner) if is_pair else net
        fix = "width and gap" if is_pair else "width"
        yield chk.finding(
            label, where,
            f"{q} changes {step:.0f} % along the {'pair' if is_pair else 'net'}: {za:.1f} ohm on {la} → "
            f"{zb:.1f} ohm on {lb}; each step reflects part of the edge (match the {fix} across layers)",
            row=int(row_col[b]), key=make_key(chk.id, ident, where), value=float(step), limit=float(limit),
            unit="%")


@check("no-target", "info")
def no_target(ctx, chk):
    """Transmission-line nets whose class sets no impedance target, one finding per class.

    What it checks: nets that need or should have termination (TD above the lumped limit) in a class
    with neither `z0` nor `zdiff`.
    Why it matters: without a target sicheck cannot tell whether the impedance is right, and the
    termination value depends on it.
    How to fix: give the class a `z0` (or `zdiff` for pairs), or move the nets to a class that has one.
    """
    from sicheck.checks.length import lines_longest_first
    untargeted: dict[str, list[str]] = {}
    nets = ctx.nets[["net", "pair", "net_class", "delay", "termination"]]
    no_target = {c: ctx.param("z0", c) is None and ctx.param("zdiff", c) is None
                 for c in set(nets["net_class"].to_numpy(object).tolist())}
    for r in lines_longest_first(nets):
        if no_target[r.net_class]:
            label = pair_label(r.net, r.pair) if r.pair else r.net
            untargeted.setdefault(r.net_class or "none", []).append(label)
    for cname, labels in untargeted.items():
        shown = ", ".join(labels[:5]) + (f" and {len(labels) - 5} more" if len(labels) > 5 else "")
        yield chk.finding(shown, "", f"{len(labels)} transmission-line net(s) in class '{cname}' have no "
                                     f"impedance target: set z0 or zdiff for the class",
                          key=make_key(chk.id, cname), value=float(len(labels)), unit="nets")
