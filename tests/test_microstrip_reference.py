"""Microstrip against outside references."""

import numpy as np
import pytest

from sicheck.physics.microstrip import hammerstad_jensen

skrf = pytest.importorskip("skrf")


def _skrf_mline(w, h, t, er):
    from skrf.media import MLine
    f = skrf.Frequency(1, 1, 1, "MHz")
    m = MLine(frequency=f, w=w, h=h, t=t if t > 0 else None, ep_r=er, disp="none",
              diel="frequencyinvariant", rho=1.7e-8, rough=0.0)
    return float(np.real(np.ravel(m.zl_eff)[0])), float(np.real(np.ravel(m.ep_reff)[0]))


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("u", [0.1, 0.3, 1.0, 3.0, 10.0])
@pytest.mark.parametrize("er", [2.0, 4.4, 10.0])
@pytest.mark.parametrize("th", [0.0, 0.05, 0.2])
def test_hammerstad_jensen_matches_scikit_rf(u, er, th):
    # Reference: scikit-rf MLine, model 'hammerstadjensen', quasi-static (disp='none').
    h = 1e-3
    z_ref, e_ref = _skrf_mline(u * h, h, th * h, er)
    z, e = hammerstad_jensen(u * h, h, th * h, er)
    assert z == pytest.approx(z_ref, rel=1e-4)
    assert e == pytest.approx(e_ref, rel=1e-4)


def test_textbook_50_ohm_microstrip():
    # Worked example from a standard microwave-engineering text (Pozar, from memory):
    # 50 ohm on er = 2.2 needs w/h ~ 3.08 and gives eps_eff ~ 1.87.
    z, e = hammerstad_jensen(3.08e-3, 1e-3, 0.0, 2.2)
    assert z == pytest.approx(50.0, rel=0.01)
    assert e == pytest.approx(1.87, abs=0.015)


def test_wide_strip_tends_to_parallel_plate():
    # Physics: for w >> h, Z0 -> eta0 h / (w sqrt(er)) (parallel plate, fringing vanishing).
    from sicheck.physics.constants import ETA0
    w, h, er = 1000e-3, 1e-3, 4.0
    z, e = hammerstad_jensen(w, h, 0.0, er)
    assert z == pytest.approx(ETA0 * h / (w * np.sqrt(er)), rel=0.01)
