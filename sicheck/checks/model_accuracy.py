"""Model accuracy: where a computed impedance is less certain than it looks."""

from __future__ import annotations

from sicheck.checks.engine import Param, check, make_key

FORMULA_FIELD = Param("formula_field_pct", "number", 2.0, "%", "closed form vs field solution difference "
                      "that is reported", section="impedance", hi=1e6)


def _places(ctx, wanted):
    """For each wanted cross-section index: (cross-section, result, nets label, layer, first row, geometry)."""
    seg = ctx.segments
    at = seg.groupby("xs", sort=False).indices          # xs -> positions, one pass over the table
    for i in wanted:
        x, res = ctx.cross_sections[i]
        here = at.get(i)
        if here is None or not len(here):
            continue
        nets_here = seg["net"].iloc[here].unique()
        label = ", ".join(nets_here[:3]) + (f" and {len(nets_here) - 3} more" if len(nets_here) > 3 else "")
        first = here[0]
        geom = f"w{x.width * 1e3:.4g}mm" + (f"g{x.gap * 1e3:.4g}mm" if x.coupled else "")
        yield x, res, label, seg["layer"].iat[first], int(seg["row"].iat[first]), geom


@check("model-accuracy", "warning")
def model_accuracy(ctx, chk):
    """A closed-form model used outside its stated accuracy range, or a field solution whose uncertainty is above its target.

    What it checks: the warnings each impedance model attaches to its result (validity ranges of the
    published closed forms; the field solver's own error estimate), once per unique cross-section.
    Why it matters: outside its range a closed form can be several percent off with nothing else to
    show it; the impedance findings are only as good as the number they compare.
    How to fix: review with `--solver field`, or confirm the value with the fabricator's impedance
    report.
    """
    wanted = [i for i, (_, res) in enumerate(ctx.cross_sections) if res.warnings]
    for x, res, label, layer, row, geom in _places(ctx, wanted):
        for w in res.warnings:
            yield chk.finding(label, layer, f"{res.model}: {w}", row=row, key=make_key(chk.id, layer, geom))


@check("formula-vs-field", "warning", params=(FORMULA_FIELD,))
def formula_vs_field(ctx, chk):
    """Closed form and field solution differ by more than formula_field_pct.

    What it checks: for every field-solved cross-section, the closed-form Z0 (Zdiff for pairs) computed
    beside it.
    Why it matters: a large difference means the closed form is outside its accuracy here; a reader
    comparing against a closed-form calculator will see a different number, and should know why.
    How to fix: nothing on the board; the field value is the one reported. Keep it in mind when the
    design was sized with a closed form.
    """
    limit = ctx.param("formula_field_pct")
    diffs = {}
    for i, (x, res) in enumerate(ctx.cross_sections):
        z_ref = res.zdiff if x.coupled else res.z0
        z_f = res.formula_zdiff if x.coupled else res.formula_z0
        if res.model.startswith("field") and z_f is not None and z_ref:
            diff = (z_f - z_ref) / z_ref * 100.0
            if abs(diff) > limit:
                diffs[i] = diff
    for x, res, label, layer, row, geom in _places(ctx, list(diffs)):
        what = "Zdiff" if x.coupled else "Z0"
        z_ref = res.zdiff if x.coupled else res.z0
        z_f = res.formula_zdiff if x.coupled else res.formula_z0
        diff = (z_f - z_ref) / z_ref * 100.0
        why = "; ".join(res.formula_warnings) or "closed-form approximation"
        yield chk.finding(label, layer,
                          f"{what}: field solution {z_ref:.1f} ohm (+/-{res.uncertainty_pct:.2f} %) vs closed form "
                          f"{z_f:.1f} ohm ({diff:+.1f} %); the field value is reported ({why})",
                          row=row, key=make_key(chk.id, layer, geom), value=float(diff), limit=float(limit), unit="%")
