"""Hand-made stackups for the via and return-path tests (every dielectric er 4, so stubs are easy to check).

Copper is 35 um. Below IN1 the barrel runs 0.30 + 0.035 + 0.30 + 0.035 + 0.495 + 0.035 = 1.200 mm to the
bottom face of BOT: the stub a through via joining TOP and IN1 leaves.
"""

from __future__ import annotations

import tomllib

from sicheck.checks import ReviewContext
from sicheck.stackup import parse_stackup


def stackup_text(vias: str = "", pwr_net: str = "P3V3", pwr_name: str = "PWR") -> str:
    return f'''name = "via test board"
units = "mm"

[[layers]]
type = "signal"
name = "TOP"
thickness = 0.035

[[layers]]
type = "dielectric"
thickness = 0.1
er = 4.0

[[layers]]
type = "plane"
name = "GNDP"
net = "GND"
thickness = 0.035

[[layers]]
type = "dielectric"
thickness = 0.1
er = 4.0

[[layers]]
type = "signal"
name = "IN1"
thickness = 0.035

[[layers]]
type = "dielectric"
thickness = 0.3
er = 4.0

[[layers]]
type = "signal"
name = "IN2"
thickness = 0.035

[[layers]]
type = "dielectric"
thickness = 0.3
er = 4.0

[[layers]]
type = "plane"
name = "{pwr_name}"
net = "{pwr_net}"
thickness = 0.035

[[layers]]
type = "dielectric"
thickness = 0.495
er = 4.0

[[layers]]
type = "signal"
name = "BOT"
thickness = 0.035
{vias}'''


def stackup(vias: str = "", **kw):
    text = stackup_text(vias, **kw)
    return parse_stackup(tomllib.loads(text), text, "board.toml")


def via_context(seg, rs, st) -> ReviewContext:
    from sicheck.review import _net_table
    return ReviewContext(segments=seg, nets=_net_table(seg, rs), rules=rs, stackup=st)


def via_findings(seg, rs, st, rule: str):
    from sicheck.checks import by_id, run_checks
    return run_checks(via_context(seg, rs, st), [by_id(rule)])
