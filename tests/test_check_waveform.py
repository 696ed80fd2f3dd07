"""waveform on hand-made tables: the simulation's results are written into the net table by hand."""

from __future__ import annotations

from check_tables import context, rules, segments

from sicheck.checks import by_id, run_checks


def _ctx(meets: bool, rs=None, simulated=True):
    rs = rs or rules()
    ctx = context(segments({"net": "CLK", "length_mm": 80.0}, {"net": "LED", "length_mm": 80.0}), rs)
    n = ctx.nets
    n["termination_part"] = ["33 ohm series" if simulated else "", ""]
    n["waveform_meets_limits"] = [meets, None]
    n["waveform_violations"] = ["overshoot 22 % > 15 %", ""]
    return ctx


def _run(ctx):
    return run_checks(ctx, [by_id("waveform")])


def test_waveform_passes_when_limits_met():
    assert [f.severity for f in _run(_ctx(True))] == ["info"]      # only the note that LED was not simulated


def test_waveform_fails_when_no_scheme_meets_limits():
    f = _run(_ctx(False))[0]
    assert f.severity == "warning" and f.net == "CLK" and "33 ohm series (overshoot 22 % > 15 %)" in f.message
    assert f.key == "waveform|CLK"


def test_waveform_off():
    assert _run(_ctx(False, rules(severity={"waveform": "off"}))) == []


def test_waveform_param_max_nets_in_note():
    note = _run(_ctx(True, rules(max_nets=1)))[0]
    assert "1 of 2 nets that need termination were not simulated" in note.message and "max_nets = 1" in note.message and note.limit == 1 and note.value == 1
