"""Receivers terminated on the die: a net class's `on_die_ohm`, `on_die_to` and `driver_on_die_ohm`.

Many interfaces terminate the line inside the receiver (LVDS, USB, MIPI, DDR on-die termination). Such
a net needs no external part when the simulated waveform meets the limits; proposing a resistor across
the receiver would put a second termination in parallel with the one on the die. This module turns the
class keys into what the waveform stage simulates and what the first-order advice says:
- a single line: `on_die_ohm` from the receiver pin to `on_die_to` volts (0: ground);
- a pair: `on_die_ohm` across the legs, simulated in the odd mode as on_die_ohm/2 from each leg to the
  virtual ground at the centre (as the differential resistor in physics/termination_choice.py);
- `driver_on_die_ohm`: the driver's output resistance (its source termination) when it differs from
  driver_ohm; a driver_ohm in the trace list still wins.
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from sicheck.rules import NetClass, Rules


@dataclass(frozen=True)
class OnDie:
    ohm: float            # as the class gives it (differential for a pair)
    volts: float          # a single line's termination voltage (a pair's is across the legs)
    pair: bool
    source: str           # "net class 'X'"

    @property
    def sim_ohm(self) -> float:
        """The resistance in the simulated mode's load: half the differential value in the odd mode."""
        return self.ohm / 2.0 if self.pair else self.ohm

    @property
    def sim_volts(self) -> float:
        return 0.0 if self.pair else self.volts

    @property
    def text(self) -> str:
        where = "differential" if self.pair else (f"to {self.volts:g} V" if self.volts else "to ground")
        return f"terminated on the die (on_die_ohm {self.ohm:g} ohm {where}, {self.source})"

    @property
    def short(self) -> str:
        return f"on-die {self.ohm:g} ohm" + (" differential" if self.pair else "")


def on_die_for(rules: Rules, cls: NetClass | None, pair: bool) -> OnDie | None:
    """The class's on-die termination, or None when it sets none."""
    if cls is None:
        return None
    ohm = rules.value("on_die_ohm", cls)
    if ohm is None:
        return None
    return OnDie(float(ohm), float(rules.value("on_die_to", cls) or 0.0), pair, f"net class '{cls.name}'")


def driver_on_die(rules: Rules, cls: NetClass | None) -> float | None:
    return None if cls is None else rules.value("driver_on_die_ohm", cls)


def mark_nets(nets: pd.DataFrame, rules: Rules) -> pd.DataFrame:
    """Nets table with column `on_die` (what terminates the receiver on the die, else "") and the
    first-order advice of such nets replaced: no external part (the waveform stage checks the limits)."""
    on_die, marked = _on_die(nets, rules)
    advice, short = nets["advice"].to_numpy(object).tolist(), nets["proposal"].to_numpy(object).tolist()
    series = list(nets["series_ohm"])
    for k, od in marked:
        advice[k] = f"{od.text}: no external part (a series part at the driver if the waveform needs more)"
        short[k] = od.short
        series[k] = None
    out = nets.copy()
    out["on_die"] = on_die
    out["advice"], out["proposal"], out["series_ohm"] = advice, short, series
    return out


def on_die_column(nets: pd.DataFrame, rules: Rules) -> list[str]:
    """mark_nets' column `on_die` alone (for a table whose advice is worked out later)."""
    return _on_die(nets, rules)[0]


def _on_die(nets: pd.DataFrame, rules: Rules) -> tuple[list[str], list[tuple[int, OnDie]]]:
    """Each net's `on_die` text, and (position, OnDie) of the nets that need termination and get it on the die."""
    classes = {c.name: c for c in rules.classes}
    on_die, marked = [], []
    known: dict[tuple[str, bool], OnDie | None] = {}        # one lookup per class and kind of net
    for k, (cls_name, pair, term) in enumerate(zip(*(nets[c].to_numpy(object).tolist()
                                                     for c in ("net_class", "pair", "termination")))):
        at = (cls_name, bool(pair))
        if at not in known:
            known[at] = on_die_for(rules, classes.get(cls_name), bool(pair))
        od = known[at]
        on_die.append(od.short if od else "")
        if od is not None and term != "not-needed":
            marked.append((k, od))
    return on_die, marked
