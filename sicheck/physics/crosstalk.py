"""Crosstalk between two identical coupled lines (weak coupling, matched ends).

A symmetric coupled pair is fully described per length by its 2x2 inductance and
(Maxwell) capacitance matrices,

    L = [[Ls, Lm], [Lm, Ls]],      C = [[Cs, -Cm], [-Cm, Cs]]     (Cm > 0),

which follow from the even- and odd-mode impedances and permittivities every solver
in sicheck reports: per line, the even mode sees Ls + Lm and Cs - Cm, the odd mode
Ls - Lm and Cs + Cm.

From them, for a linear ramp of duration ``ramp`` launched onto the aggressor line
(the incident step, 100 %) and every end terminated in the line impedance:

* backward (near-end) coefficient     Kb = (Lm/Ls + Cm/Cs) / 4
* saturated near-end noise            NEXT = Kb, reached once the coupled round trip 2 TD
                                      is at least the ramp; below that NEXT = Kb * 2 TD / ramp
* forward (far-end) coefficient       kf = -(Lm/Ls - Cm/Cs) / 2     (dimensionless)
* far-end noise                       FEXT = kf * TD / ramp          (negative for a rising
                                      aggressor in a microstrip, where Lm/Ls > Cm/Cs)

TD is the coupled line's one-way delay, length * sqrt(Ls Cs) to first order (the mean of
the two modes' delays is used, which is exact in one dielectric). In a homogeneous
dielectric L = inv(C) / v^2, so Lm/Ls = Cm/Cs exactly and the far-end term vanishes
by itself: nothing here treats striplines specially.

The far-end expression is first order in length: once the two modes' delays differ by
more than the ramp (|TDeven - TDodd| = 2 |kf| TD > ramp) the far-end pulse is the full
difference of two separated edges, so its magnitude is bounded by half the step
(modal picture, Paul 2008 ch. on modal decomposition). ``fext_fraction`` applies that
bound; on printed boards it matters only for very long runs with fast edges.

Sources (bibliographic details from memory):
  C. R. Paul, "Analysis of Multiconductor Transmission Lines", 2nd ed., Wiley-IEEE, 2008:
      weakly coupled lines, the inductive and capacitive coupling terms and their
      near- and far-end contributions.
  H. Johnson, M. Graham, "High-Speed Digital Design", Prentice Hall, 1993: near-end
      noise saturating at a coupled length of half the rise time's travel; far-end
      noise growing with coupled length over rise time, zero in a homogeneous dielectric.
  E. Bogatin, "Signal and Power Integrity - Simplified", 3rd ed., Pearson, 2018:
      NEXT = (Cm/C + Lm/L)/4 and FEXT = (len/RT) (Cm/C - Lm/L)/(2 v).

Validity: quasi-TEM lines, weak coupling (Kb up to about 0.1; above that the
reflections of the even and odd modes at a Z0 termination add terms of second order),
one dominant aggressor, lossless, ends matched to the line impedance. A real victim
driver at the near end reflects the near-end noise; these are the coefficients, not
the waveform at a particular termination.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from sicheck.physics.line_result import per_length
from sicheck.physics.transient import RAMP_PER_RISE   # the waveform engine's edge: 0-100 % in Tr/0.8

FEXT_BOUND = 0.5              # far-end magnitude once the modes have separated (see module doc)


@dataclass(frozen=True)
class Coupling:
    """Per-length matrices and coefficients of symmetric coupled lines (arrays, SI)."""

    ls: np.ndarray          # self inductance, H/m
    lm: np.ndarray          # mutual inductance, H/m
    cs: np.ndarray          # Maxwell self capacitance (to ground and the neighbour), F/m
    cm: np.ndarray          # mutual capacitance (minus the off-diagonal Maxwell term), F/m
    kb: np.ndarray          # backward (near-end) coefficient
    kf: np.ndarray          # forward coefficient: FEXT = kf * TD / ramp
    delay_per_m: np.ndarray  # coupled line's delay: mean of the even and odd modes', s/m
    z_line: np.ndarray      # the line's impedance next to a quiet neighbour, sqrt(Ls/Cs), ohm

    @property
    def kf_s_per_m(self) -> np.ndarray:
        """Forward coefficient per length, s/m: FEXT = kf_s_per_m * length / ramp."""
        return self.kf * self.delay_per_m


def matrices_from_modes(z_even, z_odd, eps_even, eps_odd):
    """(Ls, Lm, Cs, Cm) per length of a symmetric pair from its mode impedances and permittivities.

    Each mode is a TEM line per conductor: L = Z sqrt(eps)/c, C = sqrt(eps)/(c Z)
    (Paul 2008, modal decomposition of a symmetric pair). Vectorised.
    """
    l_e, c_e, _ = per_length(z_even, eps_even)
    l_o, c_o, _ = per_length(z_odd, eps_odd)
    return 0.5 * (l_e + l_o), 0.5 * (l_e - l_o), 0.5 * (c_e + c_o), 0.5 * (c_o - c_e)


def paul_weak_coupling(ls, lm, cs, cm) -> Coupling:
    """Backward and forward coupling coefficients of weakly coupled identical lines.

    Kb = (Lm/Ls + Cm/Cs)/4 and kf = (Cm/Cs - Lm/Ls)/2 (Paul 2008; Bogatin 2018 writes
    the same with Kf = kf/v). Vectorised over any array shape.
    """
    ls, lm, cs, cm = (np.asarray(a, dtype=float) for a in (ls, lm, cs, cm))
    kl, kc = lm / ls, cm / cs
    # The mean of the two modes' delays: equal to sqrt(Ls Cs) to first order, and exactly the medium's
    # delay in one dielectric (sqrt(Ls Cs) is slower there by a second-order term).
    delay = 0.5 * (np.sqrt((ls + lm) * (cs - cm)) + np.sqrt((ls - lm) * (cs + cm)))
    return Coupling(ls=ls, lm=lm, cs=cs, cm=cm, kb=0.25 * (kl + kc), kf=0.5 * (kc - kl),
                    delay_per_m=delay, z_line=np.sqrt(ls / cs))


def coupling_from_modes(z_even, z_odd, eps_even, eps_odd) -> Coupling:
    """Coupling of a symmetric pair from the even/odd-mode results of any solver."""
    return paul_weak_coupling(*matrices_from_modes(z_even, z_odd, eps_even, eps_odd))


def ramp_duration(rise_10_90):
    """0-100 % duration of the linear ramp with this 10-90 % rise time (the waveform engine's edge)."""
    return np.asarray(rise_10_90, dtype=float) * RAMP_PER_RISE


def saturation_length(rise_10_90, delay_per_m):
    """Coupled length at which the round trip 2 TD equals the ramp: NEXT saturates from here
    (Johnson & Graham 1993)."""
    return ramp_duration(rise_10_90) / (2.0 * np.asarray(delay_per_m, dtype=float))


def next_fraction(kb, length, delay_per_m, rise_10_90):
    """Peak near-end noise as a fraction of the aggressor's incident step.

    Kb * min(1, 2 TD / ramp): the near-end pulse lasts 2 TD; shorter than the ramp it
    does not reach its plateau (Johnson & Graham 1993; Paul 2008).
    """
    td = np.asarray(length, dtype=float) * np.asarray(delay_per_m, dtype=float)
    return np.asarray(kb, dtype=float) * np.minimum(1.0, 2.0 * td / ramp_duration(rise_10_90))


def fext_fraction(kf, length, delay_per_m, rise_10_90):
    """Peak far-end noise (signed) as a fraction of the aggressor's incident step.

    kf * TD / ramp (Paul 2008; Bogatin 2018), bounded at half the step once the modes
    have separated (module doc).
    """
    td = np.asarray(length, dtype=float) * np.asarray(delay_per_m, dtype=float)
    return np.clip(np.asarray(kf, dtype=float) * td / ramp_duration(rise_10_90), -FEXT_BOUND, FEXT_BOUND)


def launched_step(swing, z_line, driver_ohm):
    """The step a driver of this swing and output resistance launches onto a line: a divider."""
    z = np.asarray(z_line, dtype=float)
    return np.asarray(swing, dtype=float) * z / (z + np.asarray(driver_ohm, dtype=float))


def validity_warnings(kb: float) -> list[str]:
    if kb > 0.1:
        return [f"strong coupling (Kb {kb:.3f} > 0.1): the weak-coupling crosstalk expressions "
                "are first order and understate second-order terms"]
    return []
