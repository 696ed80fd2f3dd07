"""Via barrels: the open stub's quarter-wave resonance, the dielectric it passes, the barrel's delay.

Sources:
- Quarter-wave resonance of an open-ended stub, f = c / (4 L sqrt(er)): a textbook transmission-line
  result (an open line of length L has its first input-impedance zero where L is a quarter wavelength;
  e.g. Pozar, "Microwave Engineering", on open-circuited line sections). A via stub is treated as such a
  line in the dielectric it passes.
- Delay along a barrel: the length over the speed of a TEM wave in that dielectric, L sqrt(er) / c.

Model and validity: a coarse estimate, as is usual for via stubs. The barrel is a line in a uniform
dielectric whose er is the thickness-weighted mean of the dielectric layers it crosses (copper layers it
passes through carry no weight). Pad and antipad capacitance, which lower the resonance and add delay by
a few percent to tens of percent, are ignored, so the true resonance lies somewhat lower. Meaningful for
stubs longer than the barrel is wide; a first-order screen, not a 3D field solution.
All functions are pure and accept numpy arrays.
"""

from __future__ import annotations

import numpy as np

from sicheck.physics.constants import C0


def quarter_wave_resonance(length, er):
    """First resonance (Hz) of an open stub of ``length`` (m) in relative permittivity ``er``:
    f = c / (4 L sqrt(er)) (textbook quarter-wave open stub). A zero length resonates at infinity."""
    length = np.asarray(length, dtype=float)
    er = np.asarray(er, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(length > 0, C0 / (4.0 * np.where(length > 0, length, 1.0) * np.sqrt(er)), np.inf)


def weighted_er(thicknesses, ers):
    """Thickness-weighted mean permittivity of the dielectric pieces a barrel crosses (1.0 if none):
    sum(t_i er_i) / sum(t_i). A first-order mixing rule for a field running along the layers' stack."""
    t = np.asarray(thicknesses, dtype=float)
    e = np.asarray(ers, dtype=float)
    total = t.sum()
    return float((t * e).sum() / total) if total > 0 else 1.0


def barrel_delay(length, er):
    """Delay (s) along a barrel of ``length`` (m) in relative permittivity ``er``: L sqrt(er) / c."""
    return np.asarray(length, dtype=float) * np.sqrt(np.asarray(er, dtype=float)) / C0
