"""Rule sets: net classes, thresholds and severities, read from TOML.

A rule set file may hold these tables (all optional):
  name = "..."
  [electrical]   lumped_max_td_over_tr, required_min_td_over_tr
  [impedance]    tolerance_pct, z_step_pct, formula_field_pct
  [severity]     rule id = "error" | "warning" | "info" | "off"
  [columns]      "header in the export" = "sicheck column"
  [[net_class]]  name, match (globs), rise_time, width, gap, z0, zdiff, tolerance_pct,
                 driver_ohm, load_pf
A directory of rule files is read in name order; later files add net classes and
override scalar settings.
"""

from __future__ import annotations

import fnmatch
from dataclasses import dataclass, field, replace
from pathlib import Path

from sicheck.errors import InputError
from sicheck.tomlsrc import TomlSource
from sicheck.units import UnitError, parse_quantity

SEVERITIES = ("error", "warning", "info")


@dataclass(frozen=True)
class Check:
    id: str
    severity: str
    what: str


# Every check sicheck runs, its default severity and what it tests.
CHECKS = (
    Check("z0-target", "error", "single-ended Z0 of each segment within the net class's target +/- tolerance"),
    Check("zdiff-target", "error", "differential Zdiff of each pair segment within the class target +/- tolerance"),
    Check("electrical-length", "warning", "one-way delay against rise time: a net that must be treated and "
                                          "terminated as a transmission line, with the proposed part and value "
                                          "(info when termination is only recommended)"),
    Check("z-step", "warning", "impedance step between a net's segments (layer change) larger than z_step_pct"),
    Check("no-target", "info", "transmission-line nets whose class sets no impedance target (one per class)"),
    Check("model-accuracy", "warning", "closed-form model used outside its stated accuracy range, or a field "
                                       "solution whose uncertainty is above its target"),
    Check("formula-vs-field", "warning", "closed form and field solution differ by more than formula_field_pct"),
    Check("loss-budget", "error", "insertion loss of a net at its frequency above the class's max_loss_db"),
    Check("min-feature", "error", "trace width or pair gap below the fabrication minimum feature size"),
    Check("waveform", "warning", "simulated receiver waveform of a net that needs termination: the proposed part, "
                                 "with overshoot, ringback and settling before and after (warning when no standard "
                                 "scheme meets the class's limits)"),
    Check("crosstalk", "warning", "near- or far-end crosstalk from a neighbour (class spacing, trace-list spacing "
                                  "or --coupling file) above the class's max_next_pct / max_fext_pct"),
)
CHECK_IDS = {c.id for c in CHECKS}


@dataclass(frozen=True)
class NetClass:
    name: str
    match: tuple[str, ...] = ()
    rise_time: float | None = None
    width: float | None = None
    gap: float | None = None
    z0: float | None = None
    zdiff: float | None = None
    tolerance_pct: float | None = None
    driver_ohm: float | None = None
    load_pf: float | None = None
    swing: float | None = None
    freq: float | None = None          # where loss (and a dispersive dielectric) is evaluated
    max_loss_db: float | None = None
    max_overshoot_pct: float | None = None
    max_ringback_pct: float | None = None
    max_settle_ns: float | None = None
    spacing: float | None = None       # crosstalk: edge-to-edge clearance to other nets on the same layer
    max_next_pct: float | None = None  # crosstalk budgets, % of the aggressor's step
    max_fext_pct: float | None = None

    def matches(self, net: str) -> bool:
        return any(fnmatch.fnmatchcase(net.upper(), pat.upper()) for pat in self.match)


@dataclass(frozen=True)
class Rules:
    name: str = "built-in"
    sources: tuple[str, ...] = ()
    lumped_max_td_over_tr: float = 1.0 / 6.0     # common practice (Johnson & Graham 1993)
    required_min_td_over_tr: float = 0.5         # round trip >= rise time
    tolerance_pct: float = 10.0                  # common practice fabrication tolerance
    z_step_pct: float = 10.0                     # common practice
    formula_field_pct: float = 2.0
    # waveform check (common practice values; see rules/default.toml)
    swing: float = 3.3
    driver_ohm: float = 25.0
    load_pf: float = 2.0
    max_overshoot_pct: float = 15.0
    max_ringback_pct: float = 15.0
    settle_rise_times: float = 2.0
    max_nets: int = 500
    min_feature: float = 75e-6           # smallest width/gap a fabricator etches reliably (common practice, 3 mil)
    max_width: float = 2e-3              # widest trace sicheck proposes in `plan`
    severity: dict = field(default_factory=lambda: {c.id: c.severity for c in CHECKS})
    columns: dict = field(default_factory=dict)
    classes: tuple[NetClass, ...] = ()

    def class_named(self, name: str) -> NetClass | None:
        for c in self.classes:
            if c.name.lower() == name.lower():
                return c
        return None

    def class_for(self, net: str, explicit: str | None = None) -> NetClass | None:
        if explicit:
            return self.class_named(explicit)
        for c in self.classes:
            if c.matches(net):
                return c
        return self.class_named("default")

    def tolerance_for(self, cls: NetClass | None) -> float:
        return cls.tolerance_pct if cls and cls.tolerance_pct is not None else self.tolerance_pct


SECTIONS = {
    "electrical": {"lumped_max_td_over_tr", "required_min_td_over_tr"},
    "impedance": {"tolerance_pct", "z_step_pct", "formula_field_pct"},
    "fabrication": {"min_feature", "max_width"},
    "waveform": {"swing", "driver_ohm", "load_pf", "max_overshoot_pct", "max_ringback_pct", "settle_rise_times",
                 "max_nets"},
}
TOP_KEYS = {"name", "electrical", "impedance", "waveform", "fabrication", "severity", "columns", "net_class"}
CLASS_KEYS = {"name", "match", "rise_time", "width", "gap", "z0", "zdiff", "tolerance_pct", "driver_ohm", "load_pf",
              "swing", "max_overshoot_pct", "max_ringback_pct", "max_settle_ns", "freq", "max_loss_db",
              "spacing", "max_next_pct", "max_fext_pct"}


def _number(src: TomlSource, value, key, header, index=0, lo=0.0, hi=float("inf"), lo_open=True):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise src.error(f"'{key}' must be a number (got {value!r})", key, header, index)
    ok = (value > lo if lo_open else value >= lo) and value <= hi
    if not ok:
        raise src.error(f"'{key}' = {value!r} is out of range", key, header, index)
    return float(value)


def _apply_file(rules: Rules, path: Path) -> Rules:
    src = TomlSource(path, "rules")
    d = src.data
    for key in d:
        if key not in TOP_KEYS:
            raise src.error(f"unknown key '{key}' (allowed: {', '.join(sorted(TOP_KEYS))})", key)
    upd: dict = {}
    for sec, keys in SECTIONS.items():
        tbl = d.get(sec, {})
        if not isinstance(tbl, dict):
            raise src.error(f"[{sec}] must be a table", sec)
        for key, val in tbl.items():
            if key not in keys:
                raise src.error(f"unknown key '{key}' in [{sec}] (allowed: {', '.join(sorted(keys))})", key, sec)
            if sec == "fabrication":
                try:
                    upd[key] = parse_quantity(val, "length")
                except UnitError as e:
                    raise src.error(f"{key}: {e}", key, sec) from None
                if not 0 < upd[key] < 0.1:
                    raise src.error(f"{key} is out of range", key, sec)
                continue
            upd[key] = _number(src, val, key, sec, hi=1e6)
            if key == "max_nets":
                upd[key] = int(val)
    sev = dict(rules.severity)
    for key, val in d.get("severity", {}).items():
        if key not in CHECK_IDS:
            raise src.error(f"unknown rule id '{key}' in [severity] (see 'sicheck rules')", key, "severity")
        if val not in SEVERITIES + ("off",):
            raise src.error(f"severity must be error, warning, info or off (got {val!r})", key, "severity")
        sev[key] = val
    upd["severity"] = sev
    cols = dict(rules.columns)
    for key, val in d.get("columns", {}).items():
        if not isinstance(val, str):
            raise src.error(f"column alias '{key}' must map to a column name", key, "columns")
        cols[key] = val
    upd["columns"] = cols

    classes = list(rules.classes)
    raw_classes = d.get("net_class", [])
    if not isinstance(raw_classes, list):
        raise src.error("net_class must be written as [[net_class]] tables", "net_class")
    for i, c in enumerate(raw_classes):
        for key in c:
            if key not in CLASS_KEYS:
                raise src.error(f"unknown key '{key}' in a net class (allowed: {', '.join(sorted(CLASS_KEYS))})",
                                key, "net_class", i)
        name = c.get("name")
        if not isinstance(name, str) or not name:
            raise src.error("every [[net_class]] needs a name", "name", "net_class", i)
        match = c.get("match", [])
        if isinstance(match, str):
            match = [match]
        if not isinstance(match, list) or not all(isinstance(m, str) for m in match):
            raise src.error("'match' must be a list of net-name patterns", "match", "net_class", i)
        kw: dict = {"name": name, "match": tuple(match)}
        for key, dim in (("rise_time", "time"), ("width", "length"), ("gap", "length"), ("spacing", "length")):
            if key in c:
                try:
                    kw[key] = parse_quantity(c[key], dim)
                except UnitError as e:
                    raise src.error(f"{key}: {e}", key, "net_class", i) from None
                if not kw[key] > 0:
                    raise src.error(f"{key} must be positive", key, "net_class", i)
        if "freq" in c:
            try:
                kw["freq"] = parse_quantity(c["freq"], "frequency")
            except UnitError as e:
                raise src.error(f"freq: {e}", "freq", "net_class", i) from None
            if not 1e3 <= kw["freq"] <= 1e12:
                raise src.error("freq must be between 1 kHz and 1 THz", "freq", "net_class", i)
        for key in ("z0", "zdiff", "driver_ohm", "load_pf", "max_overshoot_pct", "max_ringback_pct", "max_settle_ns",
                    "max_loss_db"):
            if key in c:
                kw[key] = _number(src, c[key], key, "net_class", i, lo=0.0, lo_open=key in ("z0", "zdiff"), hi=1e4)
        if "swing" in c:
            try:
                kw["swing"] = parse_quantity(c["swing"], "voltage", "V")
            except UnitError as e:
                raise src.error(f"swing: {e}", "swing", "net_class", i) from None
            if not kw["swing"] > 0:
                raise src.error("swing must be positive", "swing", "net_class", i)
        for key in ("max_next_pct", "max_fext_pct"):
            if key in c:
                kw[key] = _number(src, c[key], key, "net_class", i, hi=100)
        if "tolerance_pct" in c:
            kw["tolerance_pct"] = _number(src, c["tolerance_pct"], "tolerance_pct", "net_class", i, hi=100)
        nc = NetClass(**kw)
        classes = [k for k in classes if k.name.lower() != name.lower()] + [nc]
    upd["classes"] = tuple(classes)
    upd["sources"] = rules.sources + (str(path),)
    if "name" in d:
        upd["name"] = str(d["name"])
    new = replace(rules, **upd)
    if new.lumped_max_td_over_tr >= new.required_min_td_over_tr:
        raise src.error("lumped_max_td_over_tr must be below required_min_td_over_tr",
                        "lumped_max_td_over_tr", "electrical")
    return new


def load_rules(path: str | Path | None) -> Rules:
    """Rules from a file or a directory of files; None = the shipped default set."""
    if path is None:
        from sicheck.resources import default_rules_path
        path = default_rules_path()
    p = Path(path)
    if p.is_dir():
        files = sorted(p.glob("*.toml"))
        if not files:
            raise InputError("no .toml rule files in this folder", file=str(p))
    elif p.exists():
        files = [p]
    else:
        raise InputError("rules file or folder not found", file=str(p))
    rules = Rules()
    for f in files:
        rules = _apply_file(rules, f)
    return rules
