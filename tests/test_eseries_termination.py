"""Preferred values and termination arithmetic."""

import pytest

from sicheck.physics import eseries
from sicheck.physics.electrical import classify, knee_frequency
from sicheck.physics.termination import advise, series_value


def test_e24_is_the_iec_60063_series():
    # IEC 60063 E24 mantissas (the standard's table, as widely reproduced).
    assert eseries.E24 == (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
                           3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)
    assert set(eseries.E12) <= set(eseries.E24) and set(eseries.E6) <= set(eseries.E12)


@pytest.mark.parametrize("value,expected", [(33.0, 33.0), (34.9, 36.0), (31.0, 30.0), (47.3, 47.0), (99.0, 100.0),
                                            (0.93, 0.91), (1040.0, 1000.0), (12.4, 12.0)])
def test_nearest_e24(value, expected):
    assert eseries.nearest(value) == pytest.approx(expected)


def test_series_resistor_is_z0_minus_driver():
    # Series (source) termination: Rs = Z0 - Rdrv (Johnson & Graham 1993, ch. 6), snapped to E24.
    assert series_value(50.0, 17.0) == 33.0
    assert series_value(65.0, 12.0) == 51.0
    assert series_value(50.0, 60.0) is None   # driver already above Z0


def test_advice_for_pair_is_zdiff():
    a = advise(50.0, 1e-9, None, zdiff=100.0)
    assert a[0].scheme == "differential" and a[0].end_ohm == 100.0


def test_classification_thresholds():
    # Defaults: TD <= Tr/6 lumped; TD >= Tr/2 required (round trip >= rise time).
    tr = 600e-12
    el, term = classify([tr / 6, tr / 6 * 1.01, tr / 2 * 0.99, tr / 2], [tr] * 4)
    assert list(el) == ["lumped", "transmission-line", "transmission-line", "transmission-line"]
    assert list(term) == ["not-needed", "recommended", "recommended", "required"]
    assert knee_frequency(500e-12) == pytest.approx(1e9)   # 0.5/Tr (Johnson & Graham 1993)
