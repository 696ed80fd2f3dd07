"""Every check sicheck runs: one module per family, registered in the order listed here.

To add a check, write a module (or a function in a family's module) with ``@check(...)`` and add the
module to the import below; see DEVELOPERS.md "Adding a check".
"""

from __future__ import annotations

from functools import lru_cache

from sicheck.checks.engine import (DOC_PARTS, REGISTRY, SETTINGS, SEVERITIES, SEVERITY_CHOICES, Check, Param,
                                   ReviewContext, check, run_checks, run_early, setting)

# Registration: importing a family module registers its checks.
from sicheck.checks import impedance, fabrication, fabrication_band, loss, length, stub, pair, waveform, model_accuracy, rule_set  # noqa: E402,F401
from sicheck.checks import timing  # noqa: E402,F401
from sicheck.checks import crosstalk  # noqa: E402,F401
from sicheck.checks import vias, return_path  # noqa: E402,F401

CHECKS: tuple[Check, ...] = tuple(REGISTRY)

__all__ = ["CHECKS", "Check", "Param", "ReviewContext", "check", "run_checks", "run_early", "setting", "by_id",
           "all_params", "section_params", "class_params", "DOC_PARTS", "SEVERITIES", "SEVERITY_CHOICES", "rule_table_markdown"]


def by_id(rule_id: str) -> Check:
    for c in CHECKS:
        if c.id == rule_id:
            return c
    raise KeyError(rule_id)


@lru_cache(maxsize=None)
def all_params() -> dict[str, Param]:
    """Every parameter by name (checks may share one, e.g. tolerance_pct; then it is the same declaration).

    Cached: the registry is complete once this package is imported. Callers must not modify the result.
    """
    out: dict[str, Param] = {}
    for p in [p for c in CHECKS for p in c.params] + list(SETTINGS):
        if p.name in out and out[p.name] != p:
            raise ValueError(f"parameter '{p.name}' is declared twice with different definitions")
        out[p.name] = p
    return out


@lru_cache(maxsize=None)
def section_params() -> dict[str, dict[str, Param]]:
    """Rules-file table -> its keys."""
    out: dict[str, dict[str, Param]] = {}
    for p in all_params().values():
        if p.section:
            out.setdefault(p.section, {})[p.name] = p
    return out


@lru_cache(maxsize=None)
def class_params() -> dict[str, Param]:
    """Parameters a [[net_class]] may set."""
    return {n: p for n, p in all_params().items() if p.per_class}


def rule_table_markdown() -> str:
    """The README's rule table (a test keeps README and registry in step)."""
    lines = ["| rule | default | what it checks | parameters (where set) |", "|---|---|---|---|"]
    for c in CHECKS:
        params = "; ".join(f"`{p.name}` = {p.shown(p.default) if p.default is not None else 'unset'} "
                           f"({p.where})" for p in c.params) or "-"
        lines.append(f"| `{c.id}` | {c.severity} | {c.summary} | {params} |")
    return "\n".join(lines)
