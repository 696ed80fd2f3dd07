"""Where the shipped rules and demo board are, installed or in a source checkout.

Installed, rules/ and demo_boards/ sit inside the package as shipped_rules/ and
shipped_demo/ (see pyproject.toml); in a source checkout they are at the top level.
"""

from __future__ import annotations

from pathlib import Path

_PKG = Path(__file__).resolve().parent


def _shipped(installed: str, checkout: str) -> Path:
    p = _PKG / installed
    return p if p.is_dir() else _PKG.parent / checkout


def default_rules_path() -> Path:
    return _shipped("shipped_rules", "rules") / "default.toml"


def demo_dir() -> Path:
    return _shipped("shipped_demo", "demo_boards") / "harbor_lidar"
