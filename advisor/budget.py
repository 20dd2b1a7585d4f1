"""The methods' error budgets: the surface each correction is expected to leave, in any weather.

    laser_surface_rms_um(site, gust, reference_age_h, reference_temp_delta_c)
    astronomical_surface_rms_um(site, gust, air_temp_rate_c_per_h, gravity_residual_um)
    best_surface_rms_um(site)        # calm, fresh reference: what no weather can improve on

Independent terms add in quadrature (root-sum-square); the site file gives every figure.
"""

from __future__ import annotations

import numpy as np

from advisor.catalogue import CATALOGUE, FEATURES, FLAG_NAMES, ROW_FEATURES, FeatureSpec  # noqa: F401 (re-exported)
from advisor.io.site import Site
from advisor.physics.aperture import (
    root_sum_square,
)
from advisor.physics.laser import reference_mismatch_um_per_c


def mismatch_um_per_c(site: Site) -> float:
    """The laser's error per °C between the air now and at the reference scan [µm/°C].

    The site's measured ``reference_mismatch_um_per_c`` when it gives one, else the air path and
    mount figures through :func:`advisor.physics.laser.reference_mismatch_um_per_c`.
    """
    s = site.scan
    if s.reference_mismatch_um_per_c is not None:
        return float(s.reference_mismatch_um_per_c)
    pressure = 1013.25 * np.exp(-site.elevation_m / 8400.0)  # isothermal scale height ~8.4 km
    return reference_mismatch_um_per_c(
        s.air_path_m, s.refraction_compensated_fraction, s.mount_um_per_c, pressure_hpa=pressure, temp_c=5.0
    )


def laser_surface_rms_um(site: Site, wind_gust_ms, reference_age_h, reference_temp_delta_c) -> np.ndarray:
    """Expected surface rms after a laser correction [µm]; NaN without a reference.

    σ = √(σ_astro² + σ_scan² + σ_age²), with σ_scan = √(noise² + (k·gust²)²) (vibration grows with
    wind pressure ∝ v²) and σ_age = √((ageing · age_days)² + (mismatch · |ΔT|)²): the surface the
    reference scan was taken on, the scan's own error, and the reference's decay with age and
    with the air-temperature difference (air path and mount, :func:`mismatch_um_per_c`).
    Independent terms add in quadrature.
    """
    s = site.scan
    gust = np.asarray(wind_gust_ms, dtype=float)
    scan_term = root_sum_square(s.noise_um_at_calm, s.wind_term_um_per_ms2 * gust**2)
    age_term = root_sum_square(
        s.reference_ageing_um_per_day * np.asarray(reference_age_h, dtype=float) / 24.0,
        mismatch_um_per_c(site) * np.asarray(reference_temp_delta_c, dtype=float),
    )
    return np.asarray(root_sum_square(site.astronomical.surface_rms_um, scan_term, age_term), dtype=float)


def astronomical_surface_rms_um(site: Site, wind_gust_ms, air_temp_rate_c_per_h, gravity_residual_um=0.0) -> np.ndarray:
    """Expected surface rms after an out-of-focus holography correction [µm].

    σ = √(σ_astro² + (k·gust²)² + (drift · |dT/dt| · duration)² + σ_g²): the site's holography
    figure, wind deformation during the measurement, thermal drift over its longer duration, and
    the gravity residual σ_g of a correction made at the calibrator's elevation and used at the
    session's (:func:`advisor.physics.aperture.gravity_residual_um`; 0 where no calibrator is
    chosen, when the method is blocked anyway).  The laser scans at the session's elevation and
    carries no such term.
    """
    a = site.astronomical
    gust = np.asarray(wind_gust_ms, dtype=float)
    rate = np.nan_to_num(np.abs(np.asarray(air_temp_rate_c_per_h, dtype=float)), nan=0.0)
    drift = a.thermal_drift_um_per_c * rate * a.duration_min / 60.0
    gravity = np.nan_to_num(np.asarray(gravity_residual_um, dtype=float), nan=0.0)
    return np.asarray(root_sum_square(a.surface_rms_um, a.wind_term_um_per_ms2 * gust**2, drift, gravity), dtype=float)


def best_surface_rms_um(site: Site) -> dict[str, float]:
    """The least surface rms each method can leave in any weather (calm, fresh reference, a calibrator at
    the session's elevation) [µm]."""
    return {
        "scan": float(laser_surface_rms_um(site, 0.0, 0.0, 0.0)),
        "astronomical": float(astronomical_surface_rms_um(site, 0.0, 0.0)),
    }
