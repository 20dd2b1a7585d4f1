"""Frost point, saturation over ice and relative humidity over ice (advisor.physics.moisture).

Conventions: our relative humidity input is always over liquid water (what hygrometers report,
WMO-No. 8 ch. 4).  psychrolib (ASHRAE Handbook--Fundamentals 2017, ch. 1, eq. 5-6, the
Hyland-Wexler formulas) saturates over ICE below the triple point (0.01 C), so its "dew point"
below 0 C is a frost point; metpy's saturation_vapor_pressure takes phase="solid" for ice
(Ambaum 2020, QJRMS 146, 4252).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from advisor.physics import moisture


def _psychrolib():
    psychrolib = pytest.importorskip("psychrolib")
    psychrolib.SetUnitSystem(psychrolib.SI)
    return psychrolib


def _metpy_saturation_hpa(temp_c, phase):
    pytest.importorskip("metpy")
    from metpy.calc import saturation_vapor_pressure
    from metpy.units import units

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return saturation_vapor_pressure(np.asarray(temp_c) * units.degC, phase=phase).to("hPa").m


TEMPS_BELOW_ZERO_C = np.arange(-40.0, 0.001, 0.5)


def test_saturation_over_ice_matches_psychrolib_hyland_wexler():
    """Reference library: psychrolib GetSatVapPres below the triple point (over ice, ASHRAE /
    Hyland-Wexler), -40..0 C; within 0.2 % (measured 0.13 %)."""
    psychrolib = _psychrolib()
    ref_hpa = np.array([psychrolib.GetSatVapPres(t) for t in TEMPS_BELOW_ZERO_C]) / 100.0
    np.testing.assert_allclose(moisture.saturation_vapour_pressure_ice_hpa(TEMPS_BELOW_ZERO_C), ref_hpa, rtol=0.002)


def test_saturation_over_ice_matches_metpy_solid_phase():
    """Reference library: metpy saturation_vapor_pressure(phase="solid") (Ambaum 2020),
    -40..0 C; within 0.25 % (measured 0.17 %).  Over water (phase="liquid", supercooled) the
    existing Magnus form agrees within 0.3 % (measured 0.24 %)."""
    np.testing.assert_allclose(
        moisture.saturation_vapour_pressure_ice_hpa(TEMPS_BELOW_ZERO_C),
        _metpy_saturation_hpa(TEMPS_BELOW_ZERO_C, "solid"),
        rtol=0.0025,
    )
    np.testing.assert_allclose(
        moisture.saturation_vapour_pressure_hpa(TEMPS_BELOW_ZERO_C),
        _metpy_saturation_hpa(TEMPS_BELOW_ZERO_C, "liquid"),
        rtol=0.003,
    )


def test_frost_point_matches_psychrolib():
    """Reference library: psychrolib GetTDewPointFromVapPres, which inverts its over-ice
    saturation below 0 C (a frost point), fed the same vapour pressure e = RH_w e_w(T);
    T -40..0 C, RH_w 20..100 %; within 0.05 C (measured 0.014 C).  psychrolib caps its result
    at the air temperature, so only unsaturated-over-ice air (T_f < T) is compared."""
    psychrolib = _psychrolib()
    temp_c, rh_pct = np.meshgrid(np.arange(-40.0, 0.01, 2.0), np.arange(20.0, 100.1, 5.0))
    temp_c, rh_pct = temp_c.ravel(), rh_pct.ravel()
    e_hpa = moisture.vapour_pressure_hpa(temp_c, rh_pct)
    ref = np.array([psychrolib.GetTDewPointFromVapPres(t, e * 100.0) for t, e in zip(temp_c, e_hpa)])
    got = moisture.frost_point_c(temp_c, rh_pct)
    use = got < temp_c - 0.01
    assert use.sum() > 250
    assert np.max(np.abs(got - ref)[use]) <= 0.05


def test_air_saturated_over_ice_at_minus_15_reads_86_percent_over_water():
    """WMO-No. 8 ch. 4: hygrometers report RH over water.  Air saturated over ice at -15 C has
    RH_w = 100 e_i/e_w; with metpy (Ambaum 2020) that is 86.4 %, ours 86.2 %: within 0.5 %
    points.  At that reading RH over ice is 100 % and the frost point equals the air
    temperature (definition), while the dew point is about 1.8 C lower."""
    e_i, e_w = _metpy_saturation_hpa(-15.0, "solid"), _metpy_saturation_hpa(-15.0, "liquid")
    rh_w_at_ice_saturation = 100.0 * float(e_i / e_w)
    ours = 100.0 * 100.0 / moisture.relative_humidity_ice_pct(-15.0, 100.0)
    assert ours == pytest.approx(rh_w_at_ice_saturation, abs=0.5)
    assert moisture.relative_humidity_ice_pct(-15.0, ours) == pytest.approx(100.0, abs=1e-9)
    assert moisture.frost_point_c(-15.0, ours) == pytest.approx(-15.0, abs=1e-9)
    dew = moisture.dew_point_c(-15.0, ours)
    assert 1.3 < -15.0 - dew < 2.0
    assert moisture.frost_point_spread_c(-15.0, moisture.frost_point_c(-15.0, ours)) == pytest.approx(0.0, abs=1e-9)


def test_frost_point_is_between_dew_point_and_zero_and_consistent():
    """Definitions (Alduchov & Eskridge 1996 Magnus forms): below 0 C e_i < e_w, so the frost
    point of a given vapour pressure lies above its dew point; from the dew point or from RH
    the same frost point; RH_i >= 100 % exactly when T_f >= T; vectorised and NaN-safe."""
    temp_c, rh_pct = np.meshgrid(np.linspace(-35.0, -1.0, 12), np.linspace(5.0, 100.0, 9))
    tf = moisture.frost_point_c(temp_c, rh_pct)
    td = moisture.dew_point_c(temp_c, rh_pct)
    assert tf.shape == temp_c.shape
    assert np.all(tf > td) and np.all(tf < 0.0)
    np.testing.assert_allclose(moisture.frost_point_from_dew_point_c(td), tf, atol=1e-9)
    rh_ice = moisture.relative_humidity_ice_pct(temp_c, rh_pct)
    np.testing.assert_array_equal(rh_ice >= 100.0, tf >= temp_c - 1e-12)
    assert moisture.frost_point_from_dew_point_c(0.0) == pytest.approx(0.0, abs=0.01)  # c_i ~ c_w
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = moisture.frost_point_c(np.array([-10.0, -10.0, -10.0]), np.array([0.0, np.nan, 50.0]))
    assert np.isnan(out[:2]).all() and np.isfinite(out[2])
    assert isinstance(moisture.frost_point_c(-5.0, 80.0), float)
    assert moisture.vapour_pressure_hpa(20.0, 50.0) == pytest.approx(
        0.5 * moisture.saturation_vapour_pressure_hpa(20.0)
    )
