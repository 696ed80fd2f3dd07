"""Reader messages: a located error for a wrong-typed layers key and a non-UTF-8 trace list;
unnamed dielectrics named by where they sit."""

from __future__ import annotations

import pytest

from conftest import FOUR_LAYER
from sicheck.errors import InputError
from sicheck.stackup import load_stackup
from sicheck.traces import read_traces


@pytest.mark.parametrize("value", ['"L1, GND, L3"', "3", "{ type = \"signal\" }"])
def test_layers_of_the_wrong_type_names_line_and_key(tmp_path, value):
    p = tmp_path / "s.toml"
    p.write_text(f'name = "x"\nunits = "mm"\nlayers = {value}\n', encoding="utf-8")
    with pytest.raises(InputError) as ei:
        load_stackup(p)
    e = ei.value
    assert e.key == "layers" and e.line == 3 and "[[layers]]" in e.message


def test_empty_layers_names_line_and_key(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text('units = "mm"\nlayers = []\n', encoding="utf-8")
    with pytest.raises(InputError) as ei:
        load_stackup(p)
    assert ei.value.key == "layers" and ei.value.line == 2


def test_latin1_trace_list_reports_the_line_and_how_to_resave(tmp_path):
    p = tmp_path / "t.csv"
    rows = ["net,layer,length,width", "A,L1,10mm,0.1mm", "B,L1,12mm,0.1mm", "M\u00dcNCHEN_CLK,L1,5mm,0.1mm"]
    p.write_bytes("\n".join(rows).encode("latin-1"))
    with pytest.raises(InputError) as ei:
        read_traces(p)
    e = ei.value
    assert e.line == 4 and "byte" not in str(e.line)
    assert "UTF-8" in e.message and "iconv" in e.message


def test_unnamed_dielectrics_are_named_by_place(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text(FOUR_LAYER, encoding="utf-8")
    st = load_stackup(p)
    names = [l.name for l in st.layers if l.type in ("dielectric", "mask")]
    # mask above L1; unnamed dielectric L1-GND; core GND-L3; dielectric L3-VCC
    assert names == ["mask over L1", "dielectric L1\u2013GND", "core GND\u2013L3", "dielectric L3\u2013VCC"]
    assert not any(n.startswith("dielectric ") and n.split()[-1].isdigit() for n in names)


def test_two_unnamed_layers_in_one_place_stay_distinct(tmp_path):
    text = FOUR_LAYER.replace("[[layers]]\ntype = \"plane\"\nname = \"GND\"",
                              "[[layers]]\ntype = \"dielectric\"\nkind = \"prepreg\"\nthickness = 0.05\ner = 4.0\n\n"
                              "[[layers]]\ntype = \"dielectric\"\nkind = \"prepreg\"\nthickness = 0.05\ner = 4.0\n\n"
                              "[[layers]]\ntype = \"plane\"\nname = \"GND\"", 1)
    p = tmp_path / "s.toml"
    p.write_text(text, encoding="utf-8")
    names = [l.name for l in load_stackup(p).layers]
    assert "prepreg L1\u2013GND #1" in names and "prepreg L1\u2013GND #2" in names
    assert len(set(names)) == len(names)


def test_named_dielectrics_keep_their_names(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text(FOUR_LAYER.replace('kind = "core"', 'kind = "core"\nname = "core 2"', 1), encoding="utf-8")
    assert "core 2" in [l.name for l in load_stackup(p).layers]


def test_inline_layers_that_are_not_tables_point_at_the_key(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text('name = "x"\n\nlayers = [1, 2]\n', encoding="utf-8")
    with pytest.raises(InputError) as ei:
        load_stackup(p)
    assert ei.value.line == 3 and "table" in ei.value.message
