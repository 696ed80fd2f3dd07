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

    def as_dict(self) -> dict:
        return {"rule": self.rule, "severity": self.severity, "net": self.net, "layer": self.layer,
                "message": self.message, "row": self.row}
