"""Plausible ranges for every physical input, in SI: one table, used by every reader.

A value outside its range is an input error (a typo, a wrong unit, a wrong column),
not something to compute with. The ranges are deliberately wide; each says why.
Readers call ``check(quantity, value)`` and wrap the message in an InputError that
names their file, line or row, and key or column.
"""

from __future__ import annotations

import math
from typing import NamedTuple


class Range(NamedTuple):
    lo: float
    hi: float
    unit: str              # SI unit ("" for a pure number)
    why: str
    lo_open: bool = False  # True: the value must be strictly above lo


RANGES: dict[str, Range] = {
    # stackup
    "copper_thickness": Range(4e-6, 0.25e-3, "m", "1/8 oz (about 4.4 um) up to about 6 oz (0.21 mm), "
                              "the copper weights board makers plate (common practice)"),
    "dielectric_thickness": Range(5e-6, 10e-3, "m", "from the thinnest films (about 12 um) to a 10 mm "
                                  "layer, thicker than any board"),
    "mask_thickness": Range(2e-6, 0.2e-3, "m", "solder mask is about 10-50 um thick (common practice)"),
    "er": Range(1.0, 20.0, "", "air (1) to ceramic-filled laminates (about 10-13); above 20 is not a "
                "board dielectric"),
    "loss_tangent": Range(0.0, 0.1, "", "board dielectrics lie between about 0.0005 (PTFE) and 0.03 "
                          "(FR-4); above 0.1 is not a board dielectric"),
    "roughness": Range(0.0, 20e-6, "m", "copper foils have an RMS roughness of about 0.1-5 um",
                       lo_open=True),
    "huray_radius": Range(0.0, 10e-6, "m", "snowball radii are about 0.1-1 um", lo_open=True),
    "huray_ratio": Range(0.0, 50.0, "", "ball surface per flat area is about 1-15", lo_open=True),
    "via_stub": Range(0.0, 3e-3, "m", "back-drilling leaves about 0.05-0.3 mm of barrel (common practice, from "
                      "memory); 3 mm is thicker than most boards"),
    "frequency": Range(1e3, 1e12, "Hz", "the span of the wideband dielectric model (Djordjevic-Sarkar poles)"),
    # trace list and command-line geometry
    "length": Range(0.0, 3.0, "m", "a routed segment on a board is shorter than 3 m", lo_open=True),
    "width": Range(10e-6, 25e-3, "m", "10 um (finer than any board process) to 25 mm"),
    "gap": Range(10e-6, 25e-3, "m", "10 um (finer than any board process) to 25 mm"),
    "height": Range(5e-6, 10e-3, "m", "a dielectric from 5 um to 10 mm"),
    "rise_time": Range(1e-12, 10e-6, "s", "edges faster than 1 ps do not exist on boards; slower "
                       "than 10 us is not a signal-integrity question"),
    "driver_ohm": Range(0.0, 10e3, "ohm", "a driver's output resistance, 0 (ideal) to 10 kohm"),
    "via_count": Range(0.0, 1000.0, "", "vias on one routed segment; more than 1000 is a wrong column"),
    "load_pf": Range(0.0, 1e-9, "F", "a receiver's input capacitance, 0 to 1000 pF"),
    "series_ohm": Range(0.0, 10e3, "ohm", "a resistor in series in a signal net: 0 ohm (a link) to 10 kohm"),
    "series_farad": Range(1e-12, 100e-6, "F", "a capacitor in series in a signal net (AC coupling is about "
                          "10 nF-1 uF, common practice): 1 pF to 100 uF"),
    "spacing": Range(10e-6, 25e-3, "m", "an edge-to-edge clearance from 10 um (finer than any board process) "
                     "to 25 mm (coupling there is nil)"),
    "parallel": Range(0.0, 3.0, "m", "a coupled run is no longer than a routed segment (3 m)", lo_open=True),
    # targets and rules
    "impedance": Range(5.0, 500.0, "ohm", "board lines lie between about 10 and 200 ohm"),
    "tolerance_pct": Range(0.0, 100.0, "%", "a tolerance in percent", lo_open=True),
}


_PREFIXES = ((1e-15, "f"), (1e-12, "p"), (1e-9, "n"), (1e-6, "u"), (1e-3, "m"), (1.0, ""), (1e3, "k"),
             (1e6, "M"), (1e9, "G"), (1e12, "T"))


def _fmt(r: Range, v: float) -> str:
    """A value in the unit that suits its size: 35 um, 1 ps, 3 m, 1 GHz."""
    if not r.unit or v == 0:
        return f"{v:g}{' ' + r.unit if r.unit else ''}"
    if r.unit == "m" and abs(v) < 1.0:
        return f"{v * 1e6:g} um" if abs(v) < 1e-3 else f"{v * 1e3:g} mm"
    f, p = next(((f, p) for f, p in reversed(_PREFIXES) if abs(v) >= f), _PREFIXES[0])
    return f"{v / f:.4g} {p}{r.unit}"


def check(quantity: str, value: float) -> str | None:
    """None when ``value`` (SI) is plausible for ``quantity``, else a message saying the range and why."""
    r = RANGES[quantity]
    v = float(value)
    if not math.isfinite(v):
        return "is not a finite number"
    low = v <= r.lo if r.lo_open else v < r.lo
    if not low and v <= r.hi:
        return None
    span = f"{'above' if r.lo_open else 'from'} {_fmt(r, r.lo)} {'up to' if r.lo_open else 'to'} {_fmt(r, r.hi)}"
    if low and v <= 0 and r.lo >= 0:
        what = "must be positive" if (r.lo_open or r.lo > 0) else "must not be negative"
        return f"{what} (got {_fmt(r, v)}; plausible: {span})"
    what = "is implausibly small" if low else "is implausibly large"
    return f"{what}: {_fmt(r, v)} (plausible: {span}; {r.why})"


def describe() -> list[tuple[str, str, str, str]]:
    """(quantity, low, high, why) rows for documentation."""
    return [(q, ("> " if r.lo_open else "") + _fmt(r, r.lo), _fmt(r, r.hi), r.why) for q, r in RANGES.items()]
