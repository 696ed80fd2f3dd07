"""Stripline against the exact conformal-mapping results, evaluated here independently."""

import numpy as np
import pytest
from scipy.special import ellipk

from sicheck.physics.constants import C0
from sicheck.physics.line_result import per_length
from sicheck.physics.stripline import coupled_stripline, stripline


ETA0 = 1.25663706212e-6 * 299792458.0   # mu0 c with CODATA 2018 mu0 and exact c


def cohn_exact(w, b, er):
    # Cohn (1954): Z0 = eta0/(4 sqrt(er)) * K(k)/K(k'), k = sech(pi w / 2b); Cohn writes eta0/4 as 30 pi.
    # scipy's ellipk takes the parameter m = k^2.
    k = 1 / np.cosh(np.pi * w / (2 * b))
    return ETA0 / 4 / np.sqrt(er) * ellipk(k**2) / ellipk(1 - k**2)


def cohn_coupled_exact(w, s, b, er):
    # Cohn (1955): k_e = tanh(pi w/2b) tanh(pi(w+s)/2b), k_o = tanh(pi w/2b) coth(pi(w+s)/2b),
    # Z = eta0/(4 sqrt(er)) * K(k')/K(k).
    a, c = np.tanh(np.pi * w / (2 * b)), np.tanh(np.pi * (w + s) / (2 * b))
    out = []
    for k in (a * c, a / c):
        out.append(ETA0 / 4 / np.sqrt(er) * ellipk(1 - k**2) / ellipk(k**2))
    return tuple(out)


@pytest.mark.parametrize("w_over_b", [0.05, 0.2, 0.5, 1.0, 2.0, 5.0])
@pytest.mark.parametrize("er", [1.0, 3.5, 10.0])
def test_zero_thickness_stripline_is_cohn_exact(w_over_b, er):
    b = 1e-3
    z, e = stripline(w_over_b * b, 0.0, b / 2, b / 2, er, er)
    assert z == pytest.approx(cohn_exact(w_over_b * b, b, er), rel=1e-9)
    assert e == pytest.approx(er, rel=1e-12)


@pytest.mark.parametrize("w_over_b,s_over_b", [(0.1, 0.05), (0.3, 0.2), (0.5, 0.5), (1.0, 0.1), (0.2, 2.0)])
def test_zero_thickness_coupled_stripline_is_cohn_exact(w_over_b, s_over_b):
    b, er = 1e-3, 4.2
    ze, zo, ee, eo = coupled_stripline(w_over_b * b, 0.0, s_over_b * b, b / 2, b / 2, er, er)
    ze_ref, zo_ref = cohn_coupled_exact(w_over_b * b, s_over_b * b, b, er)
    assert ze == pytest.approx(ze_ref, rel=1e-9)
    assert zo == pytest.approx(zo_ref, rel=1e-9)
    assert zo < ze


def test_textbook_50_ohm_stripline():
    # Worked example from a standard microwave-engineering text (Pozar, from memory):
    # b = 3.2 mm, er = 2.2, 50 ohm needs w ~ 2.66 mm.
    z, _ = stripline(2.66e-3, 0.0, 1.6e-3, 1.6e-3, 2.2, 2.2)
    assert z == pytest.approx(50.0, rel=0.005)


def test_wheeler_thickness_close_to_cohn_at_small_t():
    # Wheeler (1978) states 0.5 % for w/(b-t) < 10; thin copper changes Z0 only slightly and lowers it.
    b = 1e-3
    z0, _ = stripline(0.3e-3, 0.0, b / 2, b / 2, 4, 4)
    zt, _ = stripline(0.3e-3, 0.005e-3, (b - 0.005e-3) / 2, (b - 0.005e-3) / 2, 4, 4)
    assert zt < z0
    assert zt == pytest.approx(z0, rel=0.02)


def test_homogeneous_stripline_velocity_and_lc():
    # Physics: a TEM line in a homogeneous dielectric travels at c/sqrt(er); Z0 = sqrt(L/C).
    er = 4.0
    z, e = stripline(0.2e-3, 0.035e-3, 0.2e-3, 0.3e-3, er, er)
    l, c, d = per_length(z, e)
    assert 1 / d == pytest.approx(C0 / np.sqrt(er), rel=1e-12)
    assert np.sqrt(l / c) == pytest.approx(z, rel=1e-12)
    assert 1 / np.sqrt(l * c) == pytest.approx(C0 / np.sqrt(er), rel=1e-12)
