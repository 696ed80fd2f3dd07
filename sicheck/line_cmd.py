"""`sicheck line`: one cross-section from the command line."""

from __future__ import annotations

import json
import sys
from dataclasses import replace

import numpy as np

from sicheck import plausible
from sicheck.errors import InputError
from sicheck.physics.cross_section import CrossSection, Stratum
from sicheck.physics.line_result import LineResult, per_length
from sicheck.units import UnitError, option_frequency, parse_quantity


def _len(value: str | None, option: str, units: str, quantity: str = "height") -> float | None:
    if value is None:
        return None
    try:
        v = parse_quantity(value, "length", units)
    except UnitError as e:
        raise InputError(f"{option}: {e}") from None
    if not v > 0:
        raise InputError(f"{option} must be positive (got {value})")
    if bad := plausible.check(quantity, v):
        raise InputError(f"{option} {value}: {bad}")
    return v


def _er(value: float | None, option: str) -> float | None:
    if value is not None and (bad := plausible.check("er", value)):
        raise InputError(f"{option}: {bad}")
    return value


def _tand(value: float | None, option: str) -> float | None:
    if value is not None and (bad := plausible.check("loss_tangent", value)):
        raise InputError(f"{option}: {bad}")
    return value


def build_cross_section(kind, width, thickness, er, height, below, above, er_below, er_above, gap, mask,
                        mask_er, units, etch_factor=None, top_width=None) -> CrossSection:
    xs = _build(kind, width, thickness, er, height, below, above, er_below, er_above, gap, mask, mask_er, units)
    if etch_factor is not None and top_width is not None:
        raise InputError("give --etch-factor or --top-width, not both")
    if etch_factor is not None:
        if not etch_factor > 0:
            raise InputError("--etch-factor must be positive")
        if xs.thickness <= 0:
            raise InputError("--etch-factor needs a thickness above zero")
        tw = xs.width - 2.0 * xs.thickness / etch_factor
        if tw <= 0:
            raise InputError("--etch-factor leaves no top face: the undercut exceeds half the width")
        xs = replace(xs, top_width=tw)
    if top_width is not None:
        tw = _len(top_width, "--top-width", units, "width")
        if tw > xs.width:
            raise InputError("--top-width is wider than --width (the bottom face)")
        xs = replace(xs, top_width=tw)
    return xs


def _build(kind, width, thickness, er, height, below, above, er_below, er_above, gap, mask,
           mask_er, units) -> CrossSection:
    from sicheck.units import LENGTH
    if units not in LENGTH:
        raise InputError(f"--units must be a length unit such as mm, um, mil or in (got '{units}')")
    w = _len(width, "--width", units, "width")
    try:
        t = parse_quantity(thickness, "length", units)
    except UnitError as e:
        raise InputError(f"--thickness: {e}") from None
    if t < 0:
        raise InputError("--thickness must not be negative")
    if t > 0 and (bad := plausible.check("copper_thickness", t)):
        raise InputError(f"--thickness {thickness}: {bad} (0 means an infinitely thin strip)")
    h = _len(height, "--height", units)
    b = _len(below, "--below", units)
    a = _len(above, "--above", units)
    s = _len(gap, "--gap", units, "gap")
    m = _len(mask, "--mask", units, "mask_thickness")
    e_dflt = _er(er, "--er")
    e_b = _er(er_below, "--er-below") or e_dflt
    e_a = _er(er_above, "--er-above") or e_dflt
    if e_b is None or e_a is None:
        raise InputError("give --er (or both --er-below and --er-above)")
    if kind == "microstrip":
        if h is not None and b is not None:
            raise InputError("give --height or --below, not both")
        hh = h if h is not None else b
        if hh is None:
            raise InputError("microstrip needs --height (trace bottom to plane)")
        if a is not None:
            raise InputError("--above is for stripline; a microstrip's cover is --mask")
        cover: tuple[Stratum, ...] = ()
        if m is not None:
            if mask_er is None:
                raise InputError("--mask needs --mask-er")
            cover = (Stratum(m, float(_er(mask_er, "--mask-er")), conformal=True),)
        return CrossSection("microstrip", w, t, (Stratum(hh, e_b),), cover, gap=s)
    if m is not None:
        raise InputError("--mask applies to microstrip only")
    if h is not None:
        if b is not None or a is not None:
            raise InputError("give --height, or --below and --above, not both")
        if h <= t:
            raise InputError("--height (plane spacing) must exceed --thickness")
        b = a = (h - t) / 2.0
    if b is None or a is None:
        raise InputError("stripline needs --height (plane spacing) or both --below and --above")
    return CrossSection("stripline", w, t, (Stratum(b, e_b),), (Stratum(a, e_a),), gap=s)


def line_dict(xs: CrossSection, r: LineResult, length: float | None, units: str) -> dict:
    l, c, d = per_length(r.signal_z, r.signal_eps)
    out = {
        "kind": xs.kind, "units_in": units, "width_mm": xs.width * 1e3, "thickness_mm": xs.thickness * 1e3,
        "z0_ohm": r.z0, "eps_eff": r.eps_eff if not xs.coupled else r.eps_eff,
        "delay_ps_per_mm": d * 1e9, "l_nh_per_mm": l * 1e6, "c_pf_per_mm": c * 1e9,
        "model": r.model, "solver": "field" if r.model.startswith("field") else "formula",
        "warnings": list(r.warnings),
    }
    if xs.coupled:
        out.update(gap_mm=xs.gap * 1e3, zdiff_ohm=r.zdiff, zodd_ohm=r.z_odd, zeven_ohm=r.z_even,
                   zcommon_ohm=r.zcommon, eps_eff_odd=r.eps_odd, eps_eff_even=r.eps_even)
        out["eps_eff"] = r.eps_odd
    if r.uncertainty_pct is not None:
        out["uncertainty_pct"] = r.uncertainty_pct
    if r.solve_s is not None:
        out["solve_s"] = r.solve_s
    if r.model.startswith("field"):
        out["formula_z0_ohm"] = r.formula_z0
        if xs.coupled:
            out["formula_zdiff_ohm"] = r.formula_zdiff
        if r.c_matrix is not None:
            out["c_matrix_pf_per_mm"] = [[v * 1e9 for v in row] for row in r.c_matrix]
            out["l_matrix_nh_per_mm"] = [[v * 1e6 for v in row] for row in r.l_matrix]
    if xs.top_width is not None:
        out["top_width_mm"] = xs.top_width * 1e3
    if length is not None:
        out["length_mm"] = length * 1e3
        out["delay_ps"] = d * length * 1e12
    return out


def solve_formula_name(xs: CrossSection) -> str:
    from sicheck.physics.formula import solve_formula
    return solve_formula([xs])[0].model


def solve_one(xs: CrossSection, solver: str) -> LineResult:
    from sicheck.physics.formula import solve_formula
    if solver == "formula":
        return solve_formula([xs])[0]
    if solver == "field":
        from sicheck.physics.field2d import solve_field
        r = solve_field(xs)
        f = solve_formula([xs])[0]
        r.formula_z0, r.formula_zdiff, r.formula_warnings = f.z0, f.zdiff, f.warnings
        return r
    raise InputError(f"--solver must be 'formula' or 'field' (got '{solver}')")


def line_loss(xs: CrossSection, r: LineResult, solver: str, freq: float, rough) -> dict:
    """Loss per length of one cross-section at ``freq`` (see physics/loss.py)."""
    from sicheck.physics.line_loss import alphas, loss_uncertainty_pct, wheeler_derivative
    dzdn = wheeler_derivative([xs], lambda lst: [solve_one(x, solver) for x in lst], [r])
    a_c, a_d = alphas(freq, r.signal_z, r.signal_eps, r.signal_tand, dzdn, rough)
    out = {"freq_ghz": freq * 1e-9, "conductor_loss_db_per_mm": float(a_c[0]) * 1e-3,
           "dielectric_loss_db_per_mm": float(np.ravel(a_d)[0]) * 1e-3,
           "loss_db_per_mm": (float(a_c[0]) + float(np.ravel(a_d)[0])) * 1e-3,
           "roughness_factor": float(np.ravel(rough.factor(freq))[0])}
    if r.loss_uncertainty_pct is not None:
        out["conductor_loss_uncertainty_pct"] = r.loss_uncertainty_pct
        out["loss_uncertainty_pct"] = float(np.ravel(loss_uncertainty_pct(a_c, a_d, r.loss_uncertainty_pct,
                                                                          r.uncertainty_pct))[0])
    return out


def run_line(kind, width, thickness, er, height, below, above, er_below, er_above, gap, mask, mask_er, length,
             solver, units, as_json, etch_factor=None, top_width=None, plot=None, freq=None, loss_tangent=None,
             roughness=None, huray_radius=None, huray_ratio=None, mask_loss_tangent=None, spacing=None, rise=None,
             swing=None, driver_ohm=None, victim_ohm=None, load_pf=None) -> None:
    from sicheck.crosstalk_line import crosstalk_rows, line_crosstalk, parse_line_options
    xo = parse_line_options(spacing, rise, swing, driver_ohm, units, victim_ohm, load_pf)
    xs = build_cross_section(kind, width, thickness, er, height, below, above, er_below, er_above, gap, mask,
                             mask_er, units, etch_factor, top_width)
    _tand(loss_tangent, "--loss-tangent")
    _tand(mask_loss_tangent, "--mask-loss-tangent")
    if mask_loss_tangent is not None and not any(s.conformal for s in xs.above):
        raise InputError("--mask-loss-tangent needs a mask (--mask and --mask-er)")
    if loss_tangent is not None:
        xs = replace(xs, below=tuple(replace(s, loss_tangent=loss_tangent) for s in xs.below),
                     above=tuple(s if s.conformal else replace(s, loss_tangent=loss_tangent) for s in xs.above))
    if mask_loss_tangent is not None:
        xs = replace(xs, above=tuple(replace(s, loss_tangent=mask_loss_tangent) if s.conformal else s
                                     for s in xs.above))
    f_hz = None if freq is None else option_frequency(freq, "--freq")
    from sicheck.physics.line_loss import Roughness
    if (huray_radius is None) != (huray_ratio is None):
        raise InputError("Huray's model needs both --huray-radius and --huray-ratio")
    if huray_ratio is not None and (bad := plausible.check("huray_ratio", huray_ratio)):
        raise InputError(f"--huray-ratio (ball surface per flat area): {bad}")
    if roughness is not None and huray_radius is not None:
        raise InputError("give --roughness or the Huray options, not both")
    rough = Roughness(rms=_len(roughness, "--roughness", units, "roughness") if roughness else None,
                      huray_radius=_len(huray_radius, "--huray-radius", units, "huray_radius")
                      if huray_radius else None,
                      huray_ratio=huray_ratio)
    if plot is not None:
        from sicheck.reports.atomic import refuse_inputs
        refuse_inputs(plot, [], "--plot")
    ln = _len(length, "--length", units, "length")
    xtalk = None
    if xo.spacing is not None:
        r, xtalk = line_crosstalk(xs, xo, ln, solver, solve_one)
    else:
        r = solve_one(xs, solver)
    d = line_dict(xs, r, ln, units)
    if xtalk is not None:
        d.update(xtalk)
    if f_hz is not None:
        d.update(line_loss(xs, r, solver, f_hz, rough))
        if solver == "formula" and xs.kind == "microstrip" and not xs.coupled and not xs.above:
            from sicheck.physics.cross_section import series_er
            from sicheck.physics.loss import kirschning_jansen_dispersion
            e_f = float(kirschning_jansen_dispersion(f_hz, xs.width, xs.h_below, series_er(xs.below), r.eps_eff))
            d["eps_eff_at_freq"] = e_f
            d["delay_ps_per_mm_at_freq"] = e_f**0.5 / 299792458.0 * 1e9
        if ln is not None:
            d["loss_db"] = d["loss_db_per_mm"] * ln * 1e3
    if plot is not None:
        from sicheck.reports.plots import plot_cross_section
        plot_cross_section(xs, r, plot)
        d["plot"] = str(plot)
    if as_json:
        sys.stdout.write(json.dumps(d) + "\n")
        for w in r.warnings + (xtalk or {}).get("crosstalk_warnings", []):
            print(f"warning: {w}", file=sys.stderr)
        return
    from rich.console import Console
    con = Console(highlight=False)
    con.print(f"[bold]{kind}[/bold] (bare numbers in {units}; results in mm, ps, ohm)  model: {r.model}")
    rows = [("Z0", f"{r.z0:.2f} ohm")]
    if xs.coupled:
        rows += [("Zdiff", f"{r.zdiff:.2f} ohm"), ("Zodd", f"{r.z_odd:.2f} ohm"), ("Zeven", f"{r.z_even:.2f} ohm"),
                 ("Zcommon", f"{r.zcommon:.2f} ohm"), ("eps_eff odd/even", f"{r.eps_odd:.4f} / {r.eps_even:.4f}")]
    else:
        rows += [("eps_eff", f"{r.eps_eff:.4f}")]
    rows += [("delay", f"{d['delay_ps_per_mm']:.4f} ps/mm"), ("L", f"{d['l_nh_per_mm']:.4f} nH/mm"),
             ("C", f"{d['c_pf_per_mm']:.5f} pF/mm")]
    if "uncertainty_pct" in d:
        rows.append(("uncertainty", f"{d['uncertainty_pct']:.3f} %"))
    if "delay_ps" in d:
        rows.append((f"delay over {d['length_mm']:g} mm", f"{d['delay_ps']:.1f} ps"))
    if "loss_db_per_mm" in d:
        rows += [(f"loss at {d['freq_ghz']:g} GHz", f"{d['loss_db_per_mm']:.5f} dB/mm (conductor "
                                                   f"{d['conductor_loss_db_per_mm']:.5f}, dielectric "
                                                   f"{d['dielectric_loss_db_per_mm']:.5f})")]
        if "loss_uncertainty_pct" in d:
            rows.append(("loss uncertainty", f"{d['loss_uncertainty_pct']:.2f} %"))
        if "loss_db" in d:
            rows.append(("loss over length", f"{d['loss_db']:.3f} dB"))
    if r.model.startswith("field"):
        rows.append(("closed form", f"{(r.formula_zdiff if xs.coupled else r.formula_z0):.2f} ohm "
                                    f"({'Zdiff' if xs.coupled else 'Z0'}, {solve_formula_name(xs)})"))
        rows.append(("solve time", f"{r.solve_s:.2f} s"))
    if xtalk is not None:
        rows += crosstalk_rows(xtalk)
    for k, v in rows:
        con.print(f"  {k:<18} {v}")
    if plot is not None:
        con.print(f"  plot: {plot}")
    for w in r.warnings + (xtalk or {}).get("crosstalk_warnings", []):
        con.print(f"  [yellow]warning:[/] {w}")
