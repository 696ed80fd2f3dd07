"""Smallest spacing that keeps crosstalk within a budget, per layer (`plan --crosstalk`).

The near-end metric is the saturated NEXT, Kb; the far-end one is |FEXT| at a stated
coupled length and rise time (see sicheck.physics.crosstalk). Both fall as the
spacing grows, so each budget has one crossing. It is found by root finding on
ln(metric / budget) against ln(spacing): a vectorised closed-form scan gives the start,
then secant steps with the chosen solver, kept inside a bracket once one is known
(Illinois variant of regula falsi), until the metric is within TOL_PCT of the budget.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from sicheck.physics import crosstalk as xt
from sicheck.physics.cross_section import CrossSection
from sicheck.physics.formula import solve_formula
from sicheck.physics.line_result import LineResult

TOL_PCT = 0.5          # metric within 0.5 % of the budget
MAX_STEPS = 14
MAX_SPACING_H = 40.0   # search up to 40 dielectric heights (coupling there is far below any budget)
Solver = Callable[[list[CrossSection]], list[LineResult]]


@dataclass
class SpacingResult:
    layer: str
    width: float
    budget: float                          # fraction of the aggressor's step
    spacing: float | None = None
    spacing_next: float | None = None
    spacing_fext: float | None = None
    kb: float | None = None                # near-end metric at the spacing (saturated unless asked otherwise)
    fext: float | None = None              # signed fraction at the stated length and edge
    steps: int = 0
    notes: list[str] = field(default_factory=list)


def _metrics(results: list[LineResult], length, rise, near_at_length=False) -> tuple[np.ndarray, np.ndarray]:
    ze = np.array([r.z_even for r in results], dtype=float)
    zo = np.array([r.z_odd for r in results], dtype=float)
    ee = np.array([r.eps_even for r in results], dtype=float)
    eo = np.array([r.eps_odd for r in results], dtype=float)
    c = xt.coupling_from_modes(ze, zo, ee, eo)
    if length is None or rise is None:
        return c.kb, np.zeros_like(c.kb)
    near = xt.next_fraction(c.kb, length, c.delay_per_m, rise) if near_at_length else c.kb
    return near, xt.fext_fraction(c.kf, length, c.delay_per_m, rise)


def _root(evaluate, which: int, budget: float, s_lo: float, s_hi: float, s_start: float, slope0: float):
    """Spacing where metric ``which`` (0 near end, 1 far end) equals the budget.

    Returns (spacing, steps, note). ``evaluate(s)`` -> (kb, fext) with the real solver.
    """
    def g(s):
        return math.log(max(abs(evaluate(s)[which]), 1e-300) / budget)

    lo_pt = None      # (ln s, g) with g > 0: too much coupling
    hi_pt = None      # g <= 0: within budget
    x = math.log(min(max(s_start, s_lo), s_hi))
    prev = None
    side = 0
    for step in range(1, MAX_STEPS + 1):
        gx = g(math.exp(x))
        if abs(gx) <= math.log1p(TOL_PCT / 100.0):
            return math.exp(x), step, None
        if gx > 0:
            if lo_pt is None or x > lo_pt[0]:
                lo_pt = (x, gx)
            if side == 1 and hi_pt is not None:
                hi_pt = (hi_pt[0], hi_pt[1] / 2.0)      # Illinois: halve the stale end
            side = 1
        else:
            if hi_pt is None or x < hi_pt[0]:
                hi_pt = (x, gx)
            if side == -1 and lo_pt is not None:
                lo_pt = (lo_pt[0], lo_pt[1] / 2.0)
            side = -1
        if lo_pt is not None and hi_pt is not None:
            x_new = lo_pt[0] - lo_pt[1] * (hi_pt[0] - lo_pt[0]) / (hi_pt[1] - lo_pt[1])
        else:
            slope = slope0 if prev is None or prev[0] == x else (gx - prev[1]) / (x - prev[0])
            if not slope < 0:
                slope = slope0
            x_new = x - gx / slope
            x_new = min(max(x_new, x - 1.5), x + 1.5)      # at most a factor 4.5 per step before a bracket
        if gx <= 0 and x <= math.log(s_lo) + 1e-12:
            return s_lo, step, "within budget at the minimum feature"
        if gx > 0 and x >= math.log(s_hi) - 1e-12:
            return None, step, f"over budget even at {s_hi * 1e3:.3g} mm"
        prev = (x, gx)
        x = min(max(x_new, math.log(s_lo)), math.log(s_hi))
    return math.exp(x), MAX_STEPS, f"stopped after {MAX_STEPS} solver steps"


def spacing_for_budget(make_pair: Callable[[float], CrossSection], layer: str, width: float, h_scale: float,
                       budget: float, solver: Solver, min_feature: float, length: float | None = None,
                       rise: float | None = None, far_budget: float | None = None,
                       near_at_length: bool = False) -> SpacingResult:
    """Smallest spacing with saturated NEXT (and |FEXT| at ``length``/``rise``) within ``budget``.

    ``far_budget`` (default ``budget``) is the far-end budget; ``near_at_length`` takes the near-end
    noise at ``length`` (below saturation it is smaller) instead of its saturated value.
    """
    far_budget = budget if far_budget is None else far_budget
    res = SpacingResult(layer=layer, width=width, budget=budget)
    s_lo, s_hi = min_feature, max(MAX_SPACING_H * h_scale, 4.0 * min_feature)
    # closed-form scan: the start and the local slope
    ss = np.geomspace(s_lo, s_hi, 80)
    with np.errstate(all="ignore"):
        kb_f, fe_f = _metrics(solve_formula([make_pair(float(s)) for s in ss]), length, rise, near_at_length)
    cache: dict[float, tuple[float, float]] = {}

    def evaluate(s: float):
        if s not in cache:
            kb, fe = _metrics(solver([make_pair(s)]), length, rise, near_at_length)
            cache[s] = (float(kb[0]), float(fe[0]))
        return cache[s]

    needs = [(0, kb_f, budget)] + ([(1, np.abs(fe_f), far_budget)] if length is not None and rise is not None else [])
    found = []
    for which, m, limit in needs:
        gm = np.log(np.maximum(m, 1e-300) / limit)
        over = np.nonzero(np.isfinite(gm) & (gm > 0))[0]
        i = int(over[-1]) if len(over) else -1
        if i < 0:
            start, slope = s_lo, -1.0
        elif i >= len(ss) - 1:
            start, slope = s_hi, -1.0
        else:
            frac = gm[i] / (gm[i] - gm[i + 1])
            start = float(np.exp(np.log(ss[i]) + frac * (np.log(ss[i + 1]) - np.log(ss[i]))))
            slope = float((gm[i + 1] - gm[i]) / (np.log(ss[i + 1]) - np.log(ss[i])))
        s, steps, note = _root(evaluate, which, limit, s_lo, s_hi, start, slope)
        found.append(s)
        if note:
            res.notes.append(("near end: " if which == 0 else "far end: ") + note)
    res.steps = len(cache)
    res.spacing_next = found[0]
    res.spacing_fext = found[1] if len(found) > 1 else None
    if any(s is None for s in found):
        return res
    res.spacing = max(found)
    res.kb, res.fext = evaluate(res.spacing)
    return res


def parse_budget(text: str, option: str = "--crosstalk") -> float:
    """'3%' or '3' -> 0.03 (a percentage of the aggressor's step); `rules` is handled by the caller."""
    from sicheck.errors import InputError
    t = str(text).strip().rstrip("%").strip()
    try:
        v = float(t)
    except ValueError:
        raise InputError(f"{option} must be a percentage such as 3% (got '{text}')") from None
    if not 0.01 <= v <= 50.0:
        raise InputError(f"{option} {text} is outside 0.01..50 %")
    return v / 100.0


def layer_crosstalk(st, layer: str, width: float | None, budget: float, solver: Solver, min_feature: float,
                    length: float | None, rise: float | None, far_budget: float | None = None) -> dict:
    """`plan --crosstalk` for one signal layer: the spacing dict of the plan JSON (``far_budget``: default ``budget``)."""
    far_budget = budget if far_budget is None else far_budget
    if width is None:
        return {"budget_pct": budget * 100.0, "far_budget_pct": far_budget * 100.0, "spacing_mm": None,
                "notes": ["no width on this layer for the first --z0 target, so no spacing"]}
    g = st.geometry(layer)
    h_scale = min(sum(s.thickness for s in g.below), sum(s.thickness for s in g.above) or 1.0)
    r = spacing_for_budget(lambda s: st.cross_section(layer, width, s), layer, width, h_scale, budget, solver,
                           min_feature, length, rise, far_budget=far_budget)
    mm = (lambda v: None if v is None else v * 1e3)
    return {"budget_pct": budget * 100.0, "far_budget_pct": far_budget * 100.0, "width_mm": width * 1e3,
            "spacing_mm": mm(r.spacing),
            "spacing_for_next_mm": mm(r.spacing_next), "spacing_for_fext_mm": mm(r.spacing_fext),
            "kb": r.kb, "next_saturated_pct": None if r.kb is None else r.kb * 100.0,
            "fext_pct": None if r.fext is None or length is None else r.fext * 100.0,
            "coupled_length_mm": mm(length), "rise_ps": None if rise is None else rise * 1e12,
            "spacing_over_width": None if r.spacing is None else r.spacing / width,
            "solver_steps": r.steps, "notes": r.notes}


def print_plan_crosstalk(con, plan: dict, fmt) -> None:
    """The `plan --crosstalk` table on the terminal (``fmt(value, spec)`` prints '-' for a missing value)."""
    from rich.table import Table
    first = next(L["crosstalk"] for L in plan["layers"] if "crosstalk" in L)
    far = (f"; far end at {first['coupled_length_mm']:g} mm coupled, {first['rise_ps']:g} ps"
           if first.get("coupled_length_mm") else "; near end only (give --coupled-length and --rise for the far end)")
    within = (f"{first['budget_pct']:g} %" if first["far_budget_pct"] == first["budget_pct"] else
              f"{first['budget_pct']:g} % (near end), {first['far_budget_pct']:g} % (far end)")
    t = Table(title=f"Spacing for crosstalk within {within}{far}", title_justify="left")
    for c in ("layer", "width mm", "spacing mm", "s/w", "for NEXT mm", "for FEXT mm", "NEXT sat %", "FEXT %"):
        t.add_column(c)
    for L in plan["layers"]:
        x = L.get("crosstalk")
        if x:
            t.add_row(L["layer"], fmt(x.get("width_mm"), ".4f"), fmt(x.get("spacing_mm"), ".4f"),
                      fmt(x.get("spacing_over_width"), ".2f"), fmt(x.get("spacing_for_next_mm"), ".4f"),
                      fmt(x.get("spacing_for_fext_mm"), ".4f"), fmt(x.get("next_saturated_pct"), ".3f"),
                      fmt(x.get("fext_pct"), "+.3f"))
    con.print(t)
