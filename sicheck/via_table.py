"""Where a board's signal vias are and what each leaves behind: one row per via (or per export count).

A via is inferred wherever a net's consecutive trace-list rows change layer, and where a net's first or
last row lies on an inner layer (an escape via from the component side's outer layer). The optional
trace-list column `vias` adds vias the export counts itself (see `via_table`).

Geometry (positions from the stackup's layer thicknesses, top down):
- a through via's barrel runs from the top face of the first copper layer to the bottom face of the last;
- a blind via's barrel runs from the component side's outer face to the connected layer farthest from it;
- a backdrilled via is a through via drilled out from the side away from the components, leaving the
  stackup's `stub` (or less, where the geometry leaves less);
- a stub runs from the face of the outermost connected layer toward it to the barrel's end; the barrel
  between the two connected layers is measured from the middle of one layer's copper to the other's.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pandas as pd

from sicheck.physics.via_stub import barrel_delay, quarter_wave_resonance, weighted_er

VIA_COLUMNS = ["net", "pair", "row", "from_layer", "to_layer", "how", "count", "stub_length", "stub_er",
               "stub_to", "stub_resonance", "barrel_length", "barrel_delay", "freq", "mirrored"]


@dataclass(frozen=True)
class Transition:
    """One via between two copper layers: its stub (the longer one when both ends leave one) and barrel."""
    stub_length: float
    stub_er: float
    stub_to: str                 # the copper layer the stub ends at
    stub_resonance: float        # Hz (inf without a stub)
    barrel_length: float         # between the two connected layers
    barrel_er: float
    barrel_delay: float          # s


def _positions(stackup) -> tuple[dict[int, tuple[float, float]], list[tuple[float, float, float]]]:
    """Copper layer index -> (top z, bottom z); and the dielectrics as (top z, bottom z, er). z grows downward."""
    z = 0.0
    copper: dict[int, tuple[float, float]] = {}
    diel: list[tuple[float, float, float]] = []
    for l in stackup.layers:
        if l.copper:
            copper[l.index] = (z, z + l.thickness)
        elif l.type == "dielectric":          # masks lie outside the barrel
            diel.append((z, z + l.thickness, float(l.er)))
        z += l.thickness
    return copper, diel


def _span_er(diel, a: float, b: float) -> float:
    """Thickness-weighted er of the dielectric between depths a < b (only the overlapping parts count)."""
    t = [max(0.0, min(b, d1) - max(a, d0)) for d0, d1, _ in diel]
    return weighted_er(t, [e for _, _, e in diel])


@lru_cache(maxsize=4096)
def transition(stackup, a: str, b: str) -> Transition:
    """The via joining copper layers ``a`` and ``b`` (names) under the stackup's [vias] construction."""
    by_name = {l.name.lower(): l for l in stackup.layers if l.copper}
    la, lb = by_name[a.lower()], by_name[b.lower()]
    copper, diel = _positions(stackup)
    first, last = min(copper), max(copper)
    up, dn = (la, lb) if la.index <= lb.index else (lb, la)
    spec = stackup.vias
    top_end, bot_end = copper[first][0], copper[last][1]
    top_name, bot_name = stackup.layers[first].name, stackup.layers[last].name
    if spec.kind == "blind":      # drilled from the component side down to the farther connected layer
        if spec.component_side == "top":
            bot_end, bot_name = copper[dn.index][1], dn.name
        else:
            top_end, top_name = copper[up.index][0], up.name
    stubs = [(max(0.0, copper[up.index][0] - top_end), top_end, copper[up.index][0], top_name, "top"),
             (max(0.0, bot_end - copper[dn.index][1]), copper[dn.index][1], bot_end, bot_name, "bottom")]
    if spec.kind == "backdrilled":   # drilled from the side away from the components
        far = "bottom" if spec.component_side == "top" else "top"
        stubs = [(min(s[0], spec.stub), *s[1:]) if s[4] == far else s for s in stubs]
    best = None
    for length, z0, z1, name, _side in stubs:
        er = _span_er(diel, z0, z1) if length > 0 else 1.0
        f = float(quarter_wave_resonance(length, er))
        if best is None or f < best[3]:
            best = (length, er, name, f)
    zm_up = sum(copper[up.index]) / 2
    zm_dn = sum(copper[dn.index]) / 2
    blen = zm_dn - zm_up
    ber = _span_er(diel, zm_up, zm_dn) if blen > 0 else 1.0
    length, er, name, f = best
    if length <= 0:
        name = ""
    return Transition(length, er, name, f, blen, ber, float(barrel_delay(blen, ber)))


def component_layer(stackup) -> str:
    """The outer copper layer on the component side (where escape vias start)."""
    cu = [l for l in stackup.layers if l.copper]
    return (cu[0] if stackup.vias.component_side == "top" else cu[-1]).name


def inner_layers(stackup) -> set[str]:
    """Signal layers that are not an outer copper layer."""
    cu = [l for l in stackup.layers if l.copper]
    return {l.name for l in cu[1:-1] if l.type == "signal"}


def _tree_vias(layers: list[str], t, inner: set[str]) -> list[tuple[int, str, str, str]]:
    """(segment, from layer, to layer, how) for a net whose rows name nodes: a via wherever a segment leaves
    its parent's layer (one per node and layer pair, however many branches share it), an escape via at the
    driver and at each open end on an inner layer."""
    out, seen = [], set()
    children = {p for p in t.parent if p >= 0}
    for k in t.order:
        p = t.parent[k]
        if p < 0:
            if layers[k] in inner:
                out.append((k, "", layers[k], "escape"))
        elif layers[p] != layers[k] and (t.near[k], layers[p], layers[k]) not in seen:
            seen.add((t.near[k], layers[p], layers[k]))
            out.append((k, layers[p], layers[k], "layer change"))
        if k not in children and layers[k] in inner:
            out.append((k, layers[k], "", "escape"))
    return out


def via_table(seg: pd.DataFrame, stackup, topology: dict | None = None) -> pd.DataFrame:
    """One row per via of each net in ``seg`` (trace-list order within a net).

    A net in ``topology`` (net -> topology.Topology, from the `from`/`to` columns) has its vias where its
    tree changes layer (`_tree_vias`); any other net's rows are in series in the order listed.

    `how`: "layer change" (between consecutive rows), "escape" (first or last row on an inner layer) or
    "export" (the row's `vias` count: vias the export counts beyond those sicheck sees; each is taken as
    joining the row's layer to the component side, like an escape via, and counted `count` times; its delay
    is not added because sicheck cannot tell whether the signal runs through it; on the component side's
    own layer it joins nothing sicheck knows, so it is counted with no stub).
    """
    comp = component_layer(stackup)
    inner = inner_layers(stackup)
    topology = topology or {}
    n = len(seg)
    net, layer = seg["net"].to_numpy(object), seg["layer"].to_numpy(object)
    extra = seg["vias"].to_numpy(float) if "vias" in seg.columns else np.zeros(n)
    # each net's rows in listed order, nets in order of their first row
    code, names = pd.factorize(net)
    order = np.argsort(code, kind="stable")
    c, lay = code[order], layer[order]
    first, last = np.r_[True, c[1:] != c[:-1]], np.r_[c[1:] != c[:-1], True]
    start = np.flatnonzero(first)
    tree = np.zeros(len(names), bool)
    if topology:
        size = np.bincount(code, minlength=len(names))
        where = {name: k for k, name in enumerate(names.tolist())}
        for name, t in topology.items():
            k = where.get(name)
            if k is not None and t is not None and len(t.parent) == size[k]:
                tree[k] = True
    chain, on_inner = ~tree[c], np.isin(lay, list(inner))
    # vias as (position among the net's rows, slot, seg row, from, to, how); sorted into the table's order below
    p_esc_in = np.flatnonzero(first & chain & on_inner)
    p_change = np.flatnonzero(~first & chain & (lay != np.r_[lay[:1], lay[:-1]]))
    p_esc_out = np.flatnonzero(last & chain & on_inner)
    parts = [(p_esc_in, 0, lay[p_esc_in], lay[p_esc_in], "escape"),
             (p_change, 1, lay[p_change - 1], lay[p_change], "layer change"),
             (p_esc_out, 2, lay[p_esc_out], lay[p_esc_out], "escape")]
    froms = [np.full(len(p_esc_in), comp, dtype=object), parts[1][2], parts[2][2]]
    tos = [parts[0][3], parts[1][3], np.full(len(p_esc_out), comp, dtype=object)]
    pos = [q for q, *_ in parts]
    slot = [np.full(len(q), k) for q, k, *_ in parts]
    sub = [q for q in pos]
    how = [np.full(len(q), h, dtype=object) for q, *_, h in parts]
    for k in np.flatnonzero(tree).tolist():          # trees: a via wherever a branch leaves its parent's layer
        s0 = start[k]
        t = topology[names[k]]
        got = _tree_vias(lay[s0:s0 + len(t.parent)].tolist(), t, inner)
        pos.append(np.array([s0 + j for j, *_ in got], dtype=int))
        slot.append(np.full(len(got), 1))
        sub.append(np.arange(len(got)))
        froms.append(np.array([a or comp for _, a, _, _ in got], dtype=object))
        tos.append(np.array([b or comp for _, _, b, _ in got], dtype=object))
        how.append(np.array([h for *_, h in got], dtype=object))
    count = [np.ones(len(q), dtype=np.int64) for q in pos]
    delayed = [np.ones(len(q), bool) for q in pos]
    p_export = np.flatnonzero(extra[order] > 0)
    if len(p_export):
        pos.append(p_export)
        slot.append(np.full(len(p_export), 3))
        sub.append(p_export)
        froms.append(np.full(len(p_export), comp, dtype=object))
        tos.append(lay[p_export])
        how.append(np.full(len(p_export), "export", dtype=object))
        count.append(extra[order][p_export].astype(np.int64))
        delayed.append(np.zeros(len(p_export), bool))
    pos, slot, sub = np.concatenate(pos).astype(int), np.concatenate(slot), np.concatenate(sub)
    if len(pos) == 0:
        return pd.DataFrame([], columns=VIA_COLUMNS)
    ranked = np.lexsort((sub, slot, c[pos]))
    pos = pos[ranked]
    a, b, how = (np.concatenate(x)[ranked] for x in (froms, tos, how))
    count, delayed = np.concatenate(count)[ranked], np.concatenate(delayed)[ranked]
    i = order[pos]
    # an export count on the component side's own layer joins nothing sicheck knows: no stub, no barrel
    bare = how == "export"
    if bare.any():
        bare[bare] = np.char.lower(b[bare].astype(str)) == comp.lower()
    b = np.where(bare, comp, b)
    keys, pairs = _pairs(np.where(bare, "", a), np.where(bare, "", b))
    known = [None if x == "" else transition(stackup, x, y) for x, y in pairs]

    def prop(name, bare_value, dtype=float):
        return np.array([bare_value if t is None else getattr(t, name) for t in known], dtype=dtype)[keys]

    return pd.DataFrame({
        "net": net[i], "pair": seg["pair"].to_numpy(object)[i], "row": seg["row"].to_numpy()[i].astype(np.int64),
        "from_layer": a, "to_layer": b, "how": how, "count": count,
        "stub_length": prop("stub_length", 0.0), "stub_er": prop("stub_er", 1.0),
        "stub_to": prop("stub_to", "", object), "stub_resonance": prop("stub_resonance", math.inf),
        "barrel_length": prop("barrel_length", 0.0),
        "barrel_delay": np.where(delayed, prop("barrel_delay", 0.0), 0.0),
        "freq": seg["freq"].to_numpy(float)[i],
        "mirrored": (seg["mirrored"].to_numpy(bool) if "mirrored" in seg.columns else np.zeros(n, bool))[i],
    }, columns=VIA_COLUMNS)


def _pairs(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, list[tuple]]:
    """pd.factorize of the (a, b) pairs (codes, and the pairs in order of first appearance), from each side's
    few names factorized apart: a pair is one integer, not a tuple of two texts to hash."""
    ca, ua = pd.factorize(a)
    cb, ub = pd.factorize(b)
    codes, uniq = pd.factorize(ca.astype(np.int64) * len(ub) + cb)
    return codes, [(ua[k // len(ub)], ub[k % len(ub)]) for k in uniq.tolist()]


def via_delay_per_row(seg: pd.DataFrame, vias: pd.DataFrame) -> np.ndarray:
    """Each segment's share of barrel delay (the vias entered on its row), aligned with ``seg``'s rows.

    Matched on (net, row): a mirrored partner's rows carry the same row numbers as its listed leg's."""
    if vias.empty:
        return np.zeros(len(seg))
    # (net, row) as one integer: the net's code among both tables' names, then the row
    codes, _ = pd.factorize(np.concatenate([seg["net"].to_numpy(object), vias["net"].to_numpy(object)]))
    rows = np.concatenate([seg["row"].to_numpy(np.int64), vias["row"].to_numpy(np.int64)])
    key = codes.astype(np.int64) * (int(rows.max() - rows.min()) + 1) + (rows - rows.min())
    seg_key, via_key = key[:len(seg)], key[len(seg):]
    add = vias["barrel_delay"].groupby(via_key).sum()
    # a net's row may repeat only when the export lists a row twice; share the vias' delay among them
    _, at, counts = np.unique(seg_key, return_inverse=True, return_counts=True)
    return add.reindex(seg_key).fillna(0.0).to_numpy(float) / counts[at]


def net_via_summary(nets: pd.DataFrame, vias: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """(number of vias, lowest stub resonance in Hz or NaN) per net of ``nets``."""
    if vias.empty:
        return np.zeros(len(nets), int), np.full(len(nets), np.nan)
    # each via's net as its position in `nets` (names are unique there): sums and least values by position
    at = pd.Index(nets["net"].to_numpy(object)).get_indexer(vias["net"].to_numpy(object))
    known = at >= 0
    count = np.zeros(len(nets), dtype=np.int64)
    np.add.at(count, at[known], vias["count"].to_numpy(np.int64)[known])
    fres = vias["stub_resonance"].to_numpy(float)
    finite = known & np.isfinite(fres)
    least = np.full(len(nets), np.inf)
    np.minimum.at(least, at[finite], fres[finite])
    return count.astype(int), np.where(np.isinf(least), np.nan, least)
