"""advisor.physics.thermal: the structure's first-order lag, the clear-sky irradiance, the drifted surface.

Sources of the check values:
* First-order system responses (Ogata, *Modern Control Engineering*, Prentice Hall, chapter on
  first-order systems): unit-ramp response y(t) = t - tau + tau e^(-t/tau); the response to
  sin(w t) from rest, y(t) = (sin wt - w tau cos wt + w tau e^(-t/tau)) / (1 + (w tau)^2), whose
  steady amplitude is 1/sqrt(1 + (w tau)^2) (derived by hand from dy/dt = (u - y)/tau).
* Haurwitz (1945), J. Meteorol. 2, 154: checked against pvlib 0.16.1's ``pvlib.clearsky.haurwitz``
  (test-only reference library).
* Independent errors add in quadrature (definition of an rms of independent terms).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from advisor.physics.thermal import (
    clear_sky_irradiance_wm2,
    drifted_surface_rms_um,
    equilibrium_temperature_c,
    first_order_lag,
)


@pytest.mark.parametrize("tau_h", [0.3, 1.0, 2.5])
def test_ramp_response_is_exact_on_any_grid(tau_h):
    rng = np.random.default_rng(7)
    t = np.concatenate(([0.0], np.sort(rng.uniform(0.0, 12.0, 300))))  # irregular samples
    y = first_order_lag(t, t.copy(), tau_h)
    assert np.allclose(y, t - tau_h + tau_h * np.exp(-t / tau_h), atol=1e-12)


def test_sinusoid_from_rest_matches_the_closed_form():
    tau, w = 1.0, 2 * np.pi / 24.0  # a daily cycle, 1 h lag constant
    t = np.linspace(0.0, 72.0, 72 * 60 + 1)  # one-minute samples
    y = first_order_lag(t, np.sin(w * t), tau, initial=0.0)
    exact = (np.sin(w * t) - w * tau * np.cos(w * t) + w * tau * np.exp(-t / tau)) / (1 + (w * tau) ** 2)
    # piecewise-linear input: error bounded by the interpolation error (dt w)^2 / 8 = 2.4e-6
    assert np.max(np.abs(y - exact)) < 5e-6
    late = t > 48.0
    assert np.max(y[late]) == pytest.approx(1 / np.sqrt(1 + (w * tau) ** 2), rel=1e-4)


def test_long_series_are_solved_in_blocks_without_a_seam():
    t = np.linspace(0.0, 400.0, 40_001)  # 400 time constants
    y = first_order_lag(t, t.copy(), 1.0)
    assert np.isfinite(y).all() and np.allclose(y, t - 1.0 + np.exp(-t), atol=1e-9)


def test_settled_start_and_bad_arguments():
    assert np.allclose(first_order_lag(np.arange(5.0), np.full(5, 3.0), 1.0), 3.0)
    with pytest.raises(ValueError):
        first_order_lag(np.arange(3.0), np.arange(4.0), 1.0)
    with pytest.raises(ValueError):
        first_order_lag(np.arange(3.0), np.arange(3.0), 0.0)


def test_clear_sky_irradiance_matches_the_reference_library():
    pvlib = pytest.importorskip("pvlib")
    elevation = np.array([-5.0, 0.0, 0.5, 5.0, 15.0, 30.0, 45.0, 60.0, 75.0, 90.0])
    zenith = pd.Series(90.0 - elevation)
    expected = pvlib.clearsky.haurwitz(zenith)["ghi"].to_numpy()
    assert np.allclose(clear_sky_irradiance_wm2(elevation), expected, rtol=1e-12, atol=1e-9)
    assert clear_sky_irradiance_wm2(-10.0) == 0.0


def test_sunshine_raises_the_equilibrium_and_night_offsets_do_not_cool_it():
    assert equilibrium_temperature_c(5.0, 800.0, 4.0) == pytest.approx(5.0 + 3.2)
    assert equilibrium_temperature_c(5.0, -8.0, 4.0) == pytest.approx(5.0)


def test_drift_adds_in_quadrature_whatever_its_sign():
    assert drifted_surface_rms_um(180.0, 25.0, 3.0) == pytest.approx(np.hypot(180.0, 75.0))
    assert drifted_surface_rms_um(180.0, 25.0, -3.0) == pytest.approx(np.hypot(180.0, 75.0))
    assert drifted_surface_rms_um(180.0, 25.0, 0.0) == pytest.approx(180.0)
