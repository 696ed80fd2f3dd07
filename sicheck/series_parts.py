"""Nets that continue as other nets through a part in series (trace-list columns `continues`, `part`).

Pure table work (no files, no printing). A row that gives `continues` (the net on the far side) and
`part` (`100nF`, `22ohm`, `0ohm`) is where its net ends at the part. The nets so linked are joined
into one net, named with the routed nets in order, driver side first ("A → B"); each row keeps its
own routed net in the column `routed_net`, and the row before the part carries the part
(`part_ohm`, `part_farad`) so the waveform stage puts it in the chain after that row.

- Without from/to nodes the joined net is a chain: the first net's rows, then the next net's, each in
  the order listed; the part follows the first net's last row, so `continues` goes on that row.
- With from/to nodes the part joins the row's `to` node to the node where the next net begins (its
  `driver` column, else its first row's `from`); the two become one node, named after both
  ("C5.1 ~ C5.2"), so the two nets make one tree and the part's pins are not taken for receivers.
A loop of nets, a net continuing into two nets, two nets continuing into one, or `continues` naming
a net not in the list is an input error naming the rows.
"""

from __future__ import annotations

import fnmatch
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from sicheck import plausible
from sicheck.errors import InputError
from sicheck.units import QUANTITY_RE, UnitError, parse_number, unit_factor

JOIN = " → "     # between routed net names in a joined net's name (cannot be confused with '/' or '&')


def part_value(text: str) -> tuple[float, float | None]:
    """'22ohm' -> (22.0, None); '100nF' -> (0.0, 1e-7). ValueError with the reason otherwise."""
    m = QUANTITY_RE.match(str(text))
    unit = m.group(2) if m else ""
    if not m or not unit:
        raise ValueError(f"part '{text}' is not a resistor or capacitor value: write it with its unit, e.g. "
                         "'22ohm', '0ohm' or '100nF'")
    number = parse_number(m.group(1).replace(",", "."))
    for dim, quantity in (("resistance", "series_ohm"), ("capacitance", "series_farad")):
        try:
            value = number * unit_factor(unit, dim)
        except UnitError:
            continue
        if bad := plausible.check(quantity, value):
            raise ValueError(f"part '{text}': {bad}")
        return (value, None) if dim == "resistance" else (0.0, value)
    raise ValueError(f"part '{text}': unit '{unit}' is neither a resistance (ohm, kohm) nor a capacitance "
                     "(pF, nF, uF)")


def parse_part(text: str, src: str, row: int, column: str = "part") -> tuple[float, float | None]:
    """part_value, with an InputError naming the cell."""
    try:
        return part_value(text)
    except ValueError as e:
        raise InputError(str(e), file=src, row=row, column=column) from None


@dataclass(frozen=True)
class SeriesRule:
    """A rules-file [[series_part]]: nets matching `match` continue as `to` ('{}' is the net's name)."""

    match: str
    to: str
    part: str
    origin: str


RULE_KEYS = ("from", "to", "part")


def read_series_rules(src, raw, known: tuple = ()) -> tuple[SeriesRule, ...]:
    """``known`` plus the ``[[series_part]]`` tables of one rules file (a TomlSource); errors name file, line, key."""
    if not isinstance(raw, list):
        raise src.error("series_part must be written as [[series_part]] tables", "series_part")
    out = list(known)
    for i, t in enumerate(raw):
        if not isinstance(t, dict):
            raise src.error("series_part must be written as [[series_part]] tables", None, "series_part", i)
        for key in t:
            if key not in RULE_KEYS:
                raise src.error(f"unknown key '{key}' in a series part (allowed: {', '.join(RULE_KEYS)})", key,
                                "series_part", i)
        for key in RULE_KEYS:
            if not isinstance(t.get(key), str) or not t[key].strip():
                raise src.error(f"every [[series_part]] needs '{key}' as text (from: a net-name pattern such as "
                                "\"TX*_P\"; to: the net on the far side, '{}' standing for the matched name, e.g. "
                                "\"{}_C\"; part: \"100nF\" or \"22ohm\")", key if key in t else None, "series_part", i)
        try:
            part_value(t["part"])
        except ValueError as e:
            raise src.error(str(e), "part", "series_part", i) from None
        out.append(SeriesRule(t["from"].strip(), t["to"].strip(), t["part"].strip(),
                              f"{src.path}, line {src.block('series_part', i)[0] + 1}"))
    return tuple(out)


def _apply_rules(df: pd.DataFrame, rules: Sequence[SeriesRule]) -> pd.DataFrame:
    """Fill `continues`/`part` on the last row of each net a [[series_part]] matches (nets without from/to whose
    rows give no `continues` of their own)."""
    if not rules:
        return df
    df = df.copy()
    for c in ("continues", "part"):
        if c not in df.columns:
            df[c] = ""
    net = df["net"].to_numpy(object)
    known = set(net)
    has_nodes = df["from"].to_numpy(object) if "from" in df.columns else np.full(len(df), "", object)
    given = {n for n, c in zip(net, df["continues"].to_numpy(object)) if c}
    for name in pd.unique(net):
        ix = np.flatnonzero(net == name)
        if name in given or any(has_nodes[ix]):
            continue
        for r in rules:
            target = r.to.replace("{}", name)
            if fnmatch.fnmatchcase(name.upper(), r.match.upper()) and target in known and target != name:
                df.iloc[ix[-1], df.columns.get_loc("continues")] = target
                df.iloc[ix[-1], df.columns.get_loc("part")] = r.part
                break
    return df


def join(df: pd.DataFrame, src: str, rules: Sequence[SeriesRule] = ()) -> pd.DataFrame:
    """The trace table with linked nets joined (see the module doc); unchanged (plus empty columns)
    when no row gives `continues`. ``rules``: the rules files' [[series_part]] tables."""
    df = _apply_rules(df, rules)
    df = df.copy()
    df["routed_net"] = df["net"].to_numpy()
    df["part_ohm"] = np.nan
    df["part_farad"] = np.nan
    cont = df["continues"].to_numpy(object) if "continues" in df.columns else np.full(len(df), "", object)
    part = df["part"].to_numpy(object) if "part" in df.columns else np.full(len(df), "", object)
    rows = df["row"].to_numpy(int)
    net = df["net"].to_numpy(object)
    for k in range(len(df)):
        if bool(cont[k]) != bool(part[k]):
            col = "part" if cont[k] else "continues"
            raise InputError(f"net '{net[k]}': 'continues' and 'part' go together (the net on the far side and "
                             "the part between them, e.g. 100nF)", file=src, row=int(rows[k]), column=col)
    links = [k for k in range(len(df)) if cont[k]]
    if not links:
        return df
    known = set(net)
    nxt: dict[str, int] = {}            # net -> the row (position) where it continues
    into: dict[str, int] = {}
    for k in links:
        a, b = net[k], cont[k]
        if b not in known:
            raise InputError(f"net '{a}' continues as '{b}', which is not a net of the trace list", file=src,
                             row=int(rows[k]), column="continues")
        if a in nxt:
            raise InputError(f"net '{a}' continues on two rows ({rows[nxt[a]]} and {rows[k]}): a net continues "
                             "through one part", file=src, row=int(rows[k]), column="continues")
        if b in into:
            raise InputError(f"nets '{net[into[b]]}' (row {rows[into[b]]}) and '{a}' both continue as '{b}'",
                             file=src, row=int(rows[k]), column="continues")
        nxt[a], into[b] = k, k
        ohm, farad = parse_part(str(part[k]), src, int(rows[k]))
        df.iloc[k, df.columns.get_loc("part_ohm")] = ohm
        df.iloc[k, df.columns.get_loc("part_farad")] = np.nan if farad is None else farad
    # chains: start at a net nothing continues into; a loop has no such start
    chains: list[list[str]] = []
    seen: set[str] = set()
    for a in nxt:
        if a in into:
            continue
        chain = [a]
        while chain[-1] in nxt:
            chain.append(cont[nxt[chain[-1]]])
        chains.append(chain)
        seen.update(chain)
    looped = [k for k in links if net[k] not in seen]
    if looped:
        raise InputError(f"rows {', '.join(str(rows[k]) for k in looped)} form a loop of 'continues' "
                         f"({' → '.join(str(net[k]) for k in looped)} → back): a net cannot continue into itself",
                         file=src, row=int(rows[looped[0]]), column="continues")

    frm = df["from"].to_numpy(object).copy() if "from" in df.columns else None
    to = df["to"].to_numpy(object).copy() if "to" in df.columns else None
    drv = df["driver"].to_numpy(object).copy() if "driver" in df.columns else None
    pair = df["pair"].to_numpy(object).copy()
    name = net.copy()
    rank = np.zeros(len(df), int)          # position along the chain (rows of the first net first)
    for chain in chains:
        joined = JOIN.join(chain)
        members = [np.flatnonzero(net == n) for n in chain]
        for step, ix in enumerate(members):
            name[ix] = joined
            rank[ix] = step
        pairs = [str(pair[ix[0]]) for ix in members]
        if any(pairs) and not all(pairs):
            k = members[[bool(p) for p in pairs].index(False)][0]
            raise InputError(f"'{joined}': some of its nets are pair legs and some are not; give 'pair' on "
                             "every net of the chain or on none", file=src, row=int(rows[k]), column="pair")
        if all(pairs):
            for ix in members:
                pair[ix] = JOIN.join(pairs)
        with_nodes = [frm is not None and any(frm[ix]) for ix in members]
        if any(with_nodes) and not all(with_nodes):
            k = members[with_nodes.index(False)][0]
            raise InputError(f"'{joined}': give 'from'/'to' nodes on every net of the chain or on none",
                             file=src, row=int(rows[k]), column="from")
        for step in range(len(chain) - 1):
            k = nxt[chain[step]]
            a_ix, b_ix = members[step], members[step + 1]
            if not with_nodes[0]:
                if k != a_ix[-1]:
                    raise InputError(f"net '{chain[step]}' continues as '{chain[step + 1]}' on a row that is not "
                                     f"its last (row {rows[a_ix[-1]]} is): without from/to the part follows the "
                                     "net's last row", file=src, row=int(rows[k]), column="continues")
                continue
            end = str(to[k])
            given = [str(drv[j]) for j in b_ix if drv is not None and drv[j]]
            start = given[0] if given else str(frm[b_ix[0]])
            if drv is not None:
                drv[b_ix] = ""           # the joined net has one driver: the first net's
            a_nodes = set(frm[a_ix]) | set(to[a_ix])
            shared = sorted((set(frm[b_ix]) | set(to[b_ix])) & a_nodes - {start})
            if shared:
                raise InputError(f"nets '{chain[step]}' and '{chain[step + 1]}' both use node(s) "
                                 f"{', '.join(shared)}: the nets of a chain are joined at the part only; rename "
                                 "them", file=src, row=int(rows[b_ix[0]]), column="from")
            joint = f"{end} ~ {start}"     # the part's two pins as one node (not a REF.PIN: not a receiver)
            for arr in (frm, to):
                for ix, old in ((a_ix, end), (b_ix, start)):
                    sub = arr[ix]
                    sub[sub == old] = joint
                    arr[ix] = sub
    df["net"] = name
    df["pair"] = pair
    if frm is not None:
        df["from"], df["to"] = frm, to
    if drv is not None:
        df["driver"] = drv
    first = pd.Series(np.arange(len(df))).groupby(name).transform("min").to_numpy()
    order = np.lexsort((np.arange(len(df)), rank, first))
    return df.iloc[order].reset_index(drop=True)


def check_part_side(tops: dict, seg: pd.DataFrame, to, src: str) -> None:
    """With from/to: the part sits at its row's `to` node, so that node must be the row's far side from the
    driver (else the part would be put on the driver's side of the row). InputError naming the row."""
    if "part_ohm" not in seg.columns:
        return
    has = np.isfinite(seg["part_ohm"].to_numpy(float))
    for net, (ix, t) in tops.items():
        for k, j in enumerate(ix):
            if has[j] and t.far[k] != to[j]:
                raise InputError(f"'{net}': the part is at this row's 'to' node, but that end is toward the driver "
                                 f"'{t.driver}'; list the row from the driver side (swap 'from' and 'to')",
                                 file=src, row=int(seg["row"].iat[j]), column="to")
