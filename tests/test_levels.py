"""Level conversions (masterqc.measure.levels), against analytic values.

Analytic: 20*log10(1/2) = -6.0206 dB, 20*log10(10**-k) = -20k dB, 10*log10(2) = 3.0103 dB,
10*log10(p/r) = 10*log10(p) - 10*log10(r).  A level that cannot exist is None (house choice:
the result contract maps it to JSON null).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from masterqc.measure.levels import amplitude_db, power_ratio_db


@pytest.mark.parametrize("value, db", [(1.0, 0.0), (0.5, -6.020599913279624), (-0.5, -6.020599913279624),
                                       (1e-4, -80.0), (10.0, 20.0), (2.0, 6.020599913279624)])
def test_amplitude_db_analytic(value, db):
    assert amplitude_db(value) == pytest.approx(db, abs=1e-12)


@pytest.mark.parametrize("value", [0.0, -0.0, math.inf, -math.inf, math.nan])
def test_amplitude_db_of_what_has_no_level_is_none(value):
    assert amplitude_db(value) is None


def test_amplitude_db_of_the_smallest_positive_float_is_a_number():
    # 5e-324 = 2**-1074: 20*log10(2**-1074) = -1074 * 6.0206 = -6466.2 dB, finite
    assert amplitude_db(5e-324) == pytest.approx(-1074 * 20 * math.log10(2), rel=1e-12)


@pytest.mark.parametrize("power, reference, db", [(1.0, 1.0, 0.0), (2.0, 1.0, 3.010299956639812),
                                                  (1.0, 2.0, -3.010299956639812), (1e-6, 1e-3, -30.0),
                                                  (0.5, 0.5, 0.0), (100.0, 1.0, 20.0)])
def test_power_ratio_db_analytic(power, reference, db):
    assert power_ratio_db(power, reference) == pytest.approx(db, abs=1e-12)


def test_power_ratio_of_extreme_sides_does_not_overflow():
    # 1e300 / 1e-300 overflows a double; the level is still 10*log10(1e600) = 6000 dB
    assert power_ratio_db(1e300, 1e-300) == pytest.approx(6000.0, abs=1e-9)
    assert power_ratio_db(1e-300, 1e300) == pytest.approx(-6000.0, abs=1e-9)


def test_power_ratio_reference_defaults_to_one():
    assert power_ratio_db(0.01) == pytest.approx(-20.0, abs=1e-12)  # analytic: 10*log10(0.01 / 1) = -20


@pytest.mark.parametrize("power, reference", [(0.0, 1.0), (1.0, 0.0), (-1.0, 1.0), (1.0, -1.0),
                                              (math.inf, 1.0), (1.0, math.inf), (math.nan, 1.0),
                                              (1.0, math.nan), (0.0, 0.0)])
def test_power_ratio_without_a_level_is_none(power, reference):
    assert power_ratio_db(power, reference) is None


@given(st.floats(min_value=1e-300, max_value=1e300), st.floats(min_value=1e-300, max_value=1e300))
def test_power_ratio_is_the_difference_of_the_levels(p, r):
    assert power_ratio_db(p, r) == pytest.approx(10 * math.log10(p) - 10 * math.log10(r), abs=1e-9)
    # and an amplitude level is the power level of its square (20 log10 a = 10 log10 a**2)
    a = math.sqrt(p)
    assert amplitude_db(a) == pytest.approx(power_ratio_db(a * a), abs=1e-9)
