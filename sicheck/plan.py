"""Stackup planning: the width (and width/gap) that gives each target impedance.

For each signal layer the closed form gives a starting width by bisection; the
chosen solver (the field solver by default) then refines it with secant steps on
ln Z against ln w until the impedance is within TOL_PCT of the target.

Pairs need a rule to pick one of the many width/gap pairs that hit a Zdiff:
  equal        gap = width (common practice)
  fixed:<len>  the gap is given, e.g. fixed:0.15mm
  min          the gap is the rules' minimum feature size (the tightest coupling, so the
               narrowest pair that the fabrication rules allow)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from sicheck.physics.cross_section import CrossSection
from sicheck.physics.formula import solve_formula
from sicheck.physics.line_loss import Roughness, alphas, wheeler_derivative
from sicheck.physics.line_result import LineResult, per_length
from sicheck.stackup import Stackup

TOL_PCT = 0.1          # aim; the acceptance is 0.5 %
MAX_STEPS = 10
Solver = Callable[[list[CrossSection]], list[LineResult]]


@dataclass
class GapRule:
    kind: str                  # "equal" | "fixed" | "min"
    gap: float | None = None

    def gap_for(self, width: float, min_feature: float) -> float:
        if self.kind == "equal":
            return width
        if self.kind == "fixed":
            return float(self.gap)
        return min_feature

    def describe(self) -> str:
        return {"equal": "gap = width", "fixed": f"fixed gap {self.gap * 1e3:g} mm" if self.gap else "fixed gap",
                "min": "gap = minimum feature"}[self.kind]


@dataclass
class Target:
    layer: str
    kind: str                    # line kind
    what: str                    # "z0" | "zdiff"
    target: float
    width: float | None = None
    gap: float | None = None
    achieved: float | None = None
    error_pct: float | None = None
    uncertainty_pct: float | None = None
    delay_per_m: float | None = None
    eps_eff: float | None = None
    losses: list[dict] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    steps: int = 0
    band: tuple[float, float, float] | None = None    # fabrication band of the achieved Z: min, max, RSS +/-


def _z_of(r: LineResult, what: str) -> float:
    return r.zdiff if what == "zdiff" else r.z0


def _make(st: Stackup, layer: str, w: float, what: str, rule: GapRule, min_feature: float) -> CrossSection:
    gap = rule.gap_for(w, min_feature) if what == "zdiff" else None
    return st.cross_section(layer, w, gap)


def _formula_width(st, layer, target, what, rule, min_feature, h_scale) -> float | None:
    """Starting width from the closed form: the crossing of the target at the largest width.

    Outside their ranges (very narrow strips) the closed forms can misbehave, so the scan
    covers 0.02..30 x the dielectric height and keeps the physical (widest) crossing.
    """
    ws = np.geomspace(max(0.02 * h_scale, 0.5 * min_feature), 30.0 * h_scale, 160)
    with np.errstate(all="ignore"):
        zs = np.array([_z_of(r, what) for r in
                       solve_formula([_make(st, layer, w, what, rule, min_feature) for w in ws])], dtype=float)
    for i in range(len(ws) - 2, -1, -1):
        a, b = zs[i], zs[i + 1]
        if np.isfinite(a) and np.isfinite(b) and (a - target) * (b - target) <= 0 and a != b:
            frac = (math.log(target) - math.log(a)) / (math.log(b) - math.log(a))
            return float(math.exp(math.log(ws[i]) + frac * (math.log(ws[i + 1]) - math.log(ws[i]))))
    return None


def _zdiff_at(st, layer, solver, w, gap) -> float:
    return float(solver([st.cross_section(layer, w, gap)])[0].zdiff)


def gap_that_reaches(st: Stackup, layer: str, target: float, solver: Solver, min_feature: float,
                     max_width: float, h_scale: float) -> tuple[float, float] | None:
    """The smallest fixed gap with which a width from min_feature to max_width gives Zdiff = target.

    Zdiff grows with the gap at any width and falls with the width at any gap, so the gap is
    found by bisection (in log gap) on Zdiff at the narrowest width, with the chosen solver, and
    the width then by ``synthesise``. None when no gap from min_feature to 10 h does it.
    """
    w_lo, w_hi = min_feature, max_width
    g_lo, g_hi = min_feature, max(10.0 * h_scale, 4.0 * min_feature)
    if _zdiff_at(st, layer, solver, w_lo, g_hi) < target:
        return None                      # even the narrowest pair, loosely coupled, stays below the target
    if _zdiff_at(st, layer, solver, w_lo, g_lo) < target:
        for _ in range(10):
            g_mid = math.sqrt(g_lo * g_hi)
            if _zdiff_at(st, layer, solver, w_lo, g_mid) >= target:
                g_hi = g_mid
            else:
                g_lo = g_mid
        gap = math.ceil(g_hi * 1e6) * 1e-6          # whole micrometres, rounded towards reaching it
    else:
        gap = g_lo
        if _zdiff_at(st, layer, solver, w_hi, gap) > target:
            return None                  # the target needs a pair wider than max_width at any gap
    t = synthesise(st, layer, target, "zdiff", solver, GapRule("fixed", gap), min_feature, max_width, suggest=False)
    return None if t.width is None else (gap, t.width)


def _unreachable(res: Target, st, layer, target, what, solver, rule, min_feature, max_width, h_scale,
                 why: str) -> Target:
    """Mark a target as not reached: no geometry is reported, the note says why and what would work."""
    res.width = res.gap = res.achieved = res.error_pct = None
    res.uncertainty_pct = res.eps_eff = res.delay_per_m = None
    name = "Zdiff" if what == "zdiff" else "Z0"
    msg = f"{name} {target:g} ohm cannot be reached on {layer}"
    if what == "zdiff":
        msg += f" with {rule.describe()}"
    msg += f": {why}"
    if what == "zdiff":
        found = gap_that_reaches(st, layer, target, solver, min_feature, max_width, h_scale)
        if found is not None:
            g, w = found
            msg += (f". A fixed gap of {g * 1e3:.3f} mm reaches it with width {w * 1e3:.4f} mm "
                    f"(--gap-rule fixed:{g * 1e3:.3f}mm)")
        else:
            msg += (f". No gap from {min_feature * 1e3:g} to {10 * h_scale * 1e3:.3g} mm reaches it with a width "
                    f"from {min_feature * 1e3:g} to {max_width * 1e3:g} mm: change the stackup or the target")
    res.notes.append(msg)
    return res


def synthesise(st: Stackup, layer: str, target: float, what: str, solver: Solver, rule: GapRule,
               min_feature: float, max_width: float, suggest: bool = True) -> Target:
    """Width (and gap) giving ``target``; when it cannot be reached, width is None and a note says why."""
    g = st.geometry(layer)
    h_scale = min(sum(s.thickness for s in g.below), sum(s.thickness for s in g.above) or 1.0)
    res = Target(layer=layer, kind=g.kind, what=what, target=target)
    w_min = max(0.02 * h_scale, 0.5 * min_feature)
    w_max = 30.0 * h_scale

    def fail(why: str) -> Target:
        if not suggest:
            res.width = None
            return res
        return _unreachable(res, st, layer, target, what, solver, rule, min_feature, max_width, h_scale, why)

    w = _formula_width(st, layer, target, what, rule, min_feature, h_scale)
    if w is None:
        return fail(f"no width from {w_min * 1e3:.4g} to {w_max * 1e3:.4g} mm gives it (closed form)")
    pts: list[tuple[float, float]] = []
    r = None
    for step in range(MAX_STEPS):
        r = solver([_make(st, layer, w, what, rule, min_feature)])[0]
        z = _z_of(r, what)
        pts.append((math.log(w), math.log(z)))
        res.steps = step + 1
        if abs(z / target - 1.0) * 100.0 <= TOL_PCT:
            break
        if len(pts) >= 2 and pts[-1][1] != pts[-2][1]:
            slope = (pts[-1][1] - pts[-2][1]) / (pts[-1][0] - pts[-2][0])
        else:
            # first step: the closed form's local slope d ln Z / d ln w
            z1, z2 = (_z_of(x, what) for x in solve_formula([_make(st, layer, w * 0.98, what, rule, min_feature),
                                                             _make(st, layer, w * 1.02, what, rule, min_feature)]))
            slope = (math.log(z2) - math.log(z1)) / (math.log(1.02) - math.log(0.98))
        if not slope < 0:
            break       # the impedance stops falling with width (a pair with gap = width: the side walls' coupling)
        w_next = math.exp(pts[-1][0] + (math.log(target) - pts[-1][1]) / slope)
        if not w_min <= w_next <= w_max:
            break       # the solver would leave the widths where the target can lie
        w = w_next
    z = _z_of(r, what)
    err = (z / target - 1.0) * 100.0
    if abs(err) > 0.5:
        best = min(pts, key=lambda p: abs(p[1] - math.log(target)))
        why = f"the solver's closest was {math.exp(best[1]):.1f} ohm at width {math.exp(best[0]) * 1e3:.4f} mm"
        if what == "zdiff" and rule.kind != "fixed":
            why += " (as the gap narrows with the width, the side walls' coupling caps Zdiff)"
        return fail(why)
    res.width = w
    res.gap = rule.gap_for(w, min_feature) if what == "zdiff" else None
    res.achieved = z
    res.error_pct = err
    res.uncertainty_pct = r.uncertainty_pct
    res.eps_eff = r.signal_eps
    res.delay_per_m = float(per_length(r.signal_z, r.signal_eps)[2])
    if w < min_feature:
        res.notes.append(f"width {w * 1e3:.4f} mm is below the minimum feature {min_feature * 1e3:g} mm")
    if res.gap is not None and res.gap < min_feature * (1 - 1e-9):
        res.notes.append(f"gap {res.gap * 1e3:.4f} mm is below the minimum feature {min_feature * 1e3:g} mm")
    if w > max_width:
        res.notes.append(f"width {w * 1e3:.3f} mm is above the {max_width * 1e3:g} mm maximum: use a thinner "
                         "dielectric or a different target")
    res._result = r      # kept for the loss step
    return res


def add_losses(st: Stackup, targets: list[Target], freqs: list[float], solver: Solver, rule: GapRule,
               min_feature: float) -> None:
    done = [t for t in targets if t.width is not None]
    if not done or not freqs:
        return
    xs = [_make(st, t.layer, t.width, t.what, rule, min_feature) for t in done]
    dzdn = wheeler_derivative(xs, solver)
    for t, d in zip(done, dzdn):
        r = t._result
        lay = st.layer(t.layer)
        rough = Roughness(rms=lay.roughness, huray_radius=lay.huray_radius, huray_ratio=lay.huray_ratio)
        for f in freqs:
            a_c, a_d = alphas(f, r.signal_z, r.signal_eps, r.signal_tand, d, rough)
            t.losses.append({"freq_ghz": f * 1e-9, "conductor_loss_db_per_mm": float(a_c) * 1e-3,
                             "dielectric_loss_db_per_mm": float(a_d) * 1e-3,
                             "loss_db_per_mm": (float(a_c) + float(a_d)) * 1e-3})


def add_bands(st: Stackup, targets: list[Target], solver: Solver, rule: GapRule, min_feature: float,
              tol) -> None:
    """The fabrication band of each proposed width (one batched solve per tolerance limit, as in the review)."""
    from sicheck.physics.fab_band import tolerance_band
    done = [t for t in targets if t.width is not None]
    if not done:
        return
    xs = [_make(st, t.layer, t.width, t.what, rule, min_feature) for t in done]
    b = tolerance_band(xs, [t._result for t in done], solver, tol,
                       ratio_solve=getattr(solver, "band_ratios", None))      # field: ratios on one fixed grid
    for i, t in enumerate(done):
        lo, hi, rss = ((b.zdiff_min, b.zdiff_max, b.zdiff_rss) if t.what == "zdiff" else (b.z_min, b.z_max, b.z_rss))
        t.band = (float(lo[i]), float(hi[i]), float(rss[i]))
