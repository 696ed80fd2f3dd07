"""The rule engine: what a check declares, the review context it reads, and the loop that runs them.

A check is a plain function ``fn(ctx, chk) -> Iterable[Finding]`` registered with ``@check(...)``.
It reads tables from the ``ReviewContext`` and builds findings with ``chk.finding(...)``; the
engine applies the severity chosen in the rules (and skips a check set to ``off``).
Nothing here imports the rules module: the rules read this registry, not the other way round.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Callable, Iterable

from sicheck.findings import Finding

SEVERITIES = ("error", "warning", "info")
SEVERITY_CHOICES = SEVERITIES + ("off",)

# Parameter kinds: a plain number (with a unit shown beside it), an integer, or a quantity read with
# units (stored in SI; `scale` converts SI to the unit shown in listings).
KINDS = ("number", "int", "length", "time", "frequency")


@dataclass(frozen=True)
class Param:
    """One setting a check reads.

    ``section``: the rules-file table it can be set in (e.g. "impedance"), or None.
    ``per_class``: it can also be set in a ``[[net_class]]``; the class value wins for that class.
    ``default``: in SI; None means "not set" (a per-class-only limit such as a target).
    """
    name: str
    kind: str
    default: Any
    unit: str = ""
    help: str = ""
    section: str | None = None
    per_class: bool = False
    lo: float = 0.0
    hi: float = 1e6
    lo_open: bool = True
    scale: float = 1.0          # SI value x scale = the value in `unit`

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ValueError(f"parameter {self.name}: kind must be one of {KINDS}")
        if self.section is None and not self.per_class:
            raise ValueError(f"parameter {self.name}: settable nowhere (give a section or per_class)")

    @property
    def where(self) -> str:
        places = ([f"[{self.section}]"] if self.section else []) + (["net class"] if self.per_class else [])
        return ", ".join(places)

    def shown(self, value) -> str:
        """A value in this parameter's display unit, for listings."""
        if value is None:
            return "-"
        v = value * self.scale
        return f"{v:.4g} {self.unit}".strip()


@dataclass
class Check:
    id: str
    severity: str                       # the default; the rules' [severity] table overrides it
    params: tuple[Param, ...]
    fn: Callable[["ReviewContext", "Check"], Iterable[Finding]]
    family: str
    doc: str
    waveforms: bool = False             # reads the waveform stage's columns of the nets table
    # a waveform check's share that needs none of those columns, worked out before them (run_early, prepared)
    prepare: Callable[["ReviewContext", "Check"], Any] | None = None
    level: str = field(default="", repr=False, compare=False)   # the rules' severity while the engine runs it

    @property
    def summary(self) -> str:
        """The docstring's first sentence group: what it checks, in one line."""
        text = self.doc.strip().split("\n\n")[0]
        return " ".join(text.split())

    @property
    def what(self) -> str:          # the name the former rules.Check used
        return self.summary

    def section(self, title: str) -> str:
        """The text under "What it checks:", "Why it matters:" or "How to fix:" in the docstring."""
        lines = self.doc.splitlines()
        out, on = [], False
        for ln in lines:
            s = ln.strip()
            if s.lower().startswith(title.lower()):
                on = True
                rest = s[len(title):].lstrip(":").strip()
                if rest:
                    out.append(rest)
                continue
            if on and (not s or any(s.lower().startswith(t.lower()) for t in DOC_PARTS)):
                break
            if on:
                out.append(s)
        return " ".join(out)

    def finding(self, net: str, layer: str, message: str, *, row: int | None = None, key: str | None = None,
                value: float | None = None, limit: float | None = None, unit: str = "",
                severity: str | None = None) -> Finding:
        """A finding of this check. ``key`` defaults to rule|net|layer (no row: keys survive re-exports).

        ``severity`` is only for a finding that is milder by nature (e.g. an info note); the engine
        otherwise fills in the severity the rules choose (``level``: set on the copy of the check it runs).
        """
        return Finding(rule=self.id, severity=severity or self.level, net=net, layer=layer, message=message, row=row,
                       key=key or make_key(self.id, net, layer), value=value, limit=limit, unit=unit)


DOC_PARTS = ("What it checks", "Why it matters", "How to fix")

REGISTRY: list[Check] = []
SETTINGS: list[Param] = []      # settings no check owns (e.g. `plan`'s widest trace)


def setting(p: Param) -> Param:
    """Register a rules-file setting that no check reads (so the rules file may set it)."""
    SETTINGS.append(p)
    return p


def check(id: str, severity: str, params: Iterable[Param] = (), waveforms: bool = False, prepare=None):
    """Register a check function. The function's docstring documents the rule (see DOC_PARTS).

    waveforms: the check reads the waveform stage's columns of the nets table (simulated metrics, proposed
    part); the others can run while that stage's processes work (run_early).
    prepare: for such a check, ``prepare(ctx, chk)`` works out what it needs that the waveform stage does not
    change (it must read none of that stage's columns); run_early runs it meanwhile and the check takes it
    with ``prepared(ctx, chk)``.
    """
    if severity not in SEVERITIES:
        raise ValueError(f"check {id}: default severity must be one of {SEVERITIES}")

    def deco(fn):
        if any(c.id == id for c in REGISTRY):
            raise ValueError(f"check id '{id}' registered twice")
        family = fn.__module__.rsplit(".", 1)[-1]
        REGISTRY.append(Check(id, severity, tuple(params), fn, family, fn.__doc__ or "", waveforms, prepare))
        return fn
    return deco


def make_key(rule: str, net: str, *where: str) -> str:
    """A finding's stable identity: rule, net (or pair, its names sorted) and place; never a row number."""
    return "|".join([rule, net, *[w for w in where if w]])


# Between a pair's two net names: not "/", which hierarchical net names contain ("/usb3/RX1+"); EDA tools
# do not put a space on both sides of "&" in a net name.
PAIR_SEP = " & "


def pair_label(a: str, b: str) -> str:
    """A pair's name as shown (listed leg first)."""
    return f"{a}{PAIR_SEP}{b}"


def pair_id(a: str, b: str) -> str:
    """A pair's name for keys: the same whichever leg the export lists first."""
    return PAIR_SEP.join(sorted((a, b)))


@dataclass
class ReviewContext:
    """What a check may read. Tables use SI units (see review._segment_table and review._net_table).

    segments: one row per trace-list row (pairs listed on one leg appear once). Columns: row, net, pair,
        layer, net_class, kind, length, width, gap, z0, zdiff, zodd, zeven, eps_eff, delay_per_m, delay,
        rise_time, freq, loss_db, model, uncertainty_pct, xs, z_min_ohm, z_max_ohm, z_rss_ohm, zdiff_min_ohm, ...
    nets: one row per net, both legs of a pair (a partner listed only through `pair` is mirrored). Columns:
        net, net_class, pair, layers, length, delay, rise_time, td_over_tr, electrical, termination,
        loss_db, freq, critical_length, advice, and the waveform stage's columns when it ran.
    cross_sections: (CrossSection, LineResult) per unique cross-section; segments["xs"] indexes it
    rules: the merged rule set; classes: class name -> NetClass
    crosstalk: crosstalk_review.CrosstalkTables when spacings were given (segments then also carry spacing,
        parallel, next_pct, fext_pct, xt_aggressor, xt_rise), else None
    vias: one row per via (sicheck.via_table.VIA_COLUMNS), mirrored partners included
    """
    segments: Any
    nets: Any
    rules: Any
    stackup: Any = None
    cross_sections: list = field(default_factory=list)
    crosstalk: Any = None
    topology: dict = field(default_factory=dict)   # net -> topology.Topology, for nets whose rows name nodes
    vias: Any = None            # via_table.via_table(...) of all nets (None: the via checks derive it)
    # check id -> (the nets' names, what Check.prepare worked out on them), filled by run_early
    prepared: dict = field(default_factory=dict)

    def __post_init__(self):
        self.classes = {c.name: c for c in getattr(self.rules, "classes", ())}

    def net_class(self, name: str):
        return self.classes.get(name)

    def param(self, name: str, class_name: str | None = None):
        """A parameter's value in effect: the class's own value when set, else the rules' value."""
        cls = self.classes.get(class_name) if class_name else None
        return self.rules.value(name, cls)

    def param_per_row(self, name: str, class_names) -> "np.ndarray":
        """A parameter's value for each row's class, as floats (NaN where unset); one lookup per class."""
        import numpy as np
        names = list(class_names)
        vals = {n: self.param(name, n) for n in set(names)}
        return np.array([np.nan if vals[n] is None else vals[n] for n in names], dtype=float)


def plain_rows(table):
    """A table's rows as ``itertuples(index=False)`` gives them (same names, same Python values).

    Each column is converted once: iterating a pandas string column asks for one element at a time,
    which dominates a check's time on a board with 100 000 nets.
    """
    from collections import namedtuple
    row = namedtuple("Pandas", list(table.columns), rename=True)
    if len(table.columns) == 0:
        return iter([row()] * len(table))
    cols = [_plain(table.iloc[:, k]).tolist() for k in range(table.shape[1])]
    return map(row._make, zip(*cols))


def plain_columns(table, names, positions=None) -> dict[str, list]:
    """Columns by name as lists of the values plain_rows gives; only the rows at `positions` (as for .iloc)
    when given."""
    return {n: (_plain(table[n]) if positions is None else _plain(table[n])[positions]).tolist() for n in names}


def _plain(column):
    return column.to_numpy(None if column.dtype.kind in "biuf" else object)


def run_checks(ctx: ReviewContext, checks: Iterable[Check] | None = None,
               ready: dict[str, list[Finding]] | None = None) -> list[Finding]:
    """Every registered check not turned off, with the rules' severities applied; keys made unique.

    ready: findings already worked out per check id (run_early), taken as they are, in the registry's order.
    """
    out: list[Finding] = []
    for chk in (REGISTRY if checks is None else checks):
        found = ready[chk.id] if ready is not None and chk.id in ready else _findings(ctx, chk)
        out.extend(found)
    seen: dict[str, int] = {}
    for i, f in enumerate(out):
        n = seen.get(f.key, 0) + 1
        seen[f.key] = n
        if n > 1:       # same place twice (e.g. two equal rows): keep keys unique, still row-free
            out[i] = replace(f, key=f"{f.key}|{n}")
    return out


def run_early(ctx: ReviewContext) -> dict[str, list[Finding]]:
    """The findings of every check that does not read the waveform stage's columns, by check id, severities
    applied: worked out while the waveform stage's processes run (ctx.nets need not have those columns yet);
    run_checks(..., ready=) then adds the rest. The other checks' ``prepare`` share goes to ctx.prepared: the
    caller hands it on to the context it gives run_checks."""
    out = {}
    for chk in REGISTRY:
        if not chk.waveforms:
            out[chk.id] = _findings(ctx, chk)
        elif chk.prepare is not None and ctx.rules.severity.get(chk.id, chk.severity) != "off":
            ctx.prepared[chk.id] = (_names(ctx.nets), chk.prepare(ctx, chk))
    return out


def prepared(ctx: ReviewContext, chk: Check):
    """What ``chk.prepare`` worked out before the waveform stage (run_early), when it was worked out on the same
    nets in the same order as ctx.nets; else worked out now."""
    names, done = ctx.prepared.get(chk.id, (None, None))
    if names is not None and len(names) == len(ctx.nets) and (names == _names(ctx.nets)).all():
        return done
    return chk.prepare(ctx, chk)


def _names(nets):
    import numpy as np
    return np.asarray(nets["net"].to_numpy(object))


def _findings(ctx: ReviewContext, chk: Check) -> list[Finding]:
    level = ctx.rules.severity.get(chk.id, chk.severity)
    if level == "off":
        return []
    # findings made with the rules' severity (chk.finding reads `level`): not made a second time to set it
    bound = replace(chk, level=level)
    return [f if f.severity else replace(f, severity=level) for f in chk.fn(ctx, bound)]
