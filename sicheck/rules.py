"""Rule sets: net classes, check parameters and severities, read from TOML.

A rule set file may hold these tables (all optional):
  name = "..."
  [<section>]    the parameters the registered checks declare for that section (`sicheck rules` lists
                 them: [electrical], [impedance], [fabrication], [waveform], ...)
  [severity]     rule id = "error" | "warning" | "info" | "off"
  [columns]      "header in the export" = "sicheck column"
  [[net_class]]  name, match (globs), the net's own values (rise_time, width, gap, driver_ohm, load_pf,
                 swing, freq) and any per-class check parameter (z0, zdiff, tolerance_pct, ...)
  [[match_group]] name, match (globs), max_skew (a time), optional reference net (sicheck/skew.py)
Files are applied in order (a folder in name order): a later file overrides only what it sets and adds
net classes; a class name may be defined once in the whole set.
"""

from __future__ import annotations

import fnmatch
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Iterable

from sicheck.checks import CHECKS, SEVERITIES, SEVERITY_CHOICES, Param, all_params, class_params, section_params
from sicheck.errors import InputError
from sicheck.series_parts import read_series_rules
from sicheck.skew import MatchGroup, read_match_groups
from sicheck.tomlsrc import TomlSource, named_tables
from sicheck.units import UnitError, parse_quantity

__all__ = ["Rules", "NetClass", "load_rules", "load_rule_sets", "SEVERITIES", "CHECKS", "UNCLASSIFIED"]

UNCLASSIFIED = "unclassified"       # the class of nets no class matches
OLD_UNCLASSIFIED = "default"        # its former name, still accepted in rule files (with a note)

# A net class's own description of its nets (not check parameters): key -> quantity kind.
CLASS_VALUES = {"rise_time": "time", "width": "length", "gap": "length", "freq": "frequency", "swing": "voltage",
                "driver_ohm": "number", "load_pf": "number"}


@dataclass(frozen=True, init=False)
class NetClass:
    name: str
    match: tuple[str, ...] = ()
    rise_time: float | None = None
    width: float | None = None
    gap: float | None = None
    driver_ohm: float | None = None
    load_pf: float | None = None
    swing: float | None = None
    freq: float | None = None          # where loss (and a dispersive dielectric) is evaluated
    params: dict = field(default_factory=dict, compare=False)   # per-class check parameters it sets (SI)
    origin: str = ""                   # "file, line n" where it was defined
    driver: tuple[str, ...] = ()       # node-name patterns of the driver (nets with from/to; sicheck/topology.py)

    def __init__(self, name: str, match: tuple[str, ...] = (), rise_time=None, width=None, gap=None,
                 driver_ohm=None, load_pf=None, swing=None, freq=None, params: dict | None = None, origin: str = "",
                 driver: tuple[str, ...] = (), **class_params_set):
        # per-class check parameters may also be given by name (NetClass("CLK", z0=50), replace(c, z0=45))
        unknown = set(class_params_set) - set(class_params())
        if unknown:
            raise TypeError(f"NetClass got unknown parameters {sorted(unknown)}")
        merged = dict(params or {})
        merged.update({k: v for k, v in class_params_set.items() if v is not None})
        for k, v in (("name", name), ("match", tuple(match)), ("rise_time", rise_time), ("width", width),
                     ("gap", gap), ("driver_ohm", driver_ohm), ("load_pf", load_pf), ("swing", swing),
                     ("freq", freq), ("params", merged), ("origin", origin), ("driver", tuple(driver))):
            object.__setattr__(self, k, v)

    def __getattr__(self, name: str):
        # per-class check parameters read as attributes (cls.z0, cls.max_loss_db); None when not set
        if not name.startswith("_") and name in class_params():
            return self.__dict__.get("params", {}).get(name)
        raise AttributeError(name)

    def matches(self, net: str) -> bool:
        return any(fnmatch.fnmatchcase(net.upper(), pat.upper()) for pat in self.match)


def _defaults() -> dict:
    return {n: p.default for n, p in all_params().items()}


def _default_severity() -> dict:
    return {c.id: c.severity for c in CHECKS}


@dataclass(frozen=True, init=False)
class Rules:
    name: str = "built-in"
    sources: tuple[str, ...] = ()
    settings: dict = field(default_factory=_defaults)        # parameter name -> value (SI)
    severity: dict = field(default_factory=_default_severity)
    columns: dict = field(default_factory=dict)
    classes: tuple[NetClass, ...] = ()
    notes: tuple[tuple[str, str], ...] = ()                  # (where, note) for the rules-note check
    match_groups: tuple[MatchGroup, ...] = ()
    series_parts: tuple = ()          # [[series_part]] (sicheck/series_parts.py)

    def __init__(self, name: str = "built-in", sources: tuple[str, ...] = (), settings: dict | None = None,
                 severity: dict | None = None, columns: dict | None = None, classes: tuple = (),
                 notes: tuple = (), match_groups: tuple = (), series_parts: tuple = (), **params):
        # parameters may also be given by name (Rules(tolerance_pct=5), replace(rules, max_nets=2))
        unknown = set(params) - set(all_params())
        if unknown:
            raise TypeError(f"Rules got unknown parameters {sorted(unknown)}")
        st = _defaults()
        st.update(settings or {})
        st.update(params)
        sev = _default_severity()
        sev.update(severity or {})
        for k, v in (("name", name), ("sources", tuple(sources)), ("settings", st), ("severity", sev),
                     ("columns", dict(columns or {})), ("classes", tuple(classes)), ("notes", tuple(notes)),
                     ("match_groups", tuple(match_groups)), ("series_parts", tuple(series_parts))):
            object.__setattr__(self, k, v)

    def __getattr__(self, name: str):
        # parameters read as attributes (rules.min_feature, rules.swing)
        s = self.__dict__.get("settings")
        if s is not None and name in s:
            return s[name]
        raise AttributeError(name)

    def value(self, name: str, cls: NetClass | None = None):
        """A parameter's value in effect for a class: the class's own value when it sets one."""
        if cls is not None and name in cls.params:
            return cls.params[name]
        return self.settings.get(name)

    def class_named(self, name: str) -> NetClass | None:
        want = UNCLASSIFIED if name.lower() == OLD_UNCLASSIFIED else name.lower()
        for c in self.classes:
            if c.name.lower() == want:
                return c
        return NetClass(UNCLASSIFIED) if want == UNCLASSIFIED else None

    def class_for(self, net: str, explicit: str | None = None) -> NetClass | None:
        if explicit:
            return self.class_named(explicit)
        for c in self.classes:
            if c.name != UNCLASSIFIED and c.matches(net):
                return c
        return self.class_named(UNCLASSIFIED)

    def tolerance_for(self, cls: NetClass | None) -> float:
        return self.value("tolerance_pct", cls)


def _number(src: TomlSource, value, key, header, index=0, lo=0.0, hi=float("inf"), lo_open=True):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise src.error(f"'{key}' must be a number (got {value!r})", key, header, index)
    ok = (value > lo if lo_open else value >= lo) and value <= hi
    if not ok:
        raise src.error(f"'{key}' = {value!r} is out of range", key, header, index)
    return float(value)


def _param_value(src: TomlSource, p: Param, value, header: str, index: int = 0):
    """A parameter read by its declaration: numbers by range, quantities with their units, to SI."""
    if p.kind in ("number", "int"):
        v = _number(src, value, p.name, header, index, lo=p.lo, hi=p.hi, lo_open=p.lo_open)
        if p.kind == "int":
            if v != int(v):
                raise src.error(f"'{p.name}' must be a whole number (got {value!r})", p.name, header, index)
            return int(v)
        return v
    try:
        v = parse_quantity(value, p.kind)
    except UnitError as e:
        raise src.error(f"{p.name}: {e}", p.name, header, index) from None
    if not ((v > p.lo if p.lo_open else v >= p.lo) and v <= p.hi):
        raise src.error(f"{p.name} = {value!r} is out of range", p.name, header, index)
    return v


def _table(src: TomlSource, d: dict, key: str) -> dict:
    val = d.get(key, {})
    if not isinstance(val, dict):
        raise src.error(f"'{key}' must be a table ([{key}] with keys below it), not {type(val).__name__} "
                        f"{val!r}", key)
    return val


def _class_value(src: TomlSource, key: str, kind: str, value, i: int) -> float:
    if kind == "number":
        return _number(src, value, key, "net_class", i, lo=0.0, lo_open=False, hi=1e4)
    try:
        v = parse_quantity(value, kind, "V" if kind == "voltage" else None)
    except UnitError as e:
        raise src.error(f"{key}: {e}", key, "net_class", i) from None
    if kind == "frequency" and not 1e3 <= v <= 1e12:
        raise src.error("freq must be between 1 kHz and 1 THz", key, "net_class", i)
    if not v > 0:
        raise src.error(f"{key} must be positive", key, "net_class", i)
    return v


def _apply_file(rules: Rules, path: Path) -> Rules:
    """`rules` with what this file sets applied on top (nothing else changes)."""
    src = TomlSource(path, "rules")
    d = src.data
    sections = section_params()
    top_keys = {"name", "severity", "columns", "net_class", "match_group", "series_part"} | set(sections)
    for key in d:
        if key not in top_keys:
            raise src.error(f"unknown key '{key}' (allowed: {', '.join(sorted(top_keys))})", key)
    settings = dict(rules.settings)
    for sec, params in sections.items():
        for key, val in _table(src, d, sec).items():
            if key not in params:
                raise src.error(f"unknown key '{key}' in [{sec}] (allowed: {', '.join(sorted(params))})", key, sec)
            settings[key] = _param_value(src, params[key], val, sec)
    sev = dict(rules.severity)
    for key, val in _table(src, d, "severity").items():
        if key not in sev:
            raise src.error(f"unknown rule id '{key}' in [severity] (see 'sicheck rules')", key, "severity")
        if not isinstance(val, str) or val not in SEVERITY_CHOICES:
            raise src.error(f"severity must be error, warning, info or off (got {val!r})", key, "severity")
        sev[key] = val
    cols = dict(rules.columns)
    for key, val in _table(src, d, "columns").items():
        if not isinstance(val, str):
            raise src.error(f"column alias '{key}' must map to a column name", key, "columns")
        cols[key] = val

    classes = list(rules.classes)
    notes = list(rules.notes)
    raw_classes = d.get("net_class", [])
    if not isinstance(raw_classes, list):
        raise src.error("net_class must be written as [[net_class]] tables", "net_class")
    per_class = class_params()
    class_keys = {"name", "match", "driver"} | set(CLASS_VALUES) | set(per_class)
    for i, line, c, name in named_tables(src, "net_class", raw_classes, sorted(class_keys), "net class"):
        here = f"{src.path}, line {line}"
        if name.lower() == OLD_UNCLASSIFIED:
            notes.append((here, f"net class '{OLD_UNCLASSIFIED}' is now called '{UNCLASSIFIED}' (nets that match "
                                f"no other class); rename it"))
            name = UNCLASSIFIED
        twin = next((k for k in classes if k.name.lower() == name.lower()), None)
        if twin is not None:
            raise InputError(f"net class '{name}' is defined twice: at {twin.origin} and here; give each class "
                             "one definition (or another name)", file=src.path, line=line, key="name")
        match = c.get("match", [])
        if isinstance(match, str):
            match = [match]
        if not isinstance(match, list) or not all(isinstance(m, str) for m in match):
            raise src.error("'match' must be a list of net-name patterns", "match", "net_class", i)
        driver = c.get("driver", [])
        if isinstance(driver, str):
            driver = [driver]
        if not isinstance(driver, list) or not all(isinstance(m, str) and m.strip() for m in driver):
            raise src.error("'driver' must be a list of node-name patterns (e.g. [\"U1.*\"])", "driver", "net_class", i)
        kw: dict = {"name": name, "match": tuple(match), "origin": here, "driver": tuple(m.strip() for m in driver)}
        for key, kind in CLASS_VALUES.items():
            if key in c:
                kw[key] = _class_value(src, key, kind, c[key], i)
        kw["params"] = {key: _param_value(src, p, c[key], "net_class", i) for key, p in per_class.items() if key in c}
        classes.append(NetClass(**kw))
    upd: dict = {"settings": settings, "severity": sev, "columns": cols, "classes": tuple(classes),
                 "notes": tuple(notes), "sources": rules.sources + (str(path),),
                 "match_groups": read_match_groups(src, d.get("match_group", []), rules.match_groups),
                 "series_parts": read_series_rules(src, d.get("series_part", []), rules.series_parts)}
    if "name" in d:
        if not isinstance(d["name"], str):
            raise src.error(f"'name' must be text (got {d['name']!r})", "name")
        upd["name"] = d["name"]
    new = replace(rules, **upd)
    if new.lumped_max_td_over_tr >= new.required_min_td_over_tr:
        raise src.error("lumped_max_td_over_tr must be below required_min_td_over_tr",
                        "lumped_max_td_over_tr", "electrical")
    return new


def _files(path: str | Path | None) -> list[Path]:
    if path is None:
        from sicheck.resources import default_rules_path
        path = default_rules_path()
    p = Path(path)
    if p.is_dir():
        files = sorted(p.glob("*.toml"))
        if not files:
            raise InputError("no .toml rule files in this folder", file=str(p))
        return files
    if p.exists():
        return [p]
    raise InputError("rules file or folder not found", file=str(p))


def load_rule_sets(paths: Iterable[str | Path | None] | None) -> Rules:
    """The rule sets given (files or folders) applied in order; none given = the shipped default set.

    Each file overrides only what it sets, so `--rules a.toml --rules b.toml` equals a folder holding
    the two files.
    """
    rules = Rules()
    for p in (list(paths) if paths else [None]):
        for f in _files(p):
            rules = _apply_file(rules, f)
    return rules


def load_rules(path: str | Path | None) -> Rules:
    """Rules from one file or folder; None = the shipped default set."""
    return load_rule_sets([path])
