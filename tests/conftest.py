"""Shared helpers: small boards written by the tests themselves."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

from sicheck.cli import main

FOUR_LAYER = """\
name = "test 4-layer"
units = "mm"

[[layers]]
type = "mask"
thickness = "25um"
er = 3.5

[[layers]]
type = "signal"
name = "L1"
copper = "1oz"

[[layers]]
type = "dielectric"
thickness = 0.2
er = 4.3

[[layers]]
type = "plane"
name = "GND"
copper = "1oz"

[[layers]]
type = "dielectric"
kind = "core"
thickness = 0.4
er = 4.3

[[layers]]
type = "signal"
name = "L3"
copper = "0.5oz"

[[layers]]
type = "dielectric"
thickness = 0.4
er = 4.3

[[layers]]
type = "plane"
name = "VCC"
copper = "1oz"
"""


@pytest.fixture
def board(tmp_path: Path):
    """Returns a function writing (stackup, traces) files into tmp_path."""

    def make(traces: str, stackup: str = FOUR_LAYER, name: str = "traces.csv", rules: str | None = None):
        st = tmp_path / "stackup.toml"
        st.write_text(stackup, encoding="utf-8")
        tr = tmp_path / name
        tr.write_text(textwrap.dedent(traces), encoding="utf-8")
        out = [tr, st]
        if rules is not None:
            rp = tmp_path / "rules.toml"
            rp.write_text(textwrap.dedent(rules), encoding="utf-8")
            out.append(rp)
        return out

    return make


@pytest.fixture
def run(capsys):
    """Run the CLI in-process: returns (exit code, stdout, stderr)."""

    def _run(*args: str):
        try:
            main(list(map(str, args)))
            code = 0
        except SystemExit as e:
            code = e.code if isinstance(e.code, int) else (0 if e.code is None else 1)
        cap = capsys.readouterr()
        return code, cap.out, cap.err

    return _run
