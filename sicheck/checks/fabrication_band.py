"""The fabrication band: impedance targets held against the fabricator's tolerances, not only the nominal.

The tolerances are settings of the rules' [fabrication] table; the review solves the band of every
unique cross-section with them (sicheck.physics.fab_band) and gives each segment z_min_ohm,
z_max_ohm and z_rss_ohm (zdiff_* for pairs). Defaults are common practice, from memory: typical
values fabricators quote for controlled-impedance boards and the IPC-6012 / IPC-2141A era habit of
a +/-10 % impedance window. The fabricator's own figures are better: set them.
"""

from __future__ import annotations

import numpy as np

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label
from sicheck.checks.impedance import IGNORE_SHORT, TOLERANCE, Z0, ZDIFF, _short_mask
from sicheck.physics.fab_band import Tolerances

WIDTH_TOL = Param("width_tol", "length", 12.7e-6, "mm", "+/- etched trace width (common practice for inner "
                  "layers, 0.5 mil; plated outer layers are often 0.025 mm; from memory). Plausible: 0 to 0.1 mm",
                  section="fabrication", lo=0.0, lo_open=False, hi=0.1e-3, scale=1e3)
DIELECTRIC_TOL = Param("dielectric_tol_pct", "number", 10.0, "%", "+/- thickness of each laminate (core and "
                       "pressed prepreg; common practice, from memory). Plausible: 0 to 50 %",
                       section="fabrication", lo=0.0, lo_open=False, hi=50.0)
ER_TOL = Param("er_tol_pct", "number", 5.0, "%", "+/- relative permittivity of each laminate (resin content "
               "varies; common practice, from memory). Plausible: 0 to 50 %",
               section="fabrication", lo=0.0, lo_open=False, hi=50.0)
COPPER_TOL = Param("copper_tol_pct", "number", 10.0, "%", "+/- trace copper thickness (foil weight and "
                   "plating; common practice, from memory). Plausible: 0 to 50 %",
                   section="fabrication", lo=0.0, lo_open=False, hi=50.0)
BAND_PARAMS = (WIDTH_TOL, DIELECTRIC_TOL, ER_TOL, COPPER_TOL)


def tolerances(rules) -> Tolerances:
    """The fabrication tolerances in effect (the rules' [fabrication] table, else the defaults)."""
    def v(p: Param) -> float:
        x = rules.value(p.name) if rules is not None else None
        return float(p.default if x is None else x)
    return Tolerances(width=v(WIDTH_TOL), dielectric_pct=v(DIELECTRIC_TOL), er_pct=v(ER_TOL),
                      copper_pct=v(COPPER_TOL))


def describe(t: Tolerances) -> str:
    return (f"width +/-{t.width * 1e3:.4g} mm, dielectric +/-{t.dielectric_pct:g} %, er +/-{t.er_pct:g} %, "
            f"copper +/-{t.copper_pct:g} %")


def _band_check(ctx, chk, diff: bool):
    seg = ctx.segments
    lo_col, hi_col, rss_col = (("zdiff_min_ohm", "zdiff_max_ohm", "zdiff_rss_ohm") if diff else
                               ("z_min_ohm", "z_max_ohm", "z_rss_ohm"))
    if lo_col not in seg.columns:
        return
    is_pair = (seg["pair"] != "").to_numpy()
    here = is_pair if diff else ~is_pair
    name, q = ("zdiff", "Zdiff") if diff else ("z0", "Z0")
    cls = seg["net_class"].to_numpy()
    target = ctx.param_per_row(name, cls)
    tol = ctx.param_per_row("tolerance_pct", cls)
    z = seg[name].to_numpy(float)
    zlo, zhi, rss = (seg[c].to_numpy(float) for c in (lo_col, hi_col, rss_col))
    with np.errstate(invalid="ignore"):
        w_lo, w_hi = target * (1 - tol / 100.0), target * (1 + tol / 100.0)
        inside = np.abs(z - target) <= tol / 100.0 * target
        out = (zlo < w_lo) | (zhi > w_hi)
    flag = here & inside & out & ~_short_mask(seg, ctx.param("ignore_shorter_than_tr"))
    # one finding per class target and cross-section (layer, width, gap): the fix is the same for its nets
    groups: dict[tuple, list[int]] = {}
    for i in np.nonzero(flag)[0]:
        geom = f"w {seg['width'].iat[i] * 1e3:.3f} mm" + (f", gap {seg['gap'].iat[i] * 1e3:.3f} mm" if diff else "")
        groups.setdefault((cls[i], seg["layer"].iat[i], geom), []).append(i)
    for (cname, layer, geom), idx in groups.items():
        names: dict[str, str] = {}         # a pair listed on both legs: once
        for j in idx:
            net, partner = seg["net"].iat[j], seg["pair"].iat[j]
            names.setdefault(pair_id(net, partner) if diff else net, pair_label(net, partner) if diff else net)
        labels = list(names.values())
        i = idx[0]
        shown = ", ".join(labels[:4]) + (f" and {len(labels) - 4} more" if len(labels) > 4 else "")
        # the edge that leaves the window by more
        below, above = w_lo[i] - zlo[i], zhi[i] - w_hi[i]
        value, limit = (zlo[i], w_lo[i]) if below >= above else (zhi[i], w_hi[i])
        yield chk.finding(
            shown, layer,
            f"{q} band {zlo[i]:.1f}-{zhi[i]:.1f} ohm on {layer} ({geom}; worst case of the [fabrication] "
            f"tolerances, +/-{rss[i]:.1f} ohm if independent) leaves the {cname} window {w_lo[i]:.1f}-"
            f"{w_hi[i]:.1f} ohm ({target[i]:g} ohm +/-{tol[i]:g} %), though the nominal {z[i]:.1f} ohm is inside; "
            f"{len(labels)} {'pair' if diff else 'net'}(s)",
            row=int(seg["row"].iat[i]), key=make_key(chk.id, cname or "-", layer, geom.replace(" ", "")),
            value=float(value), limit=float(limit), unit="ohm")


@check("tolerance-band", "warning", params=(Z0, ZDIFF, TOLERANCE, IGNORE_SHORT) + BAND_PARAMS)
def tolerance_band(ctx, chk):
    """Impedance on target at nominal whose fabrication band (worst case of the tolerances) leaves the window.

    What it checks: every segment whose class sets `z0` (`zdiff` for pairs) and whose nominal impedance
    is within target +/- `tolerance_pct`: the worst-case band from the [fabrication] tolerances
    (`width_tol`, `dielectric_tol_pct`, `er_tol_pct`, `copper_tol_pct`) must lie inside too. One
    finding per class and cross-section (layer, width, gap), naming its nets; segments shorter than
    `ignore_shorter_than_tr` x Tr are skipped.
    Why it matters: the board is built somewhere in that band; a line that is only right at nominal
    fails the impedance coupon on some panels.
    How to fix: centre the nominal on the target (`sicheck plan` gives the width and its band), ask the
    fabricator for tighter tolerances (or an impedance-controlled build where they tune the width),
    or widen the class's `tolerance_pct` if the design allows.
    """
    yield from _band_check(ctx, chk, diff=False)
    yield from _band_check(ctx, chk, diff=True)
