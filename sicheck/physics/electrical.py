"""Electrical length: is a net lumped or a transmission line against its edge?

Criteria (defaults, configurable in the rules): with one-way delay TD and 10-90 %
rise time Tr, TD <= Tr/6 is lumped (common practice, cf. Johnson & Graham 1993,
who treat a line as short below about one sixth of the rise time); TD >= Tr/2, i.e.
a round trip at least as long as the edge, must be treated and terminated as a line.
Knee frequency 0.5/Tr (Johnson & Graham 1993).
"""

from __future__ import annotations

import numpy as np

LUMPED = "lumped"
LINE = "transmission-line"
NOT_NEEDED = "not-needed"
RECOMMENDED = "recommended"
REQUIRED = "required"


def knee_frequency(rise_time):
    """Knee frequency 0.5/Tr (Johnson & Graham 1993)."""
    return 0.5 / np.asarray(rise_time, dtype=float)


def classify(delay, rise_time, lumped_max=1.0 / 6.0, required_min=0.5):
    """Vectorised classification. Returns (electrical[], termination[]) string arrays."""
    ratio = np.asarray(delay, dtype=float) / np.asarray(rise_time, dtype=float)
    # a ratio within rounding of a threshold counts as on it
    lumped = ratio <= lumped_max * (1.0 + 1e-9)
    required = ratio >= required_min * (1.0 - 1e-9)
    electrical = np.where(lumped, LUMPED, LINE)
    termination = np.where(lumped, NOT_NEEDED, np.where(required, REQUIRED, RECOMMENDED))
    return electrical, termination

