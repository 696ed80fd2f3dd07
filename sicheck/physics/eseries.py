"""IEC 60063 preferred-number series for resistor and capacitor values."""

from __future__ import annotations

import math

from functools import lru_cache

# IEC 60063 E-series mantissas (E24 includes the historical 2.7, 3.0, 3.3, ... set).
E6 = (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
       3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)
SERIES = {"E6": E6, "E12": E12, "E24": E24}


@lru_cache(maxsize=65536)
def nearest(value: float, series: str = "E24") -> float:
    """The series value nearest to ``value`` on a logarithmic scale."""
    if not value > 0 or not math.isfinite(value):
        raise ValueError(f"no preferred value for {value!r}")
    mant = SERIES[series]
    decade = math.floor(math.log10(value))
    candidates = [m * 10.0**d for d in (decade - 1, decade, decade + 1) for m in mant]
    best = min(candidates, key=lambda c: abs(math.log(c / value)))
    return float(round(best, 12 - decade))


def at_least(value: float, series: str = "E12") -> float:
    """The smallest series value not below ``value``."""
    mant = SERIES[series]
    decade = math.floor(math.log10(value))
    for d in (decade, decade + 1):
        for m in mant:
            v = m * 10.0**d
            if v >= value * (1 - 1e-9):
                return float(round(v, 12 - decade))
    return float(10.0 ** (decade + 1))
