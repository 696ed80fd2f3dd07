"""[[match_group]] tables in rule files and the trace list's match_group column: values and error messages."""

from __future__ import annotations

import textwrap

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sicheck.errors import InputError
from sicheck.rules import load_rule_sets, load_rules

GROUP = """\
[[match_group]]
name = "DQ0"
match = ["DQ[0-7]", "DM0"]
max_skew = "10ps"
reference = "DQS0_P"
"""


def _write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return p


def test_match_group_is_read(tmp_path):
    (g,) = load_rules(_write(tmp_path, "r.toml", GROUP)).match_groups
    assert (g.name, g.match, g.reference) == ("DQ0", ("DQ[0-7]", "DM0"), "DQS0_P")
    assert g.max_skew == pytest.approx(10e-12) and g.origin.endswith("r.toml, line 1")
    assert g.matches("dq3") and g.matches("DM0") and not g.matches("DQ8")


def test_match_group_one_pattern_as_text_and_no_reference(tmp_path):
    (g,) = load_rules(_write(tmp_path, "r.toml", '[[match_group]]\nname = "A"\nmatch = "A*"\nmax_skew = "0.02ns"\n'
                             )).match_groups
    assert g.match == ("A*",) and g.reference is None and g.max_skew == pytest.approx(20e-12)


def test_match_groups_add_up_over_files_and_keep_other_settings(tmp_path):
    a = _write(tmp_path, "a.toml", GROUP + '[timing]\nmax_pair_skew = "3ps"\n')
    b = _write(tmp_path, "b.toml", '[[match_group]]\nname = "ADDR"\nmatch = ["A*"]\nmax_skew = "25ps"\n')
    rs = load_rule_sets([None, a, b])
    assert [g.name for g in rs.match_groups] == ["DQ0", "ADDR"] and rs.max_pair_skew == pytest.approx(3e-12)


def test_duplicate_group_names_both_lines(tmp_path):
    p = _write(tmp_path, "r.toml", GROUP + '\n[[match_group]]\nname = "dq0"\nmax_skew = "5ps"\n')
    with pytest.raises(InputError) as e:
        load_rules(p)
    assert e.value.line == 7 and f"{p}, line 1" in str(e.value) and "defined twice" in str(e.value)


def test_duplicate_group_across_files(tmp_path):
    a = _write(tmp_path, "a.toml", GROUP)
    b = _write(tmp_path, "b.toml", '\n\n[[match_group]]\nname = "DQ0"\nmax_skew = "5ps"\n')
    with pytest.raises(InputError, match=r"defined twice: at .*a.toml, line 1") as e:
        load_rule_sets([a, b])
    assert e.value.file == str(b) and e.value.line == 3


@pytest.mark.parametrize("body, key, line, words", [
    ('name = "G"\nmatch = ["A*"]\nmax_skew = 10\n', "max_skew", 6, "no unit"),
    ('name = "G"\nmax_skew = "10mm"\n', "max_skew", 5, "unknown time unit"),
    ('name = "G"\nmax_skew = "0ps"\n', "max_skew", 5, "out of range"),
    ('name = "G"\nmax_skew = "1us"\n', "max_skew", 5, "out of range"),
    ('name = "G"\nmatch = ["A*"]\n', "name", 4, "needs max_skew"),
    ('match = ["A*"]\nmax_skew = "5ps"\n', "name", 3, "needs a name"),
    ('name = "G"\nmax_skew = "5ps"\nmatch = [1, 2]\n', "match", 6, "list of net-name patterns"),
    ('name = "G"\nmax_skew = "5ps"\nreference = 3\n', "reference", 6, "net name"),
    ('name = "G"\nmax_skew = "5ps"\nskew = "5ps"\n', "skew", 6, "unknown key 'skew'"),
])
def test_bad_match_group_names_line_and_key(tmp_path, body, key, line, words):
    p = _write(tmp_path, "r.toml", '# groups\n\n[[match_group]]\n' + body)
    with pytest.raises(InputError) as e:
        load_rules(p)
    assert e.value.file == str(p) and e.value.key == key and e.value.line == line and words in str(e.value)


def test_match_group_as_plain_table_is_an_error(tmp_path):
    p = _write(tmp_path, "r.toml", '[match_group]\nname = "G"\n')
    with pytest.raises(InputError, match=r"\[\[match_group\]\] tables") as e:
        load_rules(p)
    assert e.value.line == 1


_name = st.text(st.characters(codec="utf-8", exclude_categories=("Cs", "Cc")), min_size=1, max_size=12).filter(
    lambda s: s.strip() != "")
_unit = st.sampled_from([("ps", 1e-12), ("ns", 1e-9), ("fs", 1e-15)])


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(names=st.lists(_name, min_size=1, max_size=4, unique_by=lambda s: s.strip().lower()),
       value=st.floats(0.5, 100.0), unit=_unit)
def test_any_group_names_and_skews_read_back(tmp_path, names, value, unit):
    # property: whatever the names (quotes, backslashes, non-ASCII), each group reads back as written
    import json
    def q(x):
        return json.dumps(x, ensure_ascii=False)
    text = "".join(f"[[match_group]]\nname = {q(n)}\nmatch = [{q(n + '*')}]\nmax_skew = \"{value!r}{unit[0]}\"\n\n"
                   for n in names)
    p = tmp_path / "g.toml"
    p.write_text(text, encoding="utf-8")
    rs = load_rules(p)
    assert [g.name for g in rs.match_groups] == [n.strip() for n in names]
    for k, g in enumerate(rs.match_groups):
        assert g.max_skew == pytest.approx(value * unit[1], rel=1e-12)
        assert g.origin == f"{p}, line {1 + 5 * k}"


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(key=st.from_regex(r"[a-z_]{1,12}", fullmatch=True).filter(
    lambda k: k not in ("name", "match", "max_skew", "reference")))
def test_any_unknown_group_key_is_named_with_its_line(tmp_path, key):
    p = tmp_path / "k.toml"
    p.write_text(f'[[match_group]]\nname = "G"\nmax_skew = "5ps"\n{key} = 1\n', encoding="utf-8")
    with pytest.raises(InputError) as e:
        load_rules(p)
    assert e.value.key == key and e.value.line == 4


def test_rules_command_lists_match_groups(run, tmp_path):
    p = _write(tmp_path, "r.toml", GROUP)
    code, out, _ = run("rules", "--rules", p)
    assert code == 0 and "match group DQ0: DQ[0-7] DM0, max_skew 10 ps, reference DQS0_P" in out
