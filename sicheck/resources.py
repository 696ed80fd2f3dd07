"""Where the shipped rules and demo board are, installed or in a source checkout."""

from __future__ import annotations

from importlib import resources
from pathlib import Path


def _shipped(package: str, fallback: str) -> Path:
    try:
        p = Path(str(resources.files(package)))
        if p.exists():
            return p
    except ModuleNotFoundError:
        pass
    return Path(__file__).resolve().parent.parent / fallback


def default_rules_path() -> Path:
    return _shipped("sicheck.shipped_rules", "rules") / "default.toml"


def demo_dir() -> Path:
    return _shipped("sicheck.shipped_demo", "demo_boards") / "harbor_lidar"
