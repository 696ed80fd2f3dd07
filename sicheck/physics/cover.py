"""Dielectric cover over a microstrip (solder mask or an embedding dielectric).

Partial-capacitance method: the bare line's Hammerstad-Jensen filling factor
q = (eps_eff - 1)/(er - 1) splits the line's capacitance into the part in the substrate
and the part above it. A cover of permittivity er_c and thickness c replaces air by
er_c in a fraction F(c) of the upper part:
    eps_eff = eps_bare + F(c) (1 - q) (er_c - 1),   F(c) = 1 - exp(-c / ell),
with ell = COVER_DECAY * (w + h) / 2, the decay length of the fringing field above the
strip. The form is ours; COVER_DECAY was fitted once to sicheck's field solver
(tests/test_cover_vs_field.py records the fit and its residual). The field solver
is the reference for covered lines.
"""

from __future__ import annotations

import numpy as np

COVER_DECAY = 0.7


def cover_fraction(c, w, h, decay=COVER_DECAY):
    """F(c): share of the upper-region capacitance within a cover of thickness c."""
    c, w, h = (np.asarray(x, dtype=float) for x in (c, w, h))
    ell = decay * (w + h) / 2.0
    return -np.expm1(-c / ell)


def covered_eps_eff(eps_bare, er, er_cover, c, w, h):
    """Effective permittivity of a covered microstrip (see module doc)."""
    eps_bare, er, er_cover = (np.asarray(x, dtype=float) for x in (eps_bare, er, er_cover))
    with np.errstate(divide="ignore", invalid="ignore"):
        q = np.where(er > 1.0, (eps_bare - 1.0) / (er - 1.0), 0.5)
    return eps_bare + cover_fraction(c, w, h) * (1.0 - q) * (er_cover - 1.0)
