"""A net's shape from the trace list's `from` / `to` columns: driver, receivers, main path, stubs.

Pure table work (no files, no printing). With node names a net is a graph whose edges are its
segments; it must be a tree (a loop or a piece that does not connect is an input error naming the
rows). Rooted at the driver, every segment gets a near node (toward the driver) and a far node:
- the driver: the node the `driver` column names (any row of the net may carry it; rows that give
  it must agree), else the one node matching the net class's `driver` patterns (`U1.*`), else the
  first listed row's `from` (stated);
- receivers: the component pins other than the driver, written REF.PIN (`U3.7`, `J2.A11`; a pin
  passed through on a daisy chain too), and the leaves (one segment) whose segment gives
  `load_pf`; any other leaf (a bare test pad, a via left open) is an open stub end. When nothing
  qualifies, every leaf is taken as a receiver (stated);
- the main path: driver to the receiver with the longest delay (ties: the receiver name first in
  sort order, so the result does not depend on the order rows are listed in);
- stubs: what hangs off the main path at each of its nodes, measured along its longest route.
A net without node names is a chain: its rows in series in the order listed, driver first.
"""

from __future__ import annotations

import fnmatch
import re
from dataclasses import dataclass
from typing import Mapping, Sequence

from sicheck.errors import InputError

# REF.PIN: a reference designator (letters then a number, an optional suffix) and a pin name or number
PIN_RE = re.compile(r"^[A-Za-z]+[0-9]+[A-Za-z0-9_]*\.[A-Za-z0-9_]+$")
CHAIN_NOTE = "rows in series in the order listed, driver first (no from/to columns)"
MAX_LISTED = 8          # rows or nodes named in one message


@dataclass(frozen=True)
class Stub:
    node: str               # where it leaves the main path
    length: float           # along its longest route (m)
    delay: float            # (s)
    end: str                # the far node of that route
    segments: tuple[int, ...]   # the net's segments in it (indices in listed order)


@dataclass(frozen=True)
class Topology:
    """One net's tree. Segment indices count the net's rows in the order listed (0, 1, ...)."""

    driver: str
    driver_source: str
    order: tuple[int, ...]          # segments, each after the one before it toward the driver
    parent: tuple[int, ...]         # per segment (listed order): the segment before it toward the driver, -1 at the driver
    near: tuple[str, ...]           # per segment: its end toward the driver
    far: tuple[str, ...]            # per segment: its other end
    receivers: tuple[str, ...]      # the main path's receiver first, then by delay (longest first) and name
    receiver_segment: tuple[int, ...]   # the segment that ends at each receiver
    receiver_delay: tuple[float, ...]   # driver to each receiver (s)
    receiver_length: tuple[float, ...]  # (m)
    open_ends: tuple[str, ...]
    path: tuple[int, ...]           # the main path's segments, driver first
    stubs: tuple[Stub, ...]
    note: str = ""                  # how the driver and receivers were found, for findings

    @property
    def branched(self) -> bool:
        return bool(self.stubs)


def _listed(rows: Sequence[int]) -> str:
    rows = sorted(set(int(r) for r in rows))
    shown = ", ".join(str(r) for r in rows[:MAX_LISTED])
    return shown + (f" and {len(rows) - MAX_LISTED} more" if len(rows) > MAX_LISTED else "")


def chain(lengths: Sequence[float], delays: Sequence[float]) -> Topology:
    """A net without node names: its rows in series, driver first."""
    n = len(lengths)
    names = [f"end of row {i + 1}" for i in range(n)]
    return Topology(driver="driver end", driver_source=CHAIN_NOTE, order=tuple(range(n)),
                    parent=tuple(range(-1, n - 1)), near=tuple(["driver end"] + names[:-1]), far=tuple(names),
                    receivers=(names[-1],), receiver_segment=(n - 1,), receiver_delay=(float(sum(delays)),),
                    receiver_length=(float(sum(lengths)),), open_ends=(), path=tuple(range(n)), stubs=(),
                    note=CHAIN_NOTE)


def build(net: str, rows: Sequence[int], frm: Sequence[str], to: Sequence[str], driver: Sequence[str],
          lengths: Sequence[float], delays: Sequence[float], load_given: Sequence[bool], src: str,
          driver_patterns: Sequence[str] = (), class_name: str = "") -> Topology:
    """The tree of one net whose rows name their nodes; InputError (file, row, column) when it is not one.

    driver_patterns: the net class's node-name globs for the driver (used when no row names one).
    """
    n = len(rows)
    for i in range(n):
        for col, val in (("from", frm[i]), ("to", to[i])):
            if not val:
                raise InputError(f"net '{net}' names the nodes of some rows but this row has no '{col}': give "
                                 "'from' and 'to' on every row of a net, or on none", file=src, row=int(rows[i]),
                                 column=col)
        if frm[i] == to[i]:
            raise InputError(f"net '{net}': the segment starts and ends at the same node '{frm[i]}'", file=src,
                             row=int(rows[i]), column="to")
    adj: dict[str, list[tuple[int, str]]] = {}
    for i in range(n):
        adj.setdefault(frm[i], []).append((i, to[i]))
        adj.setdefault(to[i], []).append((i, frm[i]))

    # a loop: the first row (in listed order) whose two ends are already connected closes one
    rep = {x: x for x in adj}

    def find(x):
        while rep[x] != x:
            rep[x] = rep[rep[x]]
            x = rep[x]
        return x

    for i in range(n):
        a, b = find(frm[i]), find(to[i])
        if a == b:
            loop = _route(adj, frm[i], to[i], before=i) + [i]
            raise InputError(f"net '{net}': rows {_listed([rows[k] for k in loop])} form a loop (from/to); a net's "
                             "segments must form a tree (one route from the driver to each node)", file=src,
                             row=int(rows[i]), column="to")
        rep[a] = b

    # the driver
    given = [(i, d) for i, d in enumerate(driver) if d]
    if given:
        names = {d for _, d in given}
        if len(names) > 1:
            raise InputError(f"net '{net}' names different drivers on rows "
                             f"{_listed([rows[i] for i, _ in given])}: give one driver node per net",
                             file=src, row=int(rows[given[-1][0]]), column="driver")
        i, root = given[0]
        if root not in adj:
            some = ", ".join(sorted(adj)[:MAX_LISTED])
            raise InputError(f"driver '{root}' is not a node of net '{net}' (its from/to nodes: {some}"
                             f"{', ...' if len(adj) > MAX_LISTED else ''})", file=src, row=int(rows[i]),
                             column="driver")
        source = f"driver '{root}' from the driver column"
    elif driver_patterns and (hits := sorted(x for x in adj if any(fnmatch.fnmatchcase(x.upper(), p.upper())
                                                                    for p in driver_patterns))):
        if len(hits) > 1:
            raise InputError(f"net '{net}': several nodes match net class '{class_name}' driver pattern "
                             f"{', '.join(driver_patterns)}: {', '.join(hits[:MAX_LISTED])}; name the driver in a "
                             "'driver' column", file=src, row=int(rows[0]), column="driver")
        root = hits[0]
        source = f"driver '{root}' from net class '{class_name}' (driver pattern {', '.join(driver_patterns)})"
    else:
        root = frm[0]
        source = f"driver '{root}' taken as the first row's 'from' (no driver given)"

    # orient every segment away from the driver
    parent = [-2] * n
    near, far = [""] * n, [""] * n
    order: list[int] = []
    seg_into: dict[str, int] = {root: -1}
    stack = [root]
    while stack:
        x = stack.pop()
        for i, y in adj[x]:
            if parent[i] != -2:
                continue
            parent[i] = seg_into[x]
            near[i], far[i] = x, y
            seg_into[y] = i
            order.append(i)
            stack.append(y)
    lost = [i for i in range(n) if parent[i] == -2]
    if lost:
        raise InputError(f"net '{net}' is in pieces: rows {_listed([rows[i] for i in lost])} do not connect to the "
                         f"driver '{root}' (check their from/to)", file=src, row=int(rows[lost[0]]), column="from")

    # delays and lengths from the driver (summed along the route, so independent of the listed order)
    at_delay = {root: 0.0}
    at_length = {root: 0.0}
    for i in order:
        at_delay[far[i]] = at_delay[near[i]] + float(delays[i])
        at_length[far[i]] = at_length[near[i]] + float(lengths[i])
    leaves = sorted(x for x, e in adj.items() if len(e) == 1 and x != root)
    # a pin passed through on the way (a daisy chain) receives too
    through = sorted(x for x, e in adj.items() if len(e) > 1 and x != root and PIN_RE.match(x))
    rx = [x for x in leaves if PIN_RE.match(x) or load_given[seg_into[x]]] + through
    note = source
    if not rx:
        rx = leaves
        note += "; no open end is a component pin (REF.PIN) or gives load_pf, so every open end is a receiver"
    open_ends = tuple(x for x in leaves if x not in rx)
    rx.sort(key=lambda x: (-at_delay[x], x))
    main = rx[0]
    path: list[int] = []
    x = main
    while x != root:
        i = seg_into[x]
        path.append(i)
        x = near[i]
    path.reverse()
    on_path = set(path)

    children: dict[str, list[int]] = {}
    for i in order:
        children.setdefault(near[i], []).append(i)
    stubs = []
    path_nodes = [root] + [far[i] for i in path]
    for node in path_nodes:
        for i in sorted(children.get(node, []), key=lambda k: far[k]):
            if i in on_path:
                continue
            segs, ends = _subtree(children, far, i)
            end = min(ends, key=lambda e: (-at_delay[e], e))
            stubs.append(Stub(node=node, length=at_length[end] - at_length[node],
                              delay=at_delay[end] - at_delay[node], end=end, segments=tuple(sorted(segs))))
    if len(rx) > 1 or open_ends:
        note += (f"; {len(rx)} receiver(s), farthest '{main}'" + (f", {len(open_ends)} open stub end(s)"
                                                                   if open_ends else ""))
    return Topology(driver=root, driver_source=source, order=tuple(order), parent=tuple(parent), near=tuple(near),
                    far=tuple(far), receivers=tuple(rx), receiver_segment=tuple(seg_into[x] for x in rx),
                    receiver_delay=tuple(at_delay[x] for x in rx), receiver_length=tuple(at_length[x] for x in rx),
                    open_ends=open_ends, path=tuple(path), stubs=tuple(stubs), note=note)


def _route(adj, a: str, b: str, before: int) -> list[int]:
    """Segments (among those listed before `before`) on the route from a to b."""
    prev: dict[str, tuple[str, int] | None] = {a: None}
    todo = [a]
    while todo:
        x = todo.pop()
        if x == b:
            break
        for i, y in adj[x]:
            if i < before and y not in prev:
                prev[y] = (x, i)
                todo.append(y)
    out = []
    x = b
    while prev.get(x):
        x, i = prev[x]
        out.append(i)
    return out


def _subtree(children, far, first: int) -> tuple[list[int], list[str]]:
    """The segments below (and including) one segment, and the nodes where it ends."""
    segs, ends = [], []
    todo = [first]
    while todo:
        i = todo.pop()
        segs.append(i)
        below = children.get(far[i], [])
        if below:
            todo.extend(below)
        else:
            ends.append(far[i])
    return segs, ends


def has_nodes(frm: Sequence[str], to: Sequence[str]) -> bool:
    return any(frm) or any(to)


def net_topologies(net: Sequence[str], rows: Sequence[int], frm: Sequence[str], to: Sequence[str],
                   driver: Sequence[str], lengths: Sequence[float], delays: Sequence[float],
                   load_given: Sequence[bool], src: str, driver_patterns: Mapping[str, tuple[str, str]] | None = None,
                   ) -> dict[str, tuple[list[int], Topology]]:
    """{net: (its positions in the inputs, in listed order; Topology)} for every net that names nodes.

    driver_patterns: net -> (class name, its driver node patterns) where the net's class gives some.
    """
    groups: dict[str, list[int]] = {}
    for k, name in enumerate(net):
        groups.setdefault(name, []).append(k)
    out = {}
    for name, ix in groups.items():
        f = [frm[k] for k in ix]
        t = [to[k] for k in ix]
        d = [driver[k] for k in ix]
        if not has_nodes(f, t):
            if any(d):
                k = next(k for k in ix if driver[k])
                raise InputError(f"net '{name}' names a driver but its rows give no 'from'/'to' nodes",
                                 file=src, row=int(rows[k]), column="driver")
            continue
        cls_name, pats = (driver_patterns or {}).get(name, ("", ()))
        out[name] = (ix, build(name, [rows[k] for k in ix], f, t, d, [lengths[k] for k in ix],
                               [delays[k] for k in ix], [bool(load_given[k]) for k in ix], src, pats, cls_name))
    return out
