"""Zenith opacity over long series at one frequency (advisor.physics.opacity).

Two checks:
- against the direct evaluation of the same method (advisor.physics.atmosphere.zenith_opacity_nepers
  with the precipitable water, itself checked against itur in test_physics_atmosphere.py) over
  random surface states: the stated tolerance of the grid;
- against itur 0.4.0 (test-only), gaseous_attenuation_slant_path(el=90, mode="approx", V_t, h), the
  registry's implementation of ITU-R P.676-12 Annex 2, over 20-120 GHz with the 22.235 GHz water
  line and the 60 / 118.75 GHz oxygen lines.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from advisor.physics import atmosphere
from advisor.physics.opacity import zenith_opacity_series_nepers

FREQS_GHZ = np.concatenate(
    [np.arange(20.5, 120.01, 2.5), [22.235, 60.0, 118.75]]
)  # 20 GHz itself: see test_physics_atmosphere
SITE_HEIGHT_M = 1050.0


def _states(n, seed):
    rng = np.random.default_rng(seed)
    temp = rng.uniform(-40.0, 40.0, n)
    rh = rng.uniform(0.0, 100.0, n)
    pressure = rng.uniform(600.0, 1050.0, n)
    rho = atmosphere.water_vapour_density_gm3(temp, rh)
    return pressure, temp, rho, rho * atmosphere.DEFAULT_WATER_SCALE_HEIGHT_KM


def test_grid_against_the_direct_evaluation():
    """Within 2e-4 relative wherever the sky is not opaque (measured 1.2e-4); inside the 60 GHz
    oxygen complex, where the zenith opacity exceeds 5 nepers and nothing gets through, within 1 %."""
    pressure, temp, rho, pwv = _states(20_000, 1)
    for f in FREQS_GHZ:
        direct = atmosphere.zenith_opacity_nepers(f, pressure, temp, rho, pwv_mm=pwv, site_height_m=SITE_HEIGHT_M)
        series = zenith_opacity_series_nepers(f, pressure, temp, rho, pwv, SITE_HEIGHT_M)
        rel = np.abs(series / direct - 1.0)
        clear = direct < 5.0
        assert np.max(rel[clear], initial=0.0) <= 2e-4, f
        assert np.max(rel[~clear], initial=0.0) <= 1e-2, f


def test_a_row_does_not_depend_on_the_other_rows():
    """The grid's nodes are fixed: one row alone (a check) and the same row inside a year of rows
    (a replay) give the same number (1e-12: the interpolation weights alone may round differently)."""
    pressure, temp, rho, pwv = _states(50_000, 2)
    whole = zenith_opacity_series_nepers(116.0, pressure, temp, rho, pwv, SITE_HEIGHT_M)
    for i in (0, 777, 49_999):
        alone = zenith_opacity_series_nepers(116.0, pressure[i], temp[i], rho[i], pwv[i], SITE_HEIGHT_M)
        assert alone.shape == (1,)
        assert alone[0] == pytest.approx(whole[i], rel=1e-12, abs=0)


def test_scattered_states_take_the_same_nodes(monkeypatch):
    """Widely scattered states are interpolated from the cells in use instead of the whole box of
    nodes around them; the nodes are the same, so are the values (each row against itself alone)."""
    from advisor.physics import opacity

    monkeypatch.setattr(opacity, "_BOX_MAX_NODES", 0)
    pressure, temp, rho, pwv = _states(60, 4)
    pwv[:3] = [1e-4, 1e-3, 80.0]  # a wide range of ln V: the water nodes by use, too
    together = zenith_opacity_series_nepers(86.0, pressure, temp, rho, pwv, SITE_HEIGHT_M)
    alone = np.array(
        [zenith_opacity_series_nepers(86.0, pressure[i], temp[i], rho[i], pwv[i], SITE_HEIGHT_M)[0] for i in range(60)]
    )
    np.testing.assert_allclose(together, alone, rtol=1e-12, atol=0)


def test_against_itur_20_to_120_ghz():
    """Reference library: itur gaseous_attenuation_slant_path (ITU-R P.676-12 Annex 2, approx
    mode, el = 90 deg, V_t = 2 km x rho, h = 1.05 km) at three surface states, 20-120 GHz every
    2.5 GHz plus 22.235, 60 and 118.75 GHz: within 2e-4 relative where tau < 5 nepers, 1 % in
    the opaque 60 GHz complex (our grid's tolerance; the method itself agrees with itur to 1e-9)."""
    itur = pytest.importorskip("itur")
    from itur.models.itu676 import gaseous_attenuation_slant_path

    del itur
    states = [(1013.25, 15.0, 7.5), (893.0, -5.0, 3.0), (893.0, 22.0, 17.5)]
    for pressure, temp, rho in states:
        t_k = temp + 273.15
        pwv = rho * 2.0
        for f in FREQS_GHZ:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                ref_db = gaseous_attenuation_slant_path(
                    f, 90.0, rho, pressure - rho * t_k / 216.7, t_k, V_t=pwv, h=SITE_HEIGHT_M / 1000.0
                ).value
            tau = zenith_opacity_series_nepers(f, pressure, temp, rho, pwv, SITE_HEIGHT_M)[0]
            ref = ref_db / atmosphere.DB_PER_NEPER
            assert tau == pytest.approx(ref, rel=2e-4 if ref < 5.0 else 1e-2), (f, pressure, temp, rho)


def test_missing_inputs_give_nan_and_shapes_broadcast():
    out = zenith_opacity_series_nepers(86.0, [900.0, np.nan, 900.0], [0.0, 0.0, np.nan], 3.0, 6.0, 1000.0)
    assert out.shape == (3,) and np.isfinite(out[0]) and np.isnan(out[1:]).all()
    assert np.isnan(zenith_opacity_series_nepers(500.0, 900.0, 0.0, 3.0, 6.0, 1000.0)).all()  # outside 1-350 GHz
