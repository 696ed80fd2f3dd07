"""The stackup's `[vias]` table: how the board's signal vias are built.

    [vias]
    kind = "through"          # through | blind | backdrilled
    component_side = "top"    # top | bottom: the side the parts sit on (escape vias start there)
    stub = "0.2mm"            # backdrilled only: the barrel left beyond the last connected layer

Without the table every via is a through via and parts sit on the top side.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from sicheck import plausible
from sicheck.errors import InputError
from sicheck.units import UnitError, parse_quantity

VIA_KINDS = ("through", "blind", "backdrilled")
SIDES = ("top", "bottom")
VIA_KEYS = ("kind", "component_side", "stub")


@dataclass(frozen=True)
class ViaSpec:
    kind: str = "through"
    component_side: str = "top"
    stub: float | None = None          # backdrilled: residual stub after drilling (m)


def _table_lines(lines: list[str]) -> tuple[int, int] | None:
    """0-based line range of the [vias] table, or None when it is written inline or absent."""
    start = next((n for n, l in enumerate(lines) if re.match(r"^\s*\[\s*vias\s*\]", l)), None)
    if start is None:
        return None
    end = next((n for n in range(start + 1, len(lines)) if re.match(r"^\s*\[", lines[n])), len(lines))
    return start, end


def parse_vias(data: dict, lines: list[str], src: str, units: str | None) -> ViaSpec:
    """The [vias] table as a ViaSpec; bad input raises InputError with file, line and key."""
    if "vias" not in data:
        return ViaSpec()
    raw = data["vias"]
    span = _table_lines(lines)

    def fail(msg: str, key: str | None = None):
        line = None
        if span is not None:
            line = span[0] + 1
            if key:
                pat = re.compile(rf"^\s*{re.escape(key)}\s*=")
                line = next((n + 1 for n in range(*span) if pat.match(lines[n])), line)
        else:
            line = next((n + 1 for n, l in enumerate(lines) if re.match(r"^\s*vias\s*=", l)), None)
        raise InputError(f"[vias]: {msg}", file=src, line=line, key=key or "vias")

    if not isinstance(raw, dict):
        fail(f"must be a table ([vias] with keys below it), not {type(raw).__name__} {raw!r:.40}")
    for key in raw:
        if key not in VIA_KEYS:
            fail(f"unknown key '{key}' (allowed: {', '.join(VIA_KEYS)})", key)
    kind = raw.get("kind", "through")
    if kind not in VIA_KINDS:
        fail(f"kind must be one of {', '.join(VIA_KINDS)} (got {kind!r})", "kind")
    side = raw.get("component_side", "top")
    if side not in SIDES:
        fail(f"component_side must be top or bottom (got {side!r})", "component_side")
    stub = None
    if kind == "backdrilled":
        if "stub" not in raw:
            fail("a backdrilled via needs stub: the barrel left beyond the last connected layer after "
                 "drilling, e.g. stub = \"0.2mm\"", "kind")
        try:
            stub = parse_quantity(raw["stub"], "length", units)
        except UnitError as e:
            hint = "" if units else " (or set units = \"mm\" at the top of the file)"
            fail(f"stub: {e}{hint}", "stub")
        if bad := plausible.check("via_stub", stub):
            fail(f"stub {raw['stub']!r} {bad}", "stub")
    elif "stub" in raw:
        fail(f"stub applies only to kind = \"backdrilled\" (this board's vias are {kind}; a {kind} via's "
             "stub follows from the stackup)", "stub")
    return ViaSpec(kind=kind, component_side=side, stub=stub)


def parse_plane_net(value, fail) -> str:
    """A plane layer's `net` (the net its copper carries, e.g. "GND")."""
    if not isinstance(value, str) or not value.strip():
        fail(f"net must be the name of the net the plane carries, e.g. \"GND\" (got {value!r})", "net")
    return value.strip()
