"""Waveform check: the simulated receiver waveform of nets that need termination."""

from __future__ import annotations

import pandas as pd

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label, plain_columns, prepared
from sicheck.checks.length import line_positions
from sicheck.checks.loss import first_rows

# Common practice values (see rules/default.toml); the waveform stage (waveform_review.py) reads them.
PARAMS = (
    Param("swing", "number", 3.3, "V", "driver swing when the class gives none (assumed; the % metrics do not "
          "depend on it)", section="waveform", hi=1e3),
    Param("driver_ohm", "number", 25.0, "ohm", "driver output resistance when neither trace list nor class "
          "gives one (common practice, CMOS)", section="waveform", hi=1e4),
    Param("load_pf", "number", 2.0, "pF", "receiver input capacitance when none is given (common practice)",
          section="waveform", lo_open=False, hi=1e4),
    Param("max_overshoot_pct", "number", 15.0, "%", "largest overshoot accepted (common practice)",
          section="waveform", per_class=True, lo_open=False, hi=1e4),
    Param("max_ringback_pct", "number", 15.0, "%", "largest ringback accepted (common practice)",
          section="waveform", per_class=True, lo_open=False, hi=1e4),
    Param("settle_rise_times", "number", 2.0, "x Tr", "settled within flight + ramp + this many rise times (ours)",
          section="waveform", hi=1e6),
    Param("max_settle_ns", "number", None, "ns", "latest settling time accepted for the class", per_class=True,
          lo_open=False, hi=1e4),
    # A receiver (or driver) terminated on the die (sicheck/on_die.py): simulated in its load, no external part.
    Param("on_die_ohm", "number", None, "ohm", "receiver's on-die termination: differential for a pair, to "
          "on_die_to for a single line (the class's interface standard; check against the parts used)",
          per_class=True, lo=1.0, lo_open=False, hi=1e4),
    Param("on_die_to", "number", 0.0, "V", "voltage a single line's on-die termination returns to (0: ground); "
          "a pair's is across its legs", per_class=True, lo=-50.0, lo_open=False, hi=50.0),
    Param("driver_on_die_ohm", "number", None, "ohm", "driver's output resistance with its on-die termination, "
          "when it differs from driver_ohm (a trace-list driver_ohm still wins)", per_class=True, lo=1.0,
          lo_open=False, hi=1e4),
    Param("max_nets", "int", None, "nets", "simulate at most this many nets (the longest first; unset: every net); the rest keep "
          "the first-order advice", section="waveform", hi=1e6),
)


def _lines_before_waveforms(ctx, chk):
    """The nets the check goes through (electrical-length's order) and each net's first trace-list row."""
    return line_positions(ctx.nets), first_rows(ctx.segments)


@check("waveform", "warning", params=PARAMS, waveforms=True, prepare=_lines_before_waveforms)
def waveform(ctx, chk):
    """Simulated receiver waveform of a net that needs termination, when no standard scheme meets the limits.

    What it checks: each net that needs termination is simulated unterminated and with each standard
    scheme; this finding appears when none of them keeps overshoot, ringback and settling within the
    class's limits (an info says when only the `max_nets` longest nets were simulated).
    Why it matters: a termination that leaves the waveform outside its limits still risks false
    clocking, over-stress of the receiver's input and lost timing margin.
    How to fix: shorten the net, lower the driver strength (a larger series resistor), reduce the load
    or the stub lengths, or review the class's limits.
    """
    nets = ctx.nets
    if "termination_part" not in nets.columns:
        return
    pos, rows = prepared(ctx, chk)
    c = plain_columns(nets, ("termination_part", "waveform_meets_limits"), pos)
    # simulated (a part) and failed: the text of those few only, not of every net
    failed = [i for i, part, meets in zip(pos.tolist(), c["termination_part"], c["waveform_meets_limits"])
              if isinstance(part, str) and part and meets is False]
    c = plain_columns(nets, ("net", "pair", "layers", "termination_part", "waveform_violations"), failed)
    for net, pair, layers, part, violations in zip(*c.values()):
        ident = pair_id(net, pair) if pair else net
        yield chk.finding(pair_label(net, pair) if pair else net, layers,
                          f"no standard termination meets the limits; best found: {part} ({violations})",
                          row=rows.get(net, rows.get(pair)), key=make_key(chk.id, ident))
    flagged = nets[nets["termination"] != "not-needed"]
    unsimulated = int((flagged["termination_part"] == "").sum())
    if unsimulated:
        n_max = ctx.param("max_nets")
        notes = flagged["waveform_assumptions"] if "waveform_assumptions" in flagged else pd.Series("", index=flagged.index)
        failed = flagged[notes.astype(str).str.startswith("not simulated")]
        why = ([f"[waveform] max_nets = {n_max} limits the check to the longest nets"]
               if n_max is not None and len(flagged) > n_max else [])
        why += [f"{r.net} could not be: {r.waveform_assumptions[len('not simulated: '):]}"
                for r in failed.head(3).itertuples()] + ([f"and {len(failed) - 3} more"] if len(failed) > 3 else [])
        yield chk.finding(f"{unsimulated} nets", "", f"{unsimulated} of {len(flagged)} nets that need termination "
                          "were not simulated and keep the first-order advice (" + "; ".join(why) + ")",
                          key=make_key(chk.id, "not-simulated"), value=float(unsimulated),
                          limit=None if n_max is None else float(n_max), unit="nets", severity="info")
