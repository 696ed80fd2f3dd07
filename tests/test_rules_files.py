"""Rule files: layering of several sets, duplicate classes, wrong types, the old class name."""

from __future__ import annotations

import textwrap

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sicheck.errors import InputError
from sicheck.rules import UNCLASSIFIED, load_rule_sets, load_rules


def _write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return p


def test_later_file_overrides_only_what_it_sets(tmp_path):
    a = _write(tmp_path, "a.toml", """
        [impedance]
        tolerance_pct = 5
        [severity]
        z-step = "off"
        [columns]
        "Net Name" = "net"
        [[net_class]]
        name = "CLK"
        match = ["CLK*"]
        z0 = 50
        """)
    b = _write(tmp_path, "b.toml", """
        [impedance]
        z_step_pct = 20
        [severity]
        no-target = "warning"
        """)
    rs = load_rule_sets([a, b])
    assert rs.tolerance_pct == 5 and rs.z_step_pct == 20
    assert rs.severity["z-step"] == "off" and rs.severity["no-target"] == "warning"
    assert rs.columns == {"Net Name": "net"} and [c.name for c in rs.classes] == ["CLK"]
    assert rs.sources == (str(a), str(b))
    # the same two files as a folder give the same rules
    folder = load_rules(tmp_path)
    assert (folder.settings, folder.severity, folder.columns) == (rs.settings, rs.severity, rs.columns)


def test_default_set_then_user_file_keeps_default_settings(tmp_path):
    b = _write(tmp_path, "b.toml", '[fabrication]\nmin_feature = "0.1mm"\n')
    rs = load_rule_sets([None, b])
    assert rs.min_feature == pytest.approx(1e-4) and rs.tolerance_pct == 10 and rs.sources[0].endswith("default.toml")


def test_duplicate_class_in_one_file_names_both_lines(tmp_path):
    p = _write(tmp_path, "r.toml", """\
        [[net_class]]
        name = "CLK"

        [[net_class]]
        name = "clk"
        """)
    with pytest.raises(InputError) as e:
        load_rules(p)
    assert e.value.line == 4 and f"{p}, line 1" in str(e.value) and "defined twice" in str(e.value)


def test_duplicate_class_across_files(tmp_path):
    a = _write(tmp_path, "a.toml", '[[net_class]]\nname = "CLK"\n')
    b = _write(tmp_path, "b.toml", '\n[[net_class]]\nname = "CLK"\n')
    with pytest.raises(InputError, match=r"defined twice: at .*a.toml, line 1") as e:
        load_rule_sets([a, b])
    assert e.value.file == str(b) and e.value.line == 2


@pytest.mark.parametrize("text, key, line", [
    ('severity = "error"\n', "severity", 1),
    ('name = "x"\nimpedance = 3\n', "impedance", 2),
    ('columns = "net"\n', "columns", 1),
    ('[severity]\nz-step = 3\n', "z-step", 2),
    ('[impedance]\ntolerance_pct = "ten"\n', "tolerance_pct", 2),
    ('[fabrication]\nmin_feature = [1]\n', "min_feature", 2),
    ('[waveform]\nmax_nets = 2.5\n', "max_nets", 2),
    ('[[net_class]]\nname = "A"\nmatch = 3\n', "match", 3),
    ('[[net_class]]\nname = "A"\nz0 = "50"\n', "z0", 3),
    ('[[net_class]]\nname = "A"\nrise_time = [1]\n', "rise_time", 3),
    ('[[net_class]]\nname = 5\n', "name", 2),
    ('net_class = [1, 2]\n', "net_class", None),
    ('name = 3\n', "name", 1),
])
def test_wrong_types_are_clean_errors_with_line_and_key(tmp_path, text, key, line):
    p = _write(tmp_path, "r.toml", text)
    with pytest.raises(InputError) as e:
        load_rules(p)
    assert e.value.key == key and e.value.file == str(p)
    if line is not None:
        assert e.value.line == line


VALUES = st.one_of(st.integers(-5, 10**6), st.floats(allow_nan=True), st.text(max_size=6), st.booleans(),
                   st.lists(st.integers(), max_size=2), st.dictionaries(st.text(max_size=3), st.integers(), max_size=2))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(section=st.sampled_from(["top", "impedance", "electrical", "fabrication", "waveform", "severity", "columns",
                                "net_class"]),
       key=st.sampled_from(["tolerance_pct", "z_step_pct", "min_feature", "max_nets", "z-step", "z0", "name",
                            "match", "rise_time", "freq", "swing", "Net Name", "severity", "impedance", "net_class",
                            "columns", "waveform"]),
       value=VALUES)
def test_any_value_in_any_table_is_accepted_or_a_clean_error(tmp_path, section, key, value):
    def lit(v):     # TOML written by hand: no TOML writer among the dependencies
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"').encode("unicode_escape").decode() + '"'
        if isinstance(v, float):
            return "nan" if v != v else ("inf" if v == float("inf") else "-inf" if v == float("-inf") else repr(v))
        if isinstance(v, list):
            return "[" + ", ".join(lit(x) for x in v) + "]"
        if isinstance(v, dict):
            return "{" + ", ".join(f"{lit(k)} = {lit(x)}" for k, x in v.items()) + "}"
        return str(v)
    if section == "top":         # e.g. severity = "error" where a table belongs
        head = ""
    elif section == "net_class":
        head = "[[net_class]]\n" + ('name = "K"\n' if key != "name" else "")
    else:
        head = f"[{section}]\n"
    p = tmp_path / "h.toml"
    p.write_text(f'{head}"{key}" = {lit(value)}\n', encoding="utf-8")
    try:
        load_rules(p)
    except InputError:
        pass


def test_old_class_name_default_is_accepted_with_a_note(tmp_path):
    p = _write(tmp_path, "r.toml", '[[net_class]]\nname = "default"\nrise_time = "2ns"\n')
    rs = load_rules(p)
    assert [c.name for c in rs.classes] == [UNCLASSIFIED]
    assert rs.class_for("ANY_NET").rise_time == pytest.approx(2e-9)
    assert rs.class_for("X", explicit="default").name == UNCLASSIFIED
    (where, note), = rs.notes
    assert where == f"{p}, line 1" and "now called 'unclassified'" in note


def test_unmatched_nets_are_unclassified_without_any_file():
    from sicheck.rules import Rules
    assert Rules().class_for("FOO").name == UNCLASSIFIED


def test_every_section_parameter_rejects_bad_values_by_its_declaration(tmp_path):
    from sicheck.checks import section_params
    for sec, params in section_params().items():
        for name in params:
            for bad in ("-1e12", '"abc"', "true", "[1]"):
                p = _write(tmp_path, "r.toml", f"[{sec}]\n{name} = {bad}\n")
                with pytest.raises(InputError) as e:
                    load_rules(p)
                assert (e.value.key, e.value.line) == (name, 2), (sec, name, bad)


def test_rules_and_classes_take_parameters_by_name():
    from dataclasses import replace

    from sicheck.rules import NetClass, Rules
    r = replace(Rules(tolerance_pct=5.0), max_nets=3)
    assert (r.tolerance_pct, r.max_nets, r.swing) == (5.0, 3, 3.3)
    c = replace(NetClass("CLK", match=("CLK*",), z0=50.0), tolerance_pct=7.0)
    assert (c.z0, c.tolerance_pct, c.zdiff, c.match) == (50.0, 7.0, None, ("CLK*",))
    assert r.value("tolerance_pct", c) == 7.0 and r.value("tolerance_pct") == 5.0
    with pytest.raises(TypeError):
        Rules(no_such_setting=1)
