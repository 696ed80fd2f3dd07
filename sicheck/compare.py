"""What changed between two reviews: per net, the classification, termination, impedance per layer, delay,
loss and findings, with both values, sorted by how much they moved.

Pure: works on two review dicts in the JSON form (`reports.json_report.review_dict`), so it compares two
JSON files from different revisions as well as two reviews of one trace list on two stackups.
A numeric value has changed when it moved by more than `threshold_pct` % of the larger of the two values
(2 % by default); a changed classification, termination or finding counts as a move of 100 % for sorting.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from sicheck.signoff import moved_pct

THRESHOLD_PCT = 2.0
DISCRETE_SCORE = 100.0
BOARD = "(board)"               # findings about no net (rule set, cross-sections) are listed under this name


@dataclass(frozen=True)
class Change:
    what: str                   # "electrical", "termination", "Z on L3", "delay", "loss", "finding ...", "net"
    old: object
    new: object
    unit: str = ""
    pct: float | None = None    # numeric move in % (signed: new against old), None for a discrete change

    @property
    def score(self) -> float:
        return DISCRETE_SCORE if self.pct is None else abs(self.pct)


@dataclass
class NetChanges:
    net: str
    changes: list[Change] = field(default_factory=list)
    introduces_error: bool = False

    @property
    def score(self) -> float:
        return max((c.score for c in self.changes), default=0.0)


@dataclass
class Comparison:
    old_source: str
    new_source: str
    threshold_pct: float
    nets: list[NetChanges]
    findings_added: list[dict]
    findings_resolved: list[dict]
    nets_compared: int

    @property
    def introduces_error(self) -> bool:
        return any(n.introduces_error for n in self.nets)

    @property
    def exit_code(self) -> int:
        return 1 if self.introduces_error else 0


def _finite(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _signed_pct(old: float, new: float) -> float:
    """Move in % of the larger magnitude, with the sign of new - old (the size is `moved_pct`)."""
    return math.copysign(moved_pct(old, new), new - old) if old != new else 0.0


def _numeric(what: str, old, new, unit: str, threshold: float) -> Change | None:
    if not _finite(old) and not _finite(new):
        return None
    if not (_finite(old) and _finite(new)):
        return Change(what, old if _finite(old) else None, new if _finite(new) else None, unit)
    p = _signed_pct(float(old), float(new))
    return Change(what, old, new, unit, p) if abs(p) > threshold else None


def _z_by_layer(review: dict) -> dict[str, dict[str, float]]:
    """net -> layer -> length-weighted mean impedance of its segments there (Zdiff for pairs, else Z0)."""
    acc: dict[str, dict[str, list[float]]] = {}
    for s in review.get("segments", []):
        z = s.get("zdiff_ohm") if s.get("pair") else s.get("z0_ohm")
        length = s.get("length_mm")
        if not _finite(z) or not _finite(length):
            continue
        w = max(float(length), 1e-12)
        slot = acc.setdefault(s.get("net", ""), {}).setdefault(s.get("layer", ""), [0.0, 0.0])
        slot[0] += w * float(z)
        slot[1] += w
    out: dict[str, dict[str, float]] = {}
    for net, layers in acc.items():
        out[net] = {layer: a / b for layer, (a, b) in layers.items()}
    for s in review.get("segments", []):          # a partner listed only through its pair has the same Zdiff
        p = s.get("pair")
        if p and p not in out and s.get("net") in out:
            out[p] = out[s["net"]]
    return out


def _finding_label(f: dict) -> str:
    return f"{f.get('severity', '')} {f.get('rule', '')}: {f.get('message', '')}".strip()


def compare(old: dict, new: dict, threshold_pct: float = THRESHOLD_PCT, old_source: str = "",
            new_source: str = "") -> Comparison:
    old_nets = {n["net"]: n for n in old.get("nets", [])}
    new_nets = {n["net"]: n for n in new.get("nets", [])}
    z_old, z_new = _z_by_layer(old), _z_by_layer(new)
    rows: dict[str, NetChanges] = {}

    def row(net: str) -> NetChanges:
        return rows.setdefault(net, NetChanges(net))

    for net in sorted(set(old_nets) | set(new_nets)):
        a, b = old_nets.get(net), new_nets.get(net)
        if a is None or b is None:
            row(net).changes.append(Change("net", "listed" if a else None, "listed" if b else None))
            continue
        for key, what in (("electrical", "electrical"), ("termination", "termination"),
                          ("recommended_termination", "termination part")):
            if a.get(key) != b.get(key):
                row(net).changes.append(Change(what, a.get(key), b.get(key)))
        za, zb = z_old.get(net, {}), z_new.get(net, {})
        for layer in sorted(set(za) | set(zb)):
            c = _numeric(f"Z on {layer}", za.get(layer), zb.get(layer), "ohm", threshold_pct)
            if c:
                row(net).changes.append(c)
        for key, what, unit in (("delay_ps", "delay", "ps"), ("loss_db", "loss", "dB")):
            c = _numeric(what, a.get(key), b.get(key), unit, threshold_pct)
            if c:
                row(net).changes.append(c)

    fo = {f["key"]: f for f in old.get("findings", []) if f.get("key")}
    fn = {f["key"]: f for f in new.get("findings", []) if f.get("key")}
    added = [fn[k] for k in fn if k not in fo]
    resolved = [fo[k] for k in fo if k not in fn]
    for f in added:
        r = row(f.get("net") or BOARD)
        r.changes.append(Change("finding added", None, _finding_label(f)))
        r.introduces_error |= f.get("severity") == "error"
    for f in resolved:
        row(f.get("net") or BOARD).changes.append(Change("finding resolved", _finding_label(f), None))
    for k in fo.keys() & fn.keys():
        a, b = fo[k], fn[k]
        if a.get("severity") != b.get("severity"):
            r = row(b.get("net") or BOARD)
            r.changes.append(Change(f"finding {b.get('rule', '')} severity", a.get("severity"), b.get("severity")))
            r.introduces_error |= b.get("severity") == "error"
        else:
            c = _numeric(f"finding {b.get('rule', '')}", a.get("value"), b.get("value"), b.get("unit") or "",
                         threshold_pct)
            if c:
                row(b.get("net") or BOARD).changes.append(c)
    nets = [r for r in rows.values() if r.changes]
    for r in nets:
        r.changes.sort(key=lambda c: -c.score)
    nets.sort(key=lambda r: (not r.introduces_error, -r.score, r.net))
    return Comparison(old_source=old_source, new_source=new_source, threshold_pct=threshold_pct, nets=nets,
                      findings_added=added, findings_resolved=resolved,
                      nets_compared=len(set(old_nets) | set(new_nets)))


def comparison_dict(c: Comparison) -> dict:
    """The comparison as JSON (numbers as given by the two reviews)."""
    return {
        "old": c.old_source, "new": c.new_source, "threshold_pct": c.threshold_pct,
        "nets_compared": c.nets_compared, "nets_changed": len(c.nets),
        "introduces_error": c.introduces_error, "exit_code": c.exit_code,
        "nets": [{"net": r.net, "introduces_error": r.introduces_error, "score_pct": round(r.score, 3),
                  "changes": [{"what": x.what, "old": x.old, "new": x.new, "unit": x.unit or None,
                               "change_pct": None if x.pct is None else round(x.pct, 3)} for x in r.changes]}
                 for r in c.nets],
        "findings_added": c.findings_added, "findings_resolved": c.findings_resolved,
    }
