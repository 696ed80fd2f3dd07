"""`sicheck line ... --spacing S`: crosstalk to one neighbour of the same width.

The shell around sicheck.physics.crosstalk for one cross-section: option parsing,
the JSON keys and the printed rows. SI inside; mm, ps, pF, nH and % at the edge.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from sicheck.errors import InputError
from sicheck.physics import crosstalk as xt
from sicheck.physics.line_result import LineResult
from sicheck.units import UnitError, parse_quantity

RISE_RANGE = (1e-12, 1e-6)          # plausible 10-90 % rise times, s
SWING_RANGE = (1e-3, 100.0)         # V
DRIVER_RANGE = (0.0, 1e4)           # ohm


def option_quantity(value: str | None, option: str, dim: str, lo: float, hi: float,
                    default_unit: str | None = None, allow_zero: bool = False) -> float | None:
    if value is None:
        return None
    try:
        v = parse_quantity(value, dim, default_unit)
    except UnitError as e:
        raise InputError(f"{option}: {e}") from None
    if not ((v > lo or (allow_zero and v == lo)) and v <= hi):
        si = {"length": "m", "time": "s", "voltage": "V", "resistance": "ohm"}.get(dim, "")
        raise InputError(f"{option} {value} is outside the plausible range ({'from' if allow_zero else 'above'} "
                         f"{lo:g} to {hi:g} {si})")
    return v


def single_view(r: LineResult) -> LineResult:
    """The isolated line's result out of a coupled solve (the solver gives both).

    The loss derivative of a coupled solve belongs to the odd mode, so it is dropped: `--freq`
    then derives the isolated line's own."""
    return replace(r, z_even=None, z_odd=None, eps_even=None, eps_odd=None, c_matrix=None, l_matrix=None,
                   formula_zdiff=None, tand_even=None, tand_odd=None, dz_air_dn=None, loss_uncertainty_pct=None)


def coupling_of(r: LineResult) -> xt.Coupling:
    return xt.coupling_from_modes(r.z_even, r.z_odd, r.eps_even, r.eps_odd)


def crosstalk_dict(spacing: float, r: LineResult, length: float | None, rise: float | None,
                   swing: float | None, driver_ohm: float | None, formula: LineResult | None = None) -> dict:
    """JSON keys of `line --spacing` (documented in the README)."""
    c = coupling_of(r)
    kb, kf, dpm = float(c.kb), float(c.kf), float(c.delay_per_m)
    ls, lm, cs, cm = float(c.ls), float(c.lm), float(c.cs), float(c.cm)
    d = {"spacing_mm": spacing * 1e3, "kb": kb, "kf": kf, "kf_ps_per_mm": kf * dpm * 1e9,
         "lm_over_ls": lm / ls, "cm_over_cs": cm / cs, "next_saturated_pct": kb * 100.0,
         "coupled_z_ohm": float(c.z_line), "coupled_delay_ps_per_mm": dpm * 1e9,
         "l_matrix_nh_per_mm": [[ls * 1e6, lm * 1e6], [lm * 1e6, ls * 1e6]],
         "c_matrix_pf_per_mm": [[cs * 1e9, -cm * 1e9], [-cm * 1e9, cs * 1e9]],
         "crosstalk_warnings": xt.validity_warnings(kb)}
    if formula is not None and formula.z_odd is not None:
        d["formula_kb"] = float(coupling_of(formula).kb)
        d["formula_kf"] = float(coupling_of(formula).kf)
    if rise is not None:
        d["rise_ps"] = rise * 1e12
        d["saturation_length_mm"] = float(xt.saturation_length(rise, dpm)) * 1e3
    if rise is not None and length is not None:
        d["coupled_length_mm"] = length * 1e3
        d["next_pct"] = float(xt.next_fraction(kb, length, dpm, rise)) * 100.0
        d["fext_pct"] = float(xt.fext_fraction(kf, length, dpm, rise)) * 100.0
        if swing is not None:
            step = float(xt.launched_step(swing, c.z_line, driver_ohm))
            d.update(swing_v=swing, driver_ohm=driver_ohm, launched_v=step,
                     next_v=d["next_pct"] / 100.0 * step, fext_v=d["fext_pct"] / 100.0 * step)
    return d


def crosstalk_rows(d: dict) -> list[tuple[str, str]]:
    rows = [("spacing", f"{d['spacing_mm']:g} mm (edge to edge, neighbour of the same width)"),
            ("Kb (near end)", f"{d['kb']:.5f}  (Lm/Ls {d['lm_over_ls']:.5f}, Cm/Cs {d['cm_over_cs']:.5f})"),
            ("kf (far end)", f"{d['kf']:+.5f}  ({d['kf_ps_per_mm']:+.5f} ps/mm: FEXT = kf x TD / ramp)"),
            ("NEXT saturated", f"{d['next_saturated_pct']:.3f} % of the aggressor's step")]
    if "formula_kb" in d:
        rows.append(("closed-form Kb/kf", f"{d['formula_kb']:.5f} / {d['formula_kf']:+.5f}"))
    if "saturation_length_mm" in d:
        rows.append(("saturates from", f"{d['saturation_length_mm']:.2f} mm coupled (2 TD = Tr/0.8)"))
    if "next_pct" in d:
        rows.append((f"NEXT over {d['coupled_length_mm']:g} mm", f"{d['next_pct']:.3f} %"))
        rows.append((f"FEXT over {d['coupled_length_mm']:g} mm", f"{d['fext_pct']:+.3f} %"))
    if "real_ends" in d:
        e = d["real_ends"]
        rows.append(("with real ends", f"near {e['near_peak_mv']:+.1f} mV, far {e['far_peak_mv']:+.1f} mV (victim "
                                       f"driver {e['victim_driver_ohm']:g} ohm, receivers {e['load_pf']:g} pF)"))
    if "next_v" in d:
        rows.append(("in volts", f"NEXT {d['next_v'] * 1e3:.1f} mV, FEXT {d['fext_v'] * 1e3:+.1f} mV of a "
                                 f"{d['launched_v']:.3f} V step"))
    L, C = d["l_matrix_nh_per_mm"], d["c_matrix_pf_per_mm"]
    rows.append(("L matrix", f"[[{L[0][0]:.5f}, {L[0][1]:.5f}], [{L[1][0]:.5f}, {L[1][1]:.5f}]] nH/mm"))
    rows.append(("C matrix", f"[[{C[0][0]:.6f}, {C[0][1]:.6f}], [{C[1][0]:.6f}, {C[1][1]:.6f}]] pF/mm"))
    if "next_pct" not in d:
        rows.append(("noise", "give --length and --rise for the near- and far-end noise of a coupled run"))
    return rows


@dataclass(frozen=True)
class LineXtOptions:
    """`line`'s crosstalk options in SI (None: not given)."""

    spacing: float | None
    rise: float | None = None
    swing: float | None = None
    driver_ohm: float | None = None
    victim_ohm: float | None = None
    load_pf: float | None = None


def parse_line_options(spacing, rise, swing, driver_ohm, units: str, victim_ohm=None, load_pf=None) -> LineXtOptions:
    """The crosstalk options from the command line, or InputError."""
    s = option_quantity(spacing, "--spacing", "length", 10e-6, 25e-3, units, allow_zero=True)
    tr = option_quantity(rise, "--rise", "time", *RISE_RANGE)
    v = option_quantity(swing, "--swing", "voltage", *SWING_RANGE, default_unit="V")
    rd = option_quantity(driver_ohm, "--driver-ohm", "resistance", *DRIVER_RANGE, default_unit="ohm",
                         allow_zero=True)
    if s is None and (tr is not None or v is not None or rd is not None):
        raise InputError("--rise, --swing and --driver-ohm go with --spacing (crosstalk to a neighbour)")
    if (v is None) != (rd is None):
        raise InputError("noise in volts needs both --swing and --driver-ohm")
    rv = option_quantity(victim_ohm, "--victim-ohm", "resistance", *DRIVER_RANGE, default_unit="ohm",
                         allow_zero=True)
    cl = option_quantity(load_pf, "--load-pf", "capacitance", 0.0, 1e-9, default_unit="pF", allow_zero=True)
    if (rv is not None or cl is not None) and (cl is None or v is None or tr is None):
        raise InputError("the waveforms with real ends need --load-pf with --spacing, --length, --rise, --swing "
                         "and --driver-ohm (--victim-ohm: default --driver-ohm)")
    return LineXtOptions(s, tr, v, rd, rd if rv is None and cl is not None else rv, cl)


def real_ends(d: dict, r: LineResult, length: float, o: LineXtOptions) -> dict:
    """Victim noise peaks with real ends (sicheck.physics.coupled_wave): the aggressor's driver, the victim's
    quiet driver at the near end, receivers of ``load_pf`` at both far ends."""
    from sicheck.physics.coupled_wave import End, coupled_pair_waves
    c = coupling_of(r)
    w = coupled_pair_waves(float(c.ls), float(c.lm), float(c.cs), float(c.cm), length, o.rise, o.swing, o.driver_ohm,
                           End(r=o.victim_ohm), End(c=o.load_pf), End(c=o.load_pf))
    near = float(w.victim_near[np.argmax(np.abs(w.victim_near))])
    far = float(w.victim_far[np.argmax(np.abs(w.victim_far))])
    return {"victim_driver_ohm": o.victim_ohm, "load_pf": o.load_pf * 1e12, "near_peak_mv": near * 1e3,
            "far_peak_mv": far * 1e3}


def line_crosstalk(xs, o: LineXtOptions, length, solver: str, solve_one):
    """Solve the victim beside its aggressor: (isolated-line result, crosstalk dict)."""
    spacing, rise, swing, driver_ohm = o.spacing, o.rise, o.swing, o.driver_ohm
    if xs.coupled:
        raise InputError("give --gap (a differential pair) or --spacing (crosstalk to a neighbour), not both")
    r = solve_one(replace(xs, gap=spacing), solver)
    formula = None
    if solver == "field":
        from sicheck.physics.formula import solve_formula
        formula = solve_formula([replace(xs, gap=spacing)])[0]
    d = crosstalk_dict(spacing, r, length, rise, swing, driver_ohm, formula)
    if not np.isfinite(d["kb"]):
        raise InputError("the coupled cross-section could not be solved at this spacing")
    if o.load_pf is not None:
        if length is None:
            raise InputError("the waveforms with real ends need --length (the coupled length)")
        d["real_ends"] = real_ends(d, r, length, o)
    # the closed forms name the single line's own model; the field solver solved it alongside the pair
    return (solve_one(xs, solver) if solver == "formula" else single_view(r)), d
