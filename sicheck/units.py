"""Quantities with units: parsing at the edges, SI inside.

A quantity is a number followed by an optional unit (``5mil``, ``0.127 mm``,
``350ps``, ``3.3V``). A bare number is only accepted when the caller supplies the
unit that applies to it (from a column header, a ``units`` key or a ``--units``
option): sicheck never guesses a unit.
"""

from __future__ import annotations

import math
import re

# Factor to SI for every unit we accept, grouped by dimension.
LENGTH = {
    "m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "µm": 1e-6, "μm": 1e-6, "micron": 1e-6,
    "nm": 1e-9, "mil": 25.4e-6, "mils": 25.4e-6, "thou": 25.4e-6, "in": 25.4e-3,
    "inch": 25.4e-3, "inches": 25.4e-3,
}
TIME = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "μs": 1e-6, "ns": 1e-9, "ps": 1e-12, "fs": 1e-15}
RESISTANCE = {"ohm": 1.0, "ohms": 1.0, "Ω": 1.0, "kohm": 1e3, "kΩ": 1e3}
CAPACITANCE = {"f": 1.0, "uf": 1e-6, "µf": 1e-6, "nf": 1e-9, "pf": 1e-12, "ff": 1e-15}
VOLTAGE = {"v": 1.0, "mv": 1e-3}
FREQUENCY = {"hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9}
# Copper weight: 1 oz/ft² of copper is taken as 35 µm thick (common practice).
COPPER_OZ = 35e-6

DIMENSIONS = {
    "length": LENGTH, "time": TIME, "resistance": RESISTANCE,
    "capacitance": CAPACITANCE, "voltage": VOLTAGE, "frequency": FREQUENCY,
}

_NUMBER = r"[-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?"
QUANTITY_RE = re.compile(rf"^\s*({_NUMBER})\s*([A-Za-zµμΩ]*)\s*$")


class UnitError(ValueError):
    """A value whose number or unit cannot be read; the caller adds where it was."""


def unit_factor(unit: str, dimension: str) -> float:
    """SI factor of ``unit`` for ``dimension`` (``length``, ``time``, ...)."""
    table = DIMENSIONS[dimension]
    key = unit.strip()
    if key in table:
        return table[key]
    low = key.lower()
    for name, factor in table.items():
        if name.lower() == low:
            return factor
    raise UnitError(f"unknown {dimension} unit '{unit}' (known: {', '.join(sorted(set(table)))})")


def dimension_of(unit: str) -> str | None:
    """Which dimension a unit belongs to, or None when it is not a unit we know."""
    for dim in DIMENSIONS:
        try:
            unit_factor(unit, dim)
            return dim
        except UnitError:
            continue
    return None


def parse_number(text: str, decimal_comma: bool = False) -> float:
    """A plain number; a decimal comma is accepted only when asked for."""
    s = text.strip()
    if decimal_comma:
        s = s.replace(",", ".")
    try:
        value = float(s)
    except ValueError:
        raise UnitError(f"'{text}' is not a number") from None
    if not math.isfinite(value):
        raise UnitError(f"'{text}' is not a finite number")
    return value


def parse_quantity(value: object, dimension: str, default_unit: str | None = None,
                   decimal_comma: bool = False) -> float:
    """Read ``value`` (number or string with optional unit) as SI.

    A bare number needs ``default_unit``; otherwise a UnitError says how to state one.
    """
    if isinstance(value, bool):
        raise UnitError(f"'{value}' is not a {dimension}")
    if isinstance(value, (int, float)):
        number, unit = float(value), ""
        if not math.isfinite(number):
            raise UnitError(f"'{value}' is not a finite number")
    else:
        text = str(value)
        m = QUANTITY_RE.match(text)
        if not m:
            raise UnitError(f"'{text}' is not a {dimension} (expected a number with a unit, e.g. "
                            f"{_example(dimension)})")
        num_text, unit = m.group(1), m.group(2)
        if "," in num_text and not decimal_comma:
            raise UnitError(f"'{text}' has a decimal comma; use a point, or a semicolon-separated file")
        number = parse_number(num_text, decimal_comma=True)
    if unit:
        return number * unit_factor(unit, dimension)
    if default_unit is None:
        raise UnitError(f"'{value}' has no unit: write it with one (e.g. {_example(dimension)}), "
                        f"or state the unit in the column header or with --units")
    return number * unit_factor(default_unit, dimension)


def _example(dimension: str) -> str:
    return {"length": "'5mil' or '0.127mm'", "time": "'350ps' or '0.5ns'", "resistance": "'22ohm'",
            "capacitance": "'3pF'", "voltage": "'3.3V'", "frequency": "'1GHz'"}[dimension]



def option_frequency(text: str, option: str) -> float:
    """A command-line frequency (1 kHz..1 THz) in Hz; bad values raise InputError naming the option."""
    from sicheck.errors import InputError
    try:
        f = parse_quantity(text, "frequency")
    except UnitError as e:
        raise InputError(f"{option}: {e}") from None
    from sicheck import plausible
    if bad := plausible.check("frequency", f):
        raise InputError(f"{option} {text}: {bad}")
    return f
