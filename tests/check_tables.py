"""Tiny hand-made review contexts for check tests: no stackup, no solver.

Segments are written as dicts in friendly units (mm, ps, ohm); missing columns get plain defaults.
The net table is built by the review's own `_net_table`, which is pure table work.
"""

from __future__ import annotations

import math

import pandas as pd

from sicheck.checks import ReviewContext, run_checks
from sicheck.rules import NetClass, Rules

C0 = 299_792_458.0


def segments(*rows: dict) -> pd.DataFrame:
    out = []
    for i, r in enumerate(rows):
        eps = r.get("eps_eff", 4.0)
        d = {"row": r.get("row", i + 2), "net": r["net"], "pair": r.get("pair", ""), "layer": r.get("layer", "L1"),
             "net_class": r.get("net_class", "unclassified"), "kind": r.get("kind", "microstrip"),
             "length": r.get("length_mm", 50.0) * 1e-3, "width": r.get("width_mm", 0.15) * 1e-3,
             "gap": r.get("gap_mm", 0.15 if r.get("pair") else math.nan) * 1e-3,
             "z0": r.get("z0", 50.0), "zdiff": r.get("zdiff", math.nan if not r.get("pair") else 100.0),
             "zodd": r.get("zdiff", 100.0) / 2 if r.get("pair") else math.nan, "zeven": math.nan,
             "eps_eff": eps, "delay_per_m": math.sqrt(eps) / C0, "rise_time": r.get("rise_ps", 500.0) * 1e-12,
             "driver_ohm": r.get("driver_ohm", math.nan), "load_pf": math.nan, "freq": r.get("freq", 1e9),
             "xs": r.get("xs", 0), "mirrored": False, "loss_db": r.get("loss_db", 0.0),
             "model": r.get("model", "test"), "match_group": r.get("match_group", "")}
        d["delay"] = d["length"] * d["delay_per_m"]
        out.append(d)
    return pd.DataFrame(out)


def rules(classes=(), severity=None, match_groups=(), **settings) -> Rules:
    base = Rules()
    sev = dict(base.severity)
    sev.update(severity or {})
    st = dict(base.settings)
    st.update(settings)
    return Rules(settings=st, severity=sev, classes=tuple(classes), match_groups=tuple(match_groups))


def cls(name: str, match=(), **params) -> NetClass:
    return NetClass(name=name, match=tuple(match), params=params)


def context(seg: pd.DataFrame, rs: Rules, cross_sections=()) -> ReviewContext:
    from sicheck.review import _net_table
    return ReviewContext(segments=seg, nets=_net_table(seg, rs), rules=rs, cross_sections=list(cross_sections))


def findings(seg, rs, rule: str | None = None, cross_sections=()):
    """The findings of one check (by id), or of all."""
    from sicheck.checks import by_id
    ctx = context(seg, rs, cross_sections)
    return run_checks(ctx, None if rule is None else [by_id(rule)])


def needing_termination_longest_first(nets):
    """The checks' former loop, as a reference: the whole nets table sorted by delay, lumped nets skipped,
    a pair once (its first leg in that order)."""
    from sicheck.checks.engine import pair_id
    done = set()
    for r in nets.sort_values("delay", ascending=False).itertuples(index=False):
        if r.termination == "not-needed":
            continue
        if r.pair:
            ident = pair_id(r.net, r.pair)
            if ident in done:
                continue
            done.add(ident)
        yield r
