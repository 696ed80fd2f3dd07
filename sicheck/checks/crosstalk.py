"""Crosstalk check: near- and far-end noise from a neighbour against the class's budgets.

The figures come from the review's crosstalk stage (sicheck/crosstalk_review.py): per segment
`next_pct`, `fext_pct`, `spacing`, `parallel`, `xt_aggressor`, `xt_rise`, and in
``ctx.crosstalk`` the per-cross-section coefficients and the `--coupling` rows. This check
only compares them with the budgets and, when it has a stackup and the review's solver,
solves the spacing that would meet them (sicheck/crosstalk_plan.py).
"""

from __future__ import annotations

import math

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label
from sicheck.crosstalk_review import ANY_NEIGHBOUR

SPACING = Param("spacing", "length", None, "mm", "edge-to-edge clearance the class's nets keep to other nets on "
                "the same layer (crosstalk input; a trace-list `spacing` column overrides it)", per_class=True,
                hi=25e-3, scale=1e3)
MAX_NEXT = Param("max_next_pct", "number", 5.0, "%", "near-end crosstalk budget, % of the aggressor's launched "
                 "step (common practice: a few % of the swing for crosstalk in a noise budget)",
                 section="crosstalk", per_class=True, hi=100)
MAX_FEXT = Param("max_fext_pct", "number", 5.0, "%", "far-end crosstalk budget, % of the aggressor's launched "
                 "step (common practice)", section="crosstalk", per_class=True, hi=100)

MAX_SPACING_SEARCHES = 12      # beyond this many groups, the suggested spacing comes from the closed forms


def _budgets(ctx, class_name: str) -> tuple[float, float]:
    return float(ctx.param("max_next_pct", class_name)), float(ctx.param("max_fext_pct", class_name))


def _cases(ctx):
    """(ident, shown net, aggressor, layer, width, spacing, length, rise, next, fext, class, row, edge, key)."""
    seg = ctx.segments
    out = []
    if "next_pct" in seg:
        s = seg[~seg["mirrored"].astype(bool) & seg["next_pct"].notna()]
        worst: dict[str, tuple] = {}
        for r in s.itertuples(index=False):
            nb, fb = _budgets(ctx, r.net_class)
            excess = max(r.next_pct / nb, abs(r.fext_pct) / fb)
            if excess <= 1.0:
                continue
            # a pair at its class spacing has the same neighbour on both legs: report it once
            once = bool(r.pair) and r.xt_aggressor == ANY_NEIGHBOUR
            ident = pair_id(r.net, r.pair) if once else r.net
            if ident not in worst or excess > worst[ident][0]:
                shown = pair_label(r.net, r.pair) if once else r.net
                worst[ident] = (excess, (shown, r.xt_aggressor, r.layer, r.width, r.spacing, r.parallel, r.xt_rise,
                                         r.next_pct, r.fext_pct, r.net_class, int(r.row),
                                         "the victim's own edge (aggressor unknown)", make_key("crosstalk", ident)))
        out += [v[1] for v in worst.values()]
    tables = ctx.crosstalk
    if tables is not None and tables.couplings is not None:
        cls = seg.groupby("net")["net_class"].first().to_dict()
        rows = seg.groupby("net")["row"].first().to_dict()
        for r in tables.couplings.itertuples(index=False):
            nb, fb = _budgets(ctx, cls.get(r.victim, ""))
            if r.next_pct > nb or abs(r.fext_pct) > fb:
                edge = ("the aggressor's edge" if r.edge_from == "aggressor" else
                        "the victim's own edge (aggressor not in the trace list)")
                out.append((r.victim, r.aggressor, r.layer, r.width, r.spacing, r.length, r.rise, r.next_pct,
                            r.fext_pct, cls.get(r.victim, ""), rows.get(r.victim), edge,
                            make_key("crosstalk", r.victim, r.aggressor, r.layer)))
    return out


def _fixes(ctx, cases):
    """Spacing meeting both budgets per (layer, width, budgets, edge), at the group's longest run; None: no search."""
    tables = ctx.crosstalk
    if tables is None or tables.solver is None or ctx.stackup is None:
        return None
    from sicheck.crosstalk_plan import spacing_for_budget
    from sicheck.physics.formula import solve_formula
    longest: dict[tuple, float] = {}
    for (_, _, layer, w, _, length, rise, _, _, cname, _, _, _) in cases:
        k = (layer, w, *_budgets(ctx, cname), rise)
        longest[k] = max(longest.get(k, 0.0), length)
    st = ctx.stackup
    out: dict[tuple, float | None] = {}
    for (layer, w, nb, fb, rise), length in longest.items():
        use = tables.solver if len(out) < MAX_SPACING_SEARCHES else solve_formula
        g = st.geometry(layer)
        h = min(sum(x.thickness for x in g.below), sum(x.thickness for x in g.above) or 1.0)
        res = spacing_for_budget(lambda sp, layer=layer, w=w: st.cross_section(layer, w, sp), layer, w, h,
                                 nb / 100.0, use, ctx.param("min_feature"), length, rise, far_budget=fb / 100.0,
                                 near_at_length=True)
        out[(layer, w, nb, fb, rise)] = res.spacing
    return out


@check("crosstalk", "warning", params=(SPACING, MAX_NEXT, MAX_FEXT))
def crosstalk(ctx, chk):
    """Near- or far-end crosstalk from a neighbour above the class's max_next_pct or max_fext_pct.

    What it checks: every segment with a spacing (the class's `spacing` or the trace list's `spacing`
    column, over `parallel` or the segment's length) and every `--coupling` row: the near-end (NEXT)
    and far-end (FEXT) noise, in % of the step launched onto the aggressor, from the field-solved
    coupled cross-section (weak-coupling theory, Paul 2008; matched ends, one dominant aggressor).
    A net gets one finding for its worst segment; each listed coupling over budget gets its own.
    Why it matters: noise coupled from a neighbour eats the receiver's noise margin; near-end noise
    grows with coupled length until the round trip reaches the edge, far-end noise (none in a
    homogeneous stripline) keeps growing with length and edge rate.
    How to fix: route the nets further apart (the finding gives the spacing that meets both budgets,
    solved on the stackup), shorten the parallel run, move one net to a stripline layer (no far-end
    noise), or slow the aggressor's edge.
    """
    cases = _cases(ctx)
    if not cases:
        return
    fixes = _fixes(ctx, cases)
    tables = ctx.crosstalk
    for (net, aggr, layer, w, s, length, rise, ne, fe, cname, row, edge, key) in cases:
        nb, fb = _budgets(ctx, cname)
        fix_text = ""
        if fixes is not None:
            fix = fixes.get((layer, w, nb, fb, rise))
            fix_text = (f"; a spacing of {fix * 1e3:.3f} mm ({fix / w:.1f} x the width) meets both" if fix is not None
                        else "; no spacing up to 40 dielectric heights meets them: shorten the coupled run or slow "
                             "the edge")
        volts = tables.volts_text(ctx, cname, layer, w, s, ne, fe) if tables is not None else ""
        msg = (f"{net} on {layer} (w {w * 1e3:.3f} mm) next to {aggr or ANY_NEIGHBOUR} at {s * 1e3:.3f} mm over "
               f"{length * 1e3:.1f} mm: NEXT {ne:.2f} % (budget {nb:g} %), FEXT {fe:+.2f} % (budget {fb:g} %) of "
               f"the aggressor's step{volts}, with a {rise * 1e12:.0f} ps edge from {edge}{fix_text}")
        if tables is not None:
            msg += "".join(f" (caution: {m})" for m in tables.cautions(layer, w, s))
            wave = next((x for x in tables.waves if x["victim"] == net and x["aggressor"] == aggr
                         and x["layer"] == layer), None)
            if wave is not None:
                msg += (f"; with the nets' own ends (drivers {wave['victim_driver_ohm']:g} ohm, receivers "
                        f"{wave['victim_load'] * 1e12:g} pF) the victim sees {wave['near_peak_v'] * 1e3:+.0f} mV at "
                        f"its near end and {wave['far_peak_v'] * 1e3:+.0f} mV at its far end (Crosstalk waves sheet)")
        near = ne / nb >= abs(fe) / fb
        yield chk.finding(net, layer, msg, row=None if row is None or (isinstance(row, float) and math.isnan(row))
                          else int(row), key=key, value=float(ne if near else abs(fe)), limit=float(nb if near else fb),
                          unit="%")
