"""model-accuracy and formula-vs-field on stand-in solver results (no solver runs)."""

from __future__ import annotations

from types import SimpleNamespace

from check_tables import findings, rules, segments


def _xs(coupled=False):
    return SimpleNamespace(width=0.15e-3, gap=0.2e-3 if coupled else None, coupled=coupled)


def _res(model="field2d", warnings=(), z0=50.0, formula_z0=50.5, zdiff=None, formula_zdiff=None):
    return SimpleNamespace(model=model, warnings=list(warnings), z0=z0, formula_z0=formula_z0, zdiff=zdiff,
                           formula_zdiff=formula_zdiff, uncertainty_pct=0.3, formula_warnings=[])


SEG = segments({"net": "A", "layer": "TOP", "row": 5}, {"net": "B", "layer": "TOP"})


def test_model_accuracy_passes_without_warnings():
    assert findings(SEG, rules(), "model-accuracy", [(_xs(), _res())]) == []


def test_model_accuracy_fails_with_model_warning():
    (f,) = findings(SEG, rules(), "model-accuracy", [(_xs(), _res("hammerstad-jensen", ["w/h 25 above 20"]))])
    assert f.net == "A, B" and f.row == 5 and f.message == "hammerstad-jensen: w/h 25 above 20"
    assert f.key == "model-accuracy|TOP|w0.15mm"


def test_model_accuracy_off():
    assert findings(SEG, rules(severity={"model-accuracy": "off"}), "model-accuracy",
                    [(_xs(), _res("x", ["bad"]))]) == []


def test_formula_vs_field_passes_within_limit():
    assert findings(SEG, rules(), "formula-vs-field", [(_xs(), _res(formula_z0=50.9))]) == []


def test_formula_vs_field_fails_beyond_limit():
    (f,) = findings(SEG, rules(), "formula-vs-field", [(_xs(), _res(formula_z0=53.0))])
    assert (f.value, f.limit, f.unit) == (6.0, 2.0, "%") and f.message.startswith("Z0: field solution 50.0 ohm")


def test_formula_vs_field_uses_zdiff_for_pairs():
    (f,) = findings(SEG, rules(), "formula-vs-field", [(_xs(True), _res(zdiff=100.0, formula_zdiff=110.0))])
    assert f.message.startswith("Zdiff") and f.key == "formula-vs-field|TOP|w0.15mmg0.2mm"


def test_formula_vs_field_passes_for_closed_form_results():
    assert findings(SEG, rules(), "formula-vs-field", [(_xs(), _res("hammerstad", formula_z0=60.0))]) == []


def test_formula_vs_field_off_and_param():
    cs = [(_xs(), _res(formula_z0=53.0))]
    assert findings(SEG, rules(severity={"formula-vs-field": "off"}), "formula-vs-field", cs) == []
    assert findings(SEG, rules(formula_field_pct=7.0), "formula-vs-field", cs) == []
