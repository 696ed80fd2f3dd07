"""Closed-form solver: picks the published model for each cross-section.

Vectorised: all microstrips go through Hammerstad-Jensen in one call, all pairs
through Kirschning-Jansen or Cohn, and so on.
"""

from __future__ import annotations

import numpy as np

from sicheck.physics import coupled_microstrip, loss, microstrip, stripline
from sicheck.physics import cover
from sicheck.physics.cover import covered_eps_eff
from sicheck.physics.cross_section import CrossSection, series_er
from sicheck.physics.line_result import LineResult


def series_tand(strata) -> float:
    """Loss tangent of stacked strata in series (low loss): sum(h tand/er) / sum(h/er)."""
    if not strata:
        return 0.0
    return sum(s.thickness * s.loss_tangent / s.er for s in strata) / sum(s.thickness / s.er for s in strata)


def _arrays(xs: list[CrossSection]):
    w = np.array([x.width if x.top_width is None else 0.5 * (x.width + x.top_width) for x in xs])
    t = np.array([x.thickness for x in xs])
    s = np.array([x.gap if x.gap is not None else np.nan for x in xs])
    hb = np.array([x.h_below for x in xs])
    ha = np.array([x.h_above for x in xs])
    eb = np.array([series_er(x.below) for x in xs])
    ea = np.array([series_er(x.above) if x.above else 1.0 for x in xs])
    return w, t, s, hb, ha, eb, ea


def _microstrip(xs: list[CrossSection]) -> list[LineResult]:
    w, t, s, h, c, er, er_c = _arrays(xs)
    z_bare, e_bare = microstrip.hammerstad_jensen(w, h, t, er)
    covered = c > 0
    e_single = np.where(covered, covered_eps_eff(e_bare, er, er_c, c, w, h), e_bare)
    z_single = z_bare * np.sqrt(e_bare / e_single)
    tand = np.array([series_tand(x.below) for x in xs])
    tand_c = np.array([series_tand(x.above) for x in xs])
    # each material's share of the field (filling factors), the cover's from the covered eps_eff
    td_single = loss.covered_microstrip_tand_eff(e_bare, e_single, er, tand, er_c, tand_c)
    out = [LineResult(z0=float(z_single[i]), eps_eff=float(e_single[i]), tand_eff=float(td_single[i]),
                      model="hammerstad-jensen" + ("+cover" if covered[i] else "")) for i in range(len(xs))]
    pair = ~np.isnan(s)
    zo_bare = np.full(len(xs), np.nan)
    if pair.any():
        idx = np.nonzero(pair)[0]
        ze, zo, ee, eo = coupled_microstrip.kirschning_jansen(w[idx], h[idx], t[idx], s[idx], er[idx])
        # The cover fills part of each mode's upper region: the same partial-capacitance form as the
        # single line, with the mode's own substrate filling factor (the odd mode has more field above).
        cov = covered[idx]
        ee_c = np.where(cov, covered_eps_eff(ee, er[idx], er_c[idx], c[idx], w[idx], h[idx]), ee)
        eo_c = np.where(cov, covered_eps_eff(eo, er[idx], er_c[idx], c[idx], w[idx], h[idx]), eo)
        zo_c = zo * np.sqrt(eo / eo_c)
        # A conformal mask also lines the facing side walls of the gap, which the cover fit (zero
        # thickness) does not see: the odd mode's side-wall plate (coupled_microstrip) then holds
        # mask, air and mask in series.
        conf = np.array([bool(xs[i].above) and xs[i].above[0].conformal for i in idx])
        zo_c, eo_c = np.where(conf, coupled_microstrip.lined_gap(zo_c, eo_c, t[idx], s[idx], c[idx], er_c[idx]),
                              (zo_c, eo_c))
        zo_bare[idx] = zo
        for j, i in enumerate(idx):
            r = out[i]
            r.z_even = float(ze[j] * np.sqrt(ee[j] / ee_c[j]))
            r.z_odd = float(zo_c[j])
            r.eps_even, r.eps_odd = float(ee_c[j]), float(eo_c[j])
            r.tand_even = float(loss.covered_microstrip_tand_eff(ee[j], ee_c[j], er[i], tand[i], er_c[i],
                                                                 tand_c[i]))
            r.tand_odd = float(loss.covered_microstrip_tand_eff(eo[j], eo_c[j], er[i], tand[i], er_c[i],
                                                                tand_c[i]))
            r.model = "kirschning-jansen" + ("+cover" if covered[i] else "")
    for i, x in enumerate(xs):
        r = out[i]
        r.warnings += microstrip.validity_warnings(w[i], h[i], t[i], er[i])
        if x.coupled:
            r.warnings += coupled_microstrip.validity_warnings(w[i], h[i], s[i], er[i], t[i])
        if len(x.below) > 1 and len({st.er for st in x.below}) > 1:
            r.warnings.append("stratified substrate: closed form uses one equivalent er (series average)")
        if len(x.above) > 1 or (x.above and not x.above[0].conformal):
            r.warnings.append("embedded/multi-layer cover: closed-form cover correction is approximate")
        elif x.above and not (cover.FIT_RANGE["w/h"][0] <= w[i] / h[i] <= cover.FIT_RANGE["w/h"][1]
                              and cover.FIT_RANGE["c/h"][0] <= c[i] / h[i] <= cover.FIT_RANGE["c/h"][1]):
            # say how much the mask moves the impedance, so that a mismatch larger than that is not
            # put down to the mask
            if x.coupled:
                what, moved = "Zdiff", r.z_odd / zo_bare[i] - 1.0
            else:
                what, moved = "Z0", z_single[i] / z_bare[i] - 1.0
            r.warnings.append(f"mask correction (it moves {what} by {moved * 100:+.1f} %) used outside the range "
                              f"it was fitted on (w/h {cover.FIT_RANGE['w/h'][0]:g}..{cover.FIT_RANGE['w/h'][1]:g}, "
                              f"mask/h {cover.FIT_RANGE['c/h'][0]:g}..{cover.FIT_RANGE['c/h'][1]:g})")
    return out


def _stripline(xs: list[CrossSection]) -> list[LineResult]:
    w, t, s, hb, ha, eb, ea = _arrays(xs)
    z0, e0 = stripline.stripline(w, t, hb, ha, eb, ea)
    # each side's share of the capacitance ~ er/h (parallel plates): weights for the loss tangent
    tb = np.array([series_tand(x.below) for x in xs])
    ta = np.array([series_tand(x.above) for x in xs])
    wb, wa = eb / hb, ea / ha
    td = (tb * wb + ta * wa) / (wb + wa)
    out = [LineResult(z0=float(z0[i]), eps_eff=float(e0[i]), tand_eff=float(td[i]), model="cohn-wheeler")
           for i in range(len(xs))]
    pair = ~np.isnan(s)
    if pair.any():
        idx = np.nonzero(pair)[0]
        ze, zo, ee, eo = stripline.coupled_stripline(w[idx], t[idx], s[idx], hb[idx], ha[idx], eb[idx], ea[idx])
        for j, i in enumerate(idx):
            r = out[i]
            r.z_even, r.z_odd = float(ze[j]), float(zo[j])
            r.eps_even, r.eps_odd = float(ee[j]), float(eo[j])
            r.tand_even = r.tand_odd = r.tand_eff
            r.model = "cohn-coupled"
    for i, x in enumerate(xs):
        r = out[i]
        r.warnings += stripline.validity_warnings(w[i], t[i], hb[i], ha[i], s[i] if x.coupled else None)
        if x.stratified:
            r.warnings.append("stratified dielectric: closed form averages the two sides' capacitance "
                              "(approximate); use the field solver")
    return out


def solve_formula(xs: list[CrossSection]) -> list[LineResult]:
    """Closed-form results for each cross-section, in the given order."""
    results: list[LineResult | None] = [None] * len(xs)
    for kind, fn in (("microstrip", _microstrip), ("stripline", _stripline)):
        idx = [i for i, x in enumerate(xs) if x.kind == kind]
        if idx:
            for i, r in zip(idx, fn([xs[i] for i in idx])):
                if xs[i].top_width is not None and xs[i].top_width != xs[i].width:
                    r.warnings.append("trapezoidal etch: closed form uses the mean width")
                r.formula_warnings = list(r.warnings)
                results[i] = r
    return results  # type: ignore[return-value]
