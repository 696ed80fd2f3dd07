"""The waveform stage of a review: simulate each net that needs termination.

For every net classified `recommended` or `required` (the longest first, up to the
rules' max_nets), the net's own chain of segments (each with its Z and delay) is
simulated unterminated and with each standard scheme; the chosen part and its
before/after receiver metrics are added to the nets table.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from sicheck.physics.termination_choice import Limits, choose
from sicheck.rules import Rules

METRIC_KEYS = ("overshoot_pct", "ringback_pct", "settle_ns", "flight_ns")
CHARTS = 12      # waveforms kept for the workbook: the worst nets by unterminated overshoot


def simulate_nets(seg: pd.DataFrame, nets: pd.DataFrame, rules: Rules) -> tuple[pd.DataFrame, dict]:
    classes = {c.name: c for c in rules.classes}
    cols = {f"{w}_{k}": np.full(len(nets), np.nan) for w in ("before", "after") for k in METRIC_KEYS}
    scheme = np.full(len(nets), "", dtype=object)
    part = np.full(len(nets), "", dtype=object)
    power = np.full(len(nets), np.nan)
    meets = np.full(len(nets), None, dtype=object)
    notes = np.full(len(nets), "", dtype=object)
    violations = np.full(len(nets), "", dtype=object)
    waves: dict[str, tuple] = {}

    flagged = nets.index[nets["termination"] != "not-needed"]
    order = nets.loc[flagged].sort_values("delay", ascending=False).index[:rules.max_nets]
    by_net = {n: g for n, g in seg.groupby("net", sort=False)}
    done_pair: dict[frozenset, int] = {}
    for i in order:
        r = nets.loc[i]
        net = r["net"]
        pair = r["pair"]
        if pair:
            key = frozenset((net, pair))
            if key in done_pair:      # the partner leg: same result
                j = done_pair[key]
                for c in cols:
                    cols[c][i] = cols[c][j]
                scheme[i], part[i], power[i], meets[i] = scheme[j], part[j], power[j], meets[j]
                notes[i], violations[i] = notes[j], violations[j]
                continue
            done_pair[key] = i
        g = by_net[net]
        z = g["zodd"].tolist() if pair else g["z0"].tolist()
        td = g["delay"].tolist()
        cls = classes.get(r["net_class"])
        assumed = []
        drv = r["driver_ohm"]
        if np.isnan(drv):
            drv = rules.driver_ohm
            assumed.append(f"driver {drv:g} ohm")
        cap = r["load_pf"]
        if np.isnan(cap):
            cap = rules.load_pf
            assumed.append(f"load {cap:g} pF")
        swing = (cls.swing if cls and cls.swing else None)
        if swing is None:
            swing = rules.swing
        limits = Limits(
            max_overshoot_pct=(cls.max_overshoot_pct if cls and cls.max_overshoot_pct is not None
                               else rules.max_overshoot_pct),
            max_ringback_pct=(cls.max_ringback_pct if cls and cls.max_ringback_pct is not None
                              else rules.max_ringback_pct),
            max_settle_ns=cls.max_settle_ns if cls else None,
            settle_rise_times=rules.settle_rise_times)
        zd = float(r["z_driver_end"]) if pair else None
        before, after, _ = choose(z, td, float(r["rise_time"]), float(drv), swing / (2.0 if pair else 1.0),
                                  float(cap) * 1e-12, limits, zdiff=zd, keep_waves=True)
        for k in METRIC_KEYS:
            cols[f"before_{k}"][i] = before.metrics[k]
            cols[f"after_{k}"][i] = after.metrics[k]
        scheme[i] = after.scheme
        part[i] = "no part: meets the limits as it is" if after.scheme == "none" else after.text
        power[i] = after.power_w
        meets[i] = after.meets
        violations[i] = "; ".join(after.violations)
        notes[i] = ("assumed " + ", ".join(assumed) + " (rules [waveform])") if assumed else ""
        waves[net] = (before.wave, after.wave, before.metrics["v_final"] if before.wave else None)
    out = nets.copy()
    for c, v in cols.items():
        out[c] = v
    out["recommended_termination"] = scheme
    out["termination_part"] = part
    out["termination_power_w"] = power
    out["waveform_meets_limits"] = meets
    out["waveform_violations"] = violations
    out["waveform_assumptions"] = notes
    worst = out.loc[order].sort_values("before_overshoot_pct", ascending=False)
    keep, seen = [], set()
    for net, pair in zip(worst["net"], worst["pair"]):
        key = frozenset((net, pair)) if pair else net
        if key in seen or net not in waves:
            continue
        seen.add(key)
        keep.append(net)
        if len(keep) >= CHARTS:
            break
    return out, {n: waves[n] for n in keep}
