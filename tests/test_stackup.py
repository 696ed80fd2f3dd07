"""Stackup reading and the cross-section each signal layer gets."""

import pytest

from conftest import FOUR_LAYER
from sicheck.errors import InputError
from sicheck.stackup import load_stackup


def _load(tmp_path, text):
    p = tmp_path / "s.toml"
    p.write_text(text, encoding="utf-8")
    return p, load_stackup(p)


def test_four_layer_geometry(tmp_path):
    _, st = _load(tmp_path, FOUR_LAYER)
    g1 = st.geometry("L1")
    assert g1.kind == "microstrip" and g1.references == ("GND",)
    assert g1.thickness == pytest.approx(35e-6)        # 1 oz = 35 um (common practice)
    assert [s.thickness for s in g1.below] == [pytest.approx(0.2e-3)]
    assert g1.above[0].conformal and g1.above[0].er == 3.5
    g3 = st.geometry("l3")                              # names match case-insensitively
    assert g3.kind == "stripline" and g3.references == ("GND", "VCC")
    assert sum(s.thickness for s in g3.above) == pytest.approx(0.4e-3)
    assert sum(s.thickness for s in g3.below) == pytest.approx(0.4e-3)


def test_other_signal_layer_between_is_resin(tmp_path):
    text = FOUR_LAYER.replace('name = "L3"\ncopper = "0.5oz"',
                              'name = "L3"\ncopper = "0.5oz"\n\n[[layers]]\ntype = "dielectric"\nthickness = 0.1\n'
                              'er = 3.0\n\n[[layers]]\ntype = "signal"\nname = "L3B"\nthickness = "20um"')
    _, st = _load(tmp_path, text)
    g = st.geometry("L3")
    # below L3: 0.1 dielectric + 20 um of L3B (ignored copper, counted as resin) + 0.4
    assert sum(s.thickness for s in g.below) == pytest.approx(0.1e-3 + 20e-6 + 0.4e-3)


@pytest.mark.parametrize("change,words,line", [
    (('thickness = 0.2\ner = 4.3', 'thickess = 0.2\ner = 4.3'), "unknown key 'thickess'", 16),
    (('thickness = 0.2\ner = 4.3', 'thickness = 0.2'), "needs er", 14),
    (('thickness = 0.2\ner = 4.3', 'thickness = -0.2\ner = 4.3'), "positive", 16),
    (('units = "mm"', 'units = "furlong"'), "units must be", 2),
    (('thickness = 0.2\ner = 4.3', 'thickness = 0.2\ner = "high"'), "er must be", 17),
    (('copper = "1oz"\n\n[[layers]]\ntype = "dielectric"\nthickness = 0.2', 'copper = "heavy"\n\n[[layers]]\n'
      'type = "dielectric"\nthickness = 0.2'), "copper must be", 12),
])
def test_stackup_errors_name_file_and_line(tmp_path, change, words, line):
    text = FOUR_LAYER.replace(*change, 1)
    p = tmp_path / "s.toml"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as ei:
        load_stackup(p)
    assert words in str(ei.value)
    assert ei.value.file == str(p)
    assert ei.value.line == line


def test_toml_syntax_error(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text(FOUR_LAYER.replace('er = 3.5', 'er = = 3.5'), encoding="utf-8")
    with pytest.raises(InputError, match="TOML syntax") as ei:
        load_stackup(p)
    assert ei.value.line == 7


def test_signal_layer_without_reference(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text('units = "mm"\n[[layers]]\ntype = "signal"\nname = "A"\ncopper = "1oz"\n[[layers]]\n'
                 'type = "dielectric"\nthickness = 1\ner = 4\n[[layers]]\ntype = "signal"\nname = "B"\n'
                 'copper = "1oz"\n', encoding="utf-8")
    with pytest.raises(InputError, match="no reference plane") as ei:
        load_stackup(p)
    assert ei.value.line == 2


def test_bare_number_without_units(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text(FOUR_LAYER.replace('units = "mm"\n', ''), encoding="utf-8")
    with pytest.raises(InputError, match="no unit"):
        load_stackup(p)
