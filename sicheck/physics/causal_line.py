"""One uniform line section in the Laplace domain: causal series impedance and shunt admittance.

A section is described by totals over its length: the lossless impedance ``z0`` and the
delay ``delay`` give L = z0 delay and C = delay / z0. Loss, when given, is anchored at a
reference frequency f_ref (the frequency the loss report evaluates the net at):

Conductor (skin effect, roughness at f_ref included in ``r_ac``):
    Z_int(s) = r_dc sqrt(1 + s / w0)          if r_dc > 0,
    Z_int(s) = r_ac sqrt(2 s / w_ref)          if r_dc = 0 (skin effect only),
with w0 such that Re Z_int(j w_ref) = r_ac. Both are the internal impedance of a good
conductor, (1 + j) Rs in the skin-effect regime (resistance and internal reactance equal,
growing as sqrt(f); Wheeler 1942, Paul "Analysis of Multiconductor Transmission Lines",
per-unit-length parameters), and the first returns to the DC resistance at low frequency.
The joining function sqrt(1 + s/w0) is our own choice: it has one branch point at
s = -w0 (analytic in the right half-plane: causal) and a non-negative real part on the
j-axis (passive). Above and below f_ref the resistance follows sqrt(f); a roughness factor
that varies with frequency is taken at its f_ref value (an approximation).

Dielectric: the wideband model of Djordjevic, Biljic, Likar-Smiljanic and Sarkar (IEEE Trans.
EMC 43(4), 2001), applied to the section's effective permittivity and normalised so that
at f_ref the capacitance is C and the loss tangent ``tan_delta``:
    eps(s) = eps_inf + d_eps / ln(w2/w1) * ln((w2 + s) / (w1 + s)),  w1 = 2 pi 1 kHz, w2 = 2 pi 1 THz.
It is analytic for Re s > -w1 (causal); the capacitance falls slightly with frequency.

Validity: quasi-TEM lines (a cross-section small against the wavelength), as in the loss report.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from sicheck.physics.constants import PI

DS_F_LOW = 1e3      # Djordjevic-Sarkar pole span, as in loss.djordjevic_sarkar
DS_F_HIGH = 1e12


@dataclass(frozen=True)
class LineLoss:
    """Loss of one section, as totals at the reference frequency f_ref (Hz)."""

    f_ref: float
    r_ac: float = 0.0          # ohm: series resistance of the section at f_ref (skin effect x roughness)
    tan_delta: float = 0.0     # effective loss tangent at f_ref
    r_dc: float = 0.0          # ohm: DC resistance of the section (0: skin effect only)

    def __post_init__(self):
        if not (self.f_ref > 0 and self.r_ac >= 0 and self.r_dc >= 0 and 0 <= self.tan_delta < 1):
            raise ValueError(f"loss out of range: {self}")

    @classmethod
    def many(cls, f_ref, r_ac, tan_delta, r_dc) -> list["LineLoss"]:
        """One LineLoss per element of the four sequences, checked as arrays, then made without a check each
        (a large board's simulated segments number in the hundred thousands)."""
        f, r, t, d = (np.asarray(x, dtype=float) for x in (f_ref, r_ac, tan_delta, r_dc))
        ok = (f > 0) & (r >= 0) & (d >= 0) & (t >= 0) & (t < 1)
        if not ok.all():
            k = int(np.argmin(ok))
            cls(float(f[k]), float(r[k]), float(t[k]), float(d[k]))       # raises the usual error
        return list(map(_checked, f.tolist(), r.tolist(), t.tolist(), d.tolist()))

    def __reduce__(self):
        # pickled to the waveform workers by the thousand: rebuilt from its values, already checked
        return _checked, (self.f_ref, self.r_ac, self.tan_delta, self.r_dc)


def _checked(f_ref: float, r_ac: float, tan_delta: float, r_dc: float) -> LineLoss:
    """A LineLoss from values known to be in range (LineLoss.many, unpickling)."""
    x = object.__new__(LineLoss)
    x.__dict__.update(f_ref=f_ref, r_ac=r_ac, tan_delta=tan_delta, r_dc=r_dc)
    return x


@dataclass(frozen=True)
class ConstantRG:
    """Frequency-independent series resistance and shunt conductance of a section (totals: ohm, siemens).

    The textbook RLGC line (e.g. Paul, ch. on the telegrapher's equations); used to compare with circuit
    simulators whose lossy lines take constant R and G.
    """

    r: float = 0.0
    g: float = 0.0

    def __post_init__(self):
        if not (self.r >= 0 and self.g >= 0):
            raise ValueError(f"R and G must not be negative: {self}")


@dataclass(frozen=True)
class Line:
    """A uniform line section: lossless impedance z0 (ohm), delay (s), optional loss."""

    z0: float
    delay: float
    loss: LineLoss | ConstantRG | None = None

    def __post_init__(self):
        if not (self.z0 > 0 and self.delay > 0):
            raise ValueError(f"a line needs a positive impedance and delay (got {self.z0} ohm, {self.delay} s)")


def loss_from_db(z0: float, delay: float, loss_db: float, f_ref: float, dielectric_share: float,
                 r_dc: float = 0.0) -> LineLoss:
    """A section's loss from its total insertion loss at f_ref (dB) and the dielectric part of it.

    Low-loss line (any transmission-line text): alpha_c l = R / (2 Z0) and alpha_d l = pi f delay tan_delta
    (in nepers), so R = 2 Z0 (1 - share) loss and tan_delta = share loss / (pi f delay).
    """
    np_total = loss_db / (20.0 / math.log(10.0))
    r_ac = 2.0 * z0 * (1.0 - dielectric_share) * np_total
    tand = dielectric_share * np_total / (PI * f_ref * delay)
    return LineLoss(f_ref=f_ref, r_ac=r_ac, tan_delta=tand, r_dc=r_dc)


@functools.lru_cache(maxsize=4096)         # a board has few materials and frequencies; asked per section
def _ds_constants(tan_delta: float, f_ref: float) -> tuple[float, float]:
    """(eps_inf, d_eps) of the Djordjevic-Sarkar model with Re eps = 1 and loss tangent tan_delta at f_ref."""
    w1, w2, wr = 2.0 * PI * DS_F_LOW, 2.0 * PI * DS_F_HIGH, 2.0 * PI * f_ref
    span = math.log(w2 / w1)
    d_eps = tan_delta * span / (math.atan(wr / w1) - math.atan(wr / w2))
    eps_inf = 1.0 - d_eps / span * 0.5 * math.log((w2 * w2 + wr * wr) / (w1 * w1 + wr * wr))
    return eps_inf, d_eps


def djordjevic_sarkar_eps(s, tan_delta: float, f_ref: float):
    """Normalised Djordjevic-Sarkar permittivity at complex frequency s (1 - j tan_delta at j 2 pi f_ref)."""
    if tan_delta == 0.0:
        return np.ones_like(s)
    eps_inf, d_eps = _ds_constants(tan_delta, f_ref)
    w1, w2 = 2.0 * PI * DS_F_LOW, 2.0 * PI * DS_F_HIGH
    return eps_inf + d_eps / math.log(w2 / w1) * np.log((w2 + s) / (w1 + s))


def internal_impedance(s, loss: LineLoss):
    """Causal conductor impedance of the section (see module doc) at complex frequency s."""
    w_ref = 2.0 * PI * loss.f_ref
    if loss.r_dc > 0.0 and loss.r_ac < 1e6 * loss.r_dc:     # (a DC resistance a millionth of R(f_ref): skin only)
        q = loss.r_ac / loss.r_dc
        if q <= 1.0:            # no skin effect yet at f_ref: the resistance stays at its DC value
            return np.full_like(s, loss.r_dc)
        # Re sqrt(1 + j x) = q  <=>  x = 2 q sqrt(q^2 - 1)
        w0 = w_ref / (2.0 * q * math.sqrt(q * q - 1.0))
        return loss.r_dc * np.sqrt(1.0 + s / w0)
    if loss.r_ac == 0.0:
        return np.zeros_like(s)
    return loss.r_ac * np.sqrt(2.0 * s / w_ref)


def series_and_shunt(line: Line, s):
    """(Z, Y): the section's total series impedance and shunt admittance at complex frequencies s."""
    l_tot = line.z0 * line.delay
    c_tot = line.delay / line.z0
    if line.loss is None:
        return s * l_tot, s * c_tot
    if isinstance(line.loss, ConstantRG):
        return s * l_tot + line.loss.r, s * c_tot + line.loss.g
    z = s * l_tot + internal_impedance(s, line.loss)
    y = s * c_tot * djordjevic_sarkar_eps(s, line.loss.tan_delta, line.loss.f_ref)
    return z, y


def per_delay(line: Line, s):
    """(K, M) with gamma l = s delay K and Zc = z0 M at complex frequencies s (Re s > 0, Im s >= 0).

    Z Y = (s delay)^2 (1 + Z_int/(sL)) eps(s) and Z/Y = z0^2 (1 + Z_int/(sL)) / eps(s). Both factors
    depend only on the loss per unit delay, so sections of one cross-section share them (cache key:
    ``shape_key``). Principal square roots: for Im s >= 0 the product s K keeps a non-negative real part.
    """
    lo = line.loss
    if lo is None:
        return 1.0, 1.0
    l_tot = line.z0 * line.delay
    if isinstance(lo, ConstantRG):
        zn = 1.0 + lo.r / (s * l_tot)
        eps = 1.0 + lo.g / (s * line.delay / line.z0)
    else:
        zn = 1.0 + internal_impedance(s, lo) / (s * l_tot)
        eps = djordjevic_sarkar_eps(s, lo.tan_delta, lo.f_ref)
    k = np.sqrt(zn * eps)
    return k, k / eps          # = sqrt(zn / eps): eps is close to the positive real axis


def _internal_impedances(losses, s):
    """internal_impedance for many sections at once: (len(losses), s.shape[1]), s a row."""
    r_dc = np.array([x.r_dc for x in losses])
    r_ac = np.array([x.r_ac for x in losses])
    w_ref = 2.0 * PI * np.array([x.f_ref for x in losses])
    out = np.zeros((len(losses), s.shape[1]), dtype=complex)
    dc_based = (r_dc > 0.0) & (r_ac < 1e6 * r_dc)
    q = np.where(dc_based, r_ac / np.where(dc_based, r_dc, 1.0), 0.0)
    flat = dc_based & (q <= 1.0)             # no skin effect yet at f_ref: the DC value
    out[flat] = r_dc[flat, None]
    skin = dc_based & (q > 1.0)
    if skin.any():
        qs = q[skin]
        w0 = w_ref[skin] / (2.0 * qs * np.sqrt(qs * qs - 1.0))
        out[skin] = r_dc[skin, None] * np.sqrt(1.0 + s / w0[:, None])
    pure = ~dc_based & (r_ac > 0.0)           # skin effect only
    if pure.any():
        out[pure] = r_ac[pure, None] * np.sqrt(2.0 * s / w_ref[pure, None])
    return out


def per_delay_lines(lines, s):
    """per_delay for many sections at once: (K, M), each (len(lines), len(s)); rows of lossless sections are 1.

    The same expressions as per_delay, with each section's loss constants as a column; the dielectric's
    logarithm depends on s alone and is computed once.
    """
    s = np.asarray(s)[None, :]
    kinds = [type(x.loss) for x in lines]
    ds = [i for i, t in enumerate(kinds) if t is LineLoss]
    if len(ds) == len(lines):            # the usual case: every section has loss data
        return _per_delay_ds(lines, s)
    k = np.ones((len(lines), s.shape[1]), dtype=complex)
    m = np.ones_like(k)
    if ds:
        k[ds], m[ds] = _per_delay_ds([lines[i] for i in ds], s)
    rg = [i for i, t in enumerate(kinds) if t is ConstantRG]
    if rg:
        z0 = np.array([lines[i].z0 for i in rg])[:, None]
        td = np.array([lines[i].delay for i in rg])[:, None]
        zn = 1.0 + np.array([lines[i].loss.r for i in rg])[:, None] / (s * z0 * td)
        eps = 1.0 + np.array([lines[i].loss.g for i in rg])[:, None] / (s * td / z0)
        k[rg] = np.sqrt(zn * eps)
        m[rg] = k[rg] / eps
    return k, m


def _per_delay_ds(lines, s):
    """(K, M) of sections with LineLoss (skin effect and Djordjevic-Sarkar dielectric); s a row."""
    l_tot = np.array([x.z0 * x.delay for x in lines])[:, None]
    lo = [x.loss for x in lines]
    zn = 1.0 + _internal_impedances(lo, s) / (s * l_tot)
    tand = np.array([x.tan_delta for x in lo])
    if not np.any(tand > 0.0):
        k = np.sqrt(zn)
        return k, k
    w1, w2 = 2.0 * PI * DS_F_LOW, 2.0 * PI * DS_F_HIGH
    shared = np.log((w2 + s) / (w1 + s)) / math.log(w2 / w1)
    consts = np.array([_ds_constants(t, x.f_ref) if t > 0.0 else (1.0, 0.0) for t, x in zip(tand, lo)])
    eps = consts[:, :1] + consts[:, 1:] * shared
    k = np.sqrt(zn * eps)
    return k, k / eps


def smooth_per_delay_lines(lines, s, nodes: int):
    """per_delay_lines on a grid s = sigma + j w (w ascending from 0 or above), each row (K, M) of a section.

    K and M vary smoothly and slowly with frequency (the oscillation is all in e^(-s delay K)), so on grids
    longer than 4 x ``nodes`` they are evaluated exactly at ``nodes`` log-spaced frequencies (and the grid's
    first two) and interpolated between them linearly in log w (power laws such as the skin effect stay near
    linear); the waveform moves by less than 1e-4 of the swing (tests/test_transient.py).
    """
    if len(s) <= 4 * nodes or not any(x.loss is not None for x in lines):
        return per_delay_lines(lines, s)
    w = s.imag
    start = 1 if w[0] == 0.0 else 0
    at = np.geomspace(w[start], w[-1], nodes)
    at[0], at[-1] = w[start], w[-1]
    kc, mc = per_delay_lines(lines, s.real[0] + 1j * at)
    x, xn = np.log(w[start:]), np.log(at)
    i = np.clip(np.searchsorted(xn, x, side="right") - 1, 0, len(xn) - 2)
    f = ((x - xn[i]) / (xn[i + 1] - xn[i]))[None, :]
    k = np.empty((len(lines), len(s)), dtype=complex)
    m = np.empty_like(k)
    k[:, start:] = kc[:, i] + f * (kc[:, i + 1] - kc[:, i])
    m[:, start:] = mc[:, i] + f * (mc[:, i + 1] - mc[:, i])
    if start:
        k0, m0 = per_delay_lines(lines, s[:1])
        k[:, 0], m[:, 0] = k0[:, 0], m0[:, 0]
    return k, m


@functools.lru_cache(maxsize=1 << 16)     # asked for every section at every stage of every net
def shape_key(line: Line):
    """Sections with equal keys have equal (K, M): same z0 and the same loss per unit delay."""
    lo = line.loss
    if lo is None:
        return None
    d = line.delay
    if isinstance(lo, ConstantRG):
        vals = ("rg", line.z0, lo.r / d, lo.g / d)
    else:
        vals = ("ds", line.z0, lo.r_ac / d, lo.r_dc / d, lo.tan_delta, lo.f_ref)
    return tuple(float(f"{v:.12g}") if isinstance(v, float) else v for v in vals)


def propagation(line: Line, s):
    """(gamma l, Zc) of the section at complex frequencies s (Re s > 0, Im s >= 0)."""
    k, m = per_delay(line, s)
    return s * line.delay * k, line.z0 * m


def front_delay(line: Line) -> float:
    """Time the very front of an edge needs through the section: the delay at infinite frequency.

    The wideband dielectric's permittivity falls to eps_inf (< its value at f_ref), so the front
    travels sqrt(eps_inf) times the nominal delay; the skin effect does not change it.
    """
    if isinstance(line.loss, LineLoss) and line.loss.tan_delta > 0.0:
        eps_inf, _ = _ds_constants(line.loss.tan_delta, line.loss.f_ref)
        return line.delay * math.sqrt(max(eps_inf, 0.0))
    return line.delay


def dc_resistance(line: Line) -> float:
    if line.loss is None:
        return 0.0
    return line.loss.r if isinstance(line.loss, ConstantRG) else line.loss.r_dc
