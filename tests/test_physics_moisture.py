"""Tests for advisor.physics.moisture (Magnus form, Alduchov & Eskridge 1996)."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from advisor.physics import moisture


def _psychrolib():
    psychrolib = pytest.importorskip("psychrolib")
    psychrolib.SetUnitSystem(psychrolib.SI)
    return psychrolib


def test_dew_point_matches_psychrolib_ashrae():
    """Reference library: psychrolib GetTDewPointFromRelHum (ASHRAE Handbook--Fundamentals
    formulas) over T 0..40 C, RH 10..100 %; within 0.2 C.  Only dew points above 0 C are
    compared: below the triple point ASHRAE/psychrolib use saturation over ice (a frost point),
    while the Magnus form here is over water (the comparison holds above 0 °C only)."""
    psychrolib = _psychrolib()
    temp_c, rh_pct = np.meshgrid(np.arange(0.0, 40.1, 2.0), np.arange(10.0, 100.1, 5.0))
    temp_c, rh_pct = temp_c.ravel(), rh_pct.ravel()
    ref = np.array([psychrolib.GetTDewPointFromRelHum(t, r / 100.0) for t, r in zip(temp_c, rh_pct)])
    got = moisture.dew_point_c(temp_c, rh_pct)
    use = ref > 0.01
    assert use.sum() > 250
    assert np.max(np.abs(got - ref)[use]) <= 0.2


def test_saturation_vapour_pressure_matches_psychrolib():
    """Reference library: psychrolib GetSatVapPres [Pa] (ASHRAE Handbook--Fundamentals,
    Hyland-Wexler over water above 0.01 C) over 0..40 C; within 0.5 %."""
    psychrolib = _psychrolib()
    temp_c = np.arange(0.5, 40.01, 0.5)
    ref_hpa = np.array([psychrolib.GetSatVapPres(t) for t in temp_c]) / 100.0
    got = moisture.saturation_vapour_pressure_hpa(temp_c)
    np.testing.assert_allclose(got, ref_hpa, rtol=0.005)


def test_magnus_coefficients_at_zero_and_saturation():
    """Alduchov & Eskridge (1996): e_s(0 C) = c = 6.1094 hPa; by definition RH 100 % gives
    T_d = T and T_d = T gives RH 100 %."""
    assert moisture.saturation_vapour_pressure_hpa(0.0) == pytest.approx(6.1094, abs=1e-12)
    temp_c = np.array([-20.0, 0.0, 12.5, 35.0])
    np.testing.assert_allclose(moisture.dew_point_c(temp_c, 100.0), temp_c, atol=1e-9)
    np.testing.assert_allclose(moisture.relative_humidity_pct(temp_c, temp_c), 100.0, atol=1e-9)


def test_round_trip_rh_to_dew_point_to_rh():
    """Inverse formulas of the same Magnus form (Alduchov & Eskridge 1996) round-trip."""
    temp_c, rh_pct = np.meshgrid(np.linspace(-30.0, 45.0, 16), np.linspace(1.0, 100.0, 12))
    td = moisture.dew_point_c(temp_c, rh_pct)
    assert td.shape == temp_c.shape
    assert np.all(td <= temp_c + 1e-9)
    np.testing.assert_allclose(moisture.relative_humidity_pct(temp_c, td), rh_pct, rtol=1e-10)
    np.testing.assert_allclose(moisture.dew_point_spread_c(temp_c, td), temp_c - td)


def test_zero_or_missing_humidity_gives_nan_without_warnings():
    """RH 0 has no finite dew point: NaN, not -inf, and no numpy RuntimeWarning."""
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        td = moisture.dew_point_c(np.array([10.0, 10.0, 10.0, 10.0]), np.array([0.0, -5.0, np.nan, 50.0]))
        scalar = moisture.dew_point_c(5.0, 0.0)
    assert np.isnan(td[:3]).all() and np.isfinite(td[3])
    assert isinstance(scalar, float) and np.isnan(scalar)


def test_dew_point_spread_is_small_in_near_saturated_air():
    """Spread T - T_d: about 1.6 C at 90 % RH and 10 C, 0 at saturation (Magnus form)."""
    spread = moisture.dew_point_spread_c(10.0, moisture.dew_point_c(10.0, np.array([100.0, 95.0, 90.0, 50.0])))
    assert spread[0] == pytest.approx(0.0, abs=1e-9)
    assert np.all(np.diff(spread) > 0.0)
    assert 1.4 < spread[2] < 1.7
