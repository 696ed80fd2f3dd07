"""The check registry keeps documentation, default rules, README, tests and the CLI structure in step."""

from __future__ import annotations

import ast
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

from sicheck.checks import CHECKS, DOC_PARTS, SEVERITIES, all_params, run_checks, section_params
from sicheck.errors import InputError

ROOT = Path(__file__).resolve().parents[1]
DEFAULT = tomllib.loads((ROOT / "rules" / "default.toml").read_text(encoding="utf-8"))


def test_every_check_is_documented():
    for c in CHECKS:
        assert re.fullmatch(r"[a-z][a-z0-9-]*", c.id), c.id
        assert c.summary, c.id
        for part in DOC_PARTS:
            assert len(c.section(part)) > 20, f"{c.id}: docstring lacks '{part}:'"
        for p in c.params:
            assert p.help, f"{c.id}: parameter {p.name} has no help"


def test_every_check_has_its_severity_in_default_rules():
    assert set(DEFAULT["severity"]) == {c.id for c in CHECKS}
    for c in CHECKS:
        assert DEFAULT["severity"][c.id] == c.severity and c.severity in SEVERITIES


def test_default_rules_state_every_section_parameter_with_its_declared_default():
    from sicheck.rules import load_rules
    rs = load_rules(None)
    for sec, params in section_params().items():
        # a parameter whose default is 'unset' (None) cannot be written in TOML: it is stated as a comment
        assert set(DEFAULT.get(sec, {})) == {n for n, p in params.items() if p.default is not None}, sec
        for name, p in params.items():
            if p.default is None:
                assert rs.value(name) is None, name
            else:
                assert rs.value(name) == pytest.approx(p.default, rel=1e-4), name


def _test_names() -> set[str]:
    names = set()
    for path in (ROOT / "tests").glob("test_check_*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.FunctionDef) and node.name.startswith("test_"):
                names.add(node.name)
    return names


def test_every_check_has_a_passing_and_a_failing_test():
    names = _test_names()
    for c in CHECKS:
        stem = "test_" + c.id.replace("-", "_")
        for kind in ("passes", "fails", "off"):
            assert any(n.startswith(f"{stem}_{kind}") for n in names), f"no {stem}_{kind}* test"


def test_parameters_are_declared_once():
    params = all_params()
    assert len(params) == len({p.name for p in params.values()})


def test_readme_rule_table_matches_registry():
    sys.path.insert(0, str(ROOT / "tools"))
    try:
        import rule_table
    finally:
        sys.path.pop(0)
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    assert rule_table.rewrite(text) == text, "README rule table is stale: run python tools/rule_table.py"


def test_engine_applies_severity_off_and_unique_keys():
    from sicheck.checks.engine import Check, ReviewContext
    from sicheck.rules import Rules

    def twice(ctx, chk):
        yield chk.finding("N", "L1", "one")
        yield chk.finding("N", "L1", "two", severity="info")
    chk = Check("demo-twice", "warning", (), twice, "test", "")
    ctx = ReviewContext(segments=None, nets=None, rules=Rules())
    a, b = run_checks(ctx, [chk])
    assert (a.severity, b.severity) == ("warning", "info")
    assert (a.key, b.key) == ("demo-twice|N|L1", "demo-twice|N|L1|2")
    off = Rules(severity={**Rules().severity, "demo-twice": "off"})
    assert run_checks(ReviewContext(segments=None, nets=None, rules=off), [chk]) == []


# ---- CLI structure: cli.py is the typer app and nothing imports it; command modules import only the core

COMMANDS = ("review_cmd", "rules_cmd", "line_cmd", "wave_cmd", "plan_cmd")


def _imports(path: Path) -> set[str]:
    mods = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module:
            mods.add(node.module)
        elif isinstance(node, ast.Import):
            mods.update(a.name for a in node.names)
    return mods


def test_nothing_imports_cli_and_commands_import_only_the_core():
    for path in (ROOT / "sicheck").rglob("*.py"):
        if path.name in ("cli.py", "__main__.py"):
            continue
        mods = _imports(path)
        assert "sicheck.cli" not in mods, f"{path} imports sicheck.cli"
        if path.stem in COMMANDS:
            others = {f"sicheck.{c}" for c in COMMANDS if c != path.stem}
            assert not mods & others, f"{path} imports another command module"


def test_line_short_h_is_help(run):
    code, out, _ = run("line", "-h")
    assert code == 0 and "--height" in out and "Usage" in out


def test_version_does_not_load_the_engine():
    code = ("import sys; from sicheck.cli import main; main(['--version']); "
            "print(sorted(m for m in sys.modules if m.startswith(('sicheck.checks', 'pandas', 'numpy'))))")
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, timeout=60)
    assert p.returncode == 0 and p.stdout.strip().endswith("[]"), p.stdout + p.stderr


def test_rules_command_lists_every_parameter(run):
    code, out, _ = run("rules")
    assert code == 0
    for name in all_params():
        assert name in out, name
    for c in CHECKS:
        assert c.id in out


def test_rules_command_layers_files(run, tmp_path):
    a = tmp_path / "a.toml"
    a.write_text('[impedance]\ntolerance_pct = 5\n', encoding="utf-8")
    b = tmp_path / "b.toml"
    b.write_text('[severity]\nz-step = "off"\n', encoding="utf-8")
    code, out, _ = run("rules", "--rules", a, "--rules", b)
    assert code == 0 and "tolerance_pct = 5 %" in out and re.search(r"z-step\s*│\s*off", out)


def test_bad_rules_type_exits_2_with_line(run, tmp_path):
    p = tmp_path / "r.toml"
    p.write_text('severity = "error"\n', encoding="utf-8")
    code, _, err = run("rules", "--rules", p)
    assert code == 2 and "line 1" in err and "key 'severity'" in err and "Traceback" not in err
    with pytest.raises(InputError):
        from sicheck.rules import load_rules
        load_rules(p)


def test_every_subpackage_is_installed():
    # a package missing from pyproject's list works from a checkout and fails once installed
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["tool"]["setuptools"]["packages"])
    for init in (ROOT / "sicheck").rglob("__init__.py"):
        pkg = ".".join(init.parent.relative_to(ROOT).parts)
        assert pkg in listed, f"{pkg} is not in pyproject.toml [tool.setuptools] packages"
