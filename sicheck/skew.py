"""Timing over the review's tables: match groups (members, delays, spread) and intra-pair skew.

A net's delay is the sum of its own segments' delays (each segment's length times the delay per metre
of its own cross-section), so two nets of equal length on layers with different eps_eff arrive at
different times. Table work only: no files, no printing; the rules file's ``[[match_group]]`` tables
are read here too (``read_match_groups``), called by the rules reader.

A pair's two legs are two nets of a group: each leg is matched to the others on its own delay.
"""

from __future__ import annotations

import fnmatch
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from sicheck.errors import InputError
from sicheck.tomlsrc import named_tables
from sicheck.units import UnitError, parse_quantity

GROUP_KEYS = ("name", "match", "max_skew", "reference")
MAX_SKEW_RANGE = (0.0, 100e-9)     # s; above 100 ns is not a board-level matching question


@dataclass(frozen=True)
class MatchGroup:
    """A set of nets that must arrive together: their delays may spread by at most ``max_skew`` (s)."""
    name: str
    max_skew: float
    match: tuple[str, ...] = ()
    reference: str | None = None       # the net the others are measured against (None: the spread)
    origin: str = ""                   # "file, line n"

    def matches(self, net: str) -> bool:
        return any(fnmatch.fnmatchcase(net.upper(), pat.upper()) for pat in self.match)


def group_named(groups, name: str) -> MatchGroup | None:
    want = name.strip().lower()
    return next((g for g in groups if g.name.lower() == want), None)


# ------------------------------------------------------------------ reading [[match_group]] tables

def read_match_groups(src, raw, known: tuple[MatchGroup, ...]) -> tuple[MatchGroup, ...]:
    """``known`` plus the ``[[match_group]]`` tables of one rules file (a TomlSource).

    Errors name the file, the line and the key; a name used twice names both lines.
    """
    if not isinstance(raw, list):
        line = src.line_of("match_group") or src.block("match_group")[0] + 1
        raise InputError("match_group must be written as [[match_group]] tables", file=src.path, line=line,
                         key="match_group")
    out = list(known)
    for i, line, g, name in named_tables(src, "match_group", raw, GROUP_KEYS, "match group"):
        here = f"{src.path}, line {line}"
        twin = group_named(out, name)
        if twin is not None:
            raise InputError(f"match group '{name}' is defined twice: at {twin.origin} and here; give each group "
                             "one definition (or another name)", file=src.path, line=line, key="name")
        match = g.get("match", [])
        if isinstance(match, str):
            match = [match]
        if not isinstance(match, list) or not all(isinstance(m, str) and m.strip() for m in match):
            raise src.error("'match' must be a list of net-name patterns, e.g. [\"DQ*\", \"DQS_P\"]", "match",
                            "match_group", i)
        if "max_skew" not in g:
            raise src.error(f"match group '{name}' needs max_skew, the largest delay spread allowed "
                            "(e.g. \"10ps\")", "name", "match_group", i)
        try:
            skew = parse_quantity(g["max_skew"], "time")
        except UnitError as e:
            raise src.error(f"max_skew: {e}", "max_skew", "match_group", i) from None
        lo, hi = MAX_SKEW_RANGE
        if not lo < skew <= hi * (1 + 1e-9):        # 100 ns in ns reads a hair above 1e-7 s
            raise src.error(f"max_skew = {g['max_skew']!r} is out of range (above 0 up to 100 ns)", "max_skew",
                            "match_group", i)
        ref = g.get("reference")
        if ref is not None and (not isinstance(ref, str) or not ref.strip()):
            raise src.error("'reference' must be a net name", "reference", "match_group", i)
        out.append(MatchGroup(name=name, max_skew=skew, match=tuple(m.strip() for m in match),
                              reference=ref.strip() if ref else None, origin=here))
    return tuple(out)


def check_group_column(df: pd.DataFrame, groups, src: str) -> pd.DataFrame:
    """The trace list's ``match_group`` cells, checked against the rules' groups and spelt as defined there."""
    if "match_group" not in df.columns:
        return df
    cells = df["match_group"].to_numpy(object)
    named = {}
    for v, row in zip(cells, df["row"]):
        if v and v not in named:
            g = group_named(groups, v)
            if g is None:
                known = ", ".join(x.name for x in groups) or "none"
                raise InputError(f"match group '{v}' is not in the rules (groups: {known}); define it with a "
                                 "[[match_group]] table and its max_skew", file=src, row=int(row),
                                 column="match_group")
            named[v] = g.name
    if not named:
        return df
    df = df.copy()
    df["match_group"] = [named.get(v, v) if v else "" for v in cells]
    return df


# ------------------------------------------------------------------ delays

@dataclass
class GroupTiming:
    """One group's delays on this board. Times in s, lengths in m."""
    group: MatchGroup
    nets: list[str]
    delays: np.ndarray
    reference: str | None              # the reference net when it is on the board
    min_delay: float
    max_delay: float
    skew: float                        # spread, or the largest distance from the reference
    main_layer: str                    # the layer carrying most of the group's length
    seconds_per_m: float               # delay per metre on that layer (length-weighted over the group)
    offsets: dict = field(default_factory=dict)   # net -> delay minus the reference (or the median)

    @property
    def fastest(self) -> str:
        return self.nets[int(np.argmin(self.delays))]

    @property
    def slowest(self) -> str:
        return self.nets[int(np.argmax(self.delays))]

    @property
    def skew_length(self) -> float:
        """The skew as trace length on the main layer (NaN without segments)."""
        return self.skew / self.seconds_per_m if self.seconds_per_m > 0 else float("nan")

    @property
    def over(self) -> bool:
        return len(self.nets) > 1 and self.skew > self.group.max_skew


def _column_members(seg: pd.DataFrame) -> dict[str, set[str]]:
    """group name -> nets the trace list's match_group column puts in it (a partner listed only
    through `pair` goes with its leg)."""
    if "match_group" not in seg.columns:
        return {}
    m = seg[seg["match_group"].astype(str) != ""]
    out: dict[str, set[str]] = {}
    listed = set(seg["net"])
    for net, pair, g in zip(m["net"], m["pair"], m["match_group"]):
        s = out.setdefault(str(g).lower(), set())
        s.add(net)
        if pair and pair not in listed:
            s.add(pair)
    return out


def group_timing(segments: pd.DataFrame, nets: pd.DataFrame, groups) -> list[GroupTiming]:
    """Each match group's delays (groups with no net on the board are left out)."""
    if not groups:
        return []
    names = nets["net"].tolist()
    delay = dict(zip(names, nets["delay"].to_numpy(float)))
    by_column = _column_members(segments)
    out = []
    for g in groups:
        members = {n for n in names if g.matches(n)} | (by_column.get(g.name.lower(), set()) & delay.keys())
        ref = g.reference if g.reference in delay else None
        if ref:
            members.add(ref)
        if not members:
            continue
        order = [n for n in names if n in members]
        d = np.array([delay[n] for n in order])
        base = delay[ref] if ref else float(np.median(d))
        offsets = {n: float(x - base) for n, x in zip(order, d)}
        skew = (max(abs(v) for n, v in offsets.items() if n != ref) if ref and len(order) > 1
                else float(d.max() - d.min()))
        mine = segments[segments["net"].isin(members) | segments["pair"].isin(members)]
        layer, spm = "", float("nan")
        if len(mine):
            by_layer = mine.groupby("layer", sort=False)[["length", "delay"]].sum()
            layer = str(by_layer["length"].idxmax())
            spm = float(by_layer.loc[layer, "delay"] / by_layer.loc[layer, "length"])
        out.append(GroupTiming(group=g, nets=order, delays=d, reference=ref, min_delay=float(d.min()),
                               max_delay=float(d.max()), skew=skew, main_layer=layer, seconds_per_m=spm,
                               offsets=offsets))
    return out


def pair_skew(nets: pd.DataFrame) -> np.ndarray:
    """|delay of a leg - delay of its partner| per net (s); NaN for single nets, and where a leg is known only
    through its partner's rows (its delay is a copy, so its skew is unknown)."""
    net_col, pair_col = nets["net"].to_numpy(object).tolist(), nets["pair"].to_numpy(object).tolist()
    delay = dict(zip(net_col, nets["delay"].to_numpy(float)))
    mirrored = (set(nets.loc[nets["mirrored"].to_numpy(bool), "net"].to_numpy(object).tolist())
                if "mirrored" in nets.columns else set())
    out = np.full(len(nets), np.nan)
    for i, (net, pair) in enumerate(zip(net_col, pair_col)):
        if pair and pair in delay and net not in mirrored and pair not in mirrored:
            out[i] = abs(delay[net] - delay[pair])
    return out
