"""Every physical input has a plausible range (sicheck/plausible.py) and a located error outside it."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import FOUR_LAYER
from sicheck import plausible
from sicheck.errors import InputError
from sicheck.stackup import load_stackup


def _load(tmp_path, text):
    p = tmp_path / "s.toml"
    p.write_text(text, encoding="utf-8")
    return load_stackup(p), p


def _line_of(text: str, needle: str) -> int:
    return next(i + 1 for i, l in enumerate(text.splitlines()) if needle in l)


@pytest.mark.parametrize("old,new,key,words", [
    ('copper = "1oz"', 'copper = "100oz"', "copper", "implausibly large"),     # 3.5 mm of copper
    ('copper = "1oz"', 'copper = "0oz"', "copper", "positive"),
    ('copper = "1oz"', 'thickness = "3.5mm"', "thickness", "implausibly large"),
    ("er = 4.3", "er = 30", "er", "implausibly large"),
    ("er = 4.3", "er = 0.5", "er", "implausibly small"),
    ("er = 4.3", "er = 4.3\nloss_tangent = 0.5", "loss_tangent", "implausibly large"),
    ("thickness = 0.2", "thickness = 12", "thickness", "implausibly large"),
    ('thickness = "25um"', 'thickness = "1mm"', "thickness", "implausibly large"),   # a 1 mm solder mask
])
def test_stackup_values_outside_their_range_name_key_and_line(tmp_path, old, new, key, words):
    text = FOUR_LAYER.replace(old, new, 1)
    with pytest.raises(InputError) as ei:
        _load(tmp_path, text)
    e = ei.value
    assert e.key == key and words in e.message
    assert e.line == _line_of(text, new.splitlines()[-1])


def test_roughness_range(tmp_path):
    text = FOUR_LAYER.replace('name = "L1"\n', 'name = "L1"\nroughness = "30um"\n', 1)
    with pytest.raises(InputError) as ei:
        _load(tmp_path, text)
    assert ei.value.key == "roughness" and ei.value.line == _line_of(text, "roughness")


@pytest.mark.parametrize("cell,column,words", [
    ("0.5ps", "rise_time", "implausibly small"),
    ("-1ns", "rise_time", "positive"),
    ("20ns", "rise_time", None),
    ("5m", "length", "implausibly large"),
    ("5um", "width", "implausibly small"),
])
def test_trace_list_ranges_name_row_and_column(run, board, cell, column, words):
    cols = {"length": "10mm", "width": "0.15mm", "rise_time": "100ps"}
    cols[column] = cell
    tr, stp = board(f"net,layer,length,width,rise_time\nA,L1,1mm,0.15mm,1ns\nB,L1,{cols['length']},"
                    f"{cols['width']},{cols['rise_time']}\n")
    code, out, err = run("review", tr, "--stackup", stp, "--solver", "formula")
    if words is None:
        assert code in (0, 1), err
        return
    assert code == 2 and "Traceback" not in err
    assert "row 3" in err and f"column '{column}'" in err and words in err


def test_driver_and_load_ranges(run, board):
    tr, stp = board("net,layer,length,width,rise_time,driver_ohm,load_pf\nA,L1,10mm,0.15mm,1ns,25,2000\n")
    code, _, err = run("review", tr, "--stackup", stp, "--solver", "formula")
    assert code == 2 and "row 2" in err and "column 'load_pf'" in err


@pytest.mark.parametrize("args,words", [
    (["--thickness", "3.5mm"], "--thickness"),
    (["--er", "45"], "--er"),
    (["--loss-tangent", "0.4"], "--loss-tangent"),
    (["--gap", "1um"], "--gap"),
])
def test_line_options_have_ranges(run, args, words):
    base = {"--width": "0.2", "--thickness": "0.035", "--er": "4", "--height": "0.1"}
    extra = []
    for k, v in zip(args[::2], args[1::2]):
        if k in base:
            base[k] = v
        else:
            extra += [k, v]
    cmd = ["line", "microstrip"] + [x for kv in base.items() for x in kv] + extra
    code, _, err = run(*cmd)
    assert code == 2 and words in err and "plausible" in err


@given(q=st.sampled_from(sorted(plausible.RANGES)), x=st.floats(allow_nan=True, allow_infinity=True))
@settings(max_examples=300, deadline=None)
def test_range_check_accepts_exactly_its_interval(q, x):
    r = plausible.RANGES[q]
    inside = (x > r.lo if r.lo_open else x >= r.lo) and x <= r.hi
    msg = plausible.check(q, x)
    assert (msg is None) == inside
    if msg is not None:
        assert isinstance(msg, str) and msg


def test_readme_range_table_matches_the_code():
    from pathlib import Path
    readme = (Path(__file__).parent.parent / "README.md").read_text(encoding="utf-8")
    for q, lo, hi, why in plausible.describe():
        assert f"| {q} | {lo} | {hi} | {why} |" in readme, q
