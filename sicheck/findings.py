"""A finding: one thing a reviewer must look at."""

from __future__ import annotations

from dataclasses import dataclass

SEVERITY_ORDER = {"error": 0, "warning": 1, "info": 2}


@dataclass(frozen=True)
class Finding:
    rule: str
    severity: str
    net: str
    layer: str
    message: str
    row: int | None = None      # trace-list row the finding is about, if one
    key: str = ""               # stable identity: rule | net or pair | place; the same on the next revision
    value: float | None = None  # the measured quantity, in `unit`
    limit: float | None = None  # the limit it was held against, in `unit`
    unit: str = ""

    def as_dict(self) -> dict:
        return {"rule": self.rule, "severity": self.severity, "net": self.net, "layer": self.layer,
                "message": self.message, "row": self.row, "key": self.key or f"{self.rule}|{self.net}",
                "value": _plain(self.value), "limit": _plain(self.limit), "unit": self.unit or None}


def _plain(x: float | None) -> float | None:
    """A JSON-safe number (NaN and infinities become null), rounded to what a reader can use."""
    if x is None:
        return None
    v = float(x)
    if v != v or v in (float("inf"), float("-inf")):
        return None
    return float(f"{v:.6g}")
