"""Row features computed from other row features: what a replay's feature cache need not keep.

``derive_row_features(out, times_index, site)`` adds :data:`DERIVED_ROW_FEATURES` to ``out``
from the others (and the times and the site).  :func:`advisor.features.row_features` calls it
for every row it computes and :func:`advisor.features.complete_row_features` for every chunk a
cache gives back, so both give the same bits: moisture and water vapour from the temperature and
dew point, the hours since sunrise and sunset from the times, the flags, and the expected surface
of each method.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from advisor.budget import astronomical_surface_rms_um, laser_surface_rms_um, mismatch_um_per_c
from advisor.io.site import Site
from advisor.physics.aperture import gravity_residual_um
from advisor.physics.atmosphere import precipitable_water_mm, water_vapour_density_from_dew_point_gm3
from advisor.physics.sun import SUNRISE_SUNSET_ALTITUDE_DEG, hours_since_sunrise, hours_since_sunset
from advisor.weather_stats import moisture_features

#: Row features recomputed, by the same code, from the stored ones (and the time and the site)
#: rather than kept in a replay's feature cache: cheap to compute, costly to store.
DERIVED_ROW_FEATURES = (
    "gust_factor",
    "wind_pointing_error_arcsec",
    "dew_point_spread_c",
    "below_freezing",
    "frost_point_c",
    "frost_point_spread_c",
    "rel_humidity_ice_pct",
    "fog",
    "precipitation",
    "water_vapour_density_gm3",
    "pwv_mm",
    "is_night",
    "sun_transition",
    "hours_since_sunset",
    "hours_since_sunrise",
    "has_reference",
    "reference_mismatch_um",
    "scan_surface_rms_um",
    "astronomical_surface_rms_um",
    "calibrator_gravity_residual_um",
    "input_dropout",
)


def derive_row_features(out: dict[str, np.ndarray], times_index: pd.DatetimeIndex, site: Site) -> None:
    """Add the :data:`DERIVED_ROW_FEATURES` to ``out`` (name → array) from the stored ones.

    One function for :func:`row_features` and :func:`complete_row_features`, so a cached replay
    gets the same bits as a computed one.  A feature already in ``out`` is kept (the calibrator
    choice gives its gravity residual itself; the test of the cache checks the two agree).
    """
    th = site.thresholds
    with np.errstate(invalid="ignore", divide="ignore"):
        out["gust_factor"] = np.where(out["wind_mean_ms"] >= 0.5, out["wind_gust_ms"] / out["wind_mean_ms"], np.nan)
    out["input_dropout"] = out["dropout_bits"] != 0

    # --- moisture ------------------------------------------------------------------------
    out.update(
        moisture_features(out["air_temp_c"], out["dew_point_c"], out["rel_humidity_pct"], out["visibility_m"], site)
    )
    out["precipitation"] = out["precip_mm_h"] >= th.precip_mm_h
    out["water_vapour_density_gm3"] = np.asarray(
        water_vapour_density_from_dew_point_gm3(out["air_temp_c"], out["dew_point_c"])
    )
    out["pwv_mm"] = np.asarray(
        precipitable_water_mm(out["water_vapour_density_gm3"], site.atmosphere.water_scale_height_km)
    )

    # --- sun and thermal state -----------------------------------------------------------
    out["hours_since_sunset"] = np.asarray(
        hours_since_sunset(times_index, site.latitude_deg, site.longitude_deg), dtype=float
    )
    out["hours_since_sunrise"] = np.asarray(
        hours_since_sunrise(times_index, site.latitude_deg, site.longitude_deg), dtype=float
    )
    # Night: the sun is below the standard altitude (the same crossing table as the event times, so
    # polar day and polar night are right); the elevation decides only for a time it cannot place.
    state = out["sun_state"]
    out["is_night"] = np.where(state != 0, state < 0, out["sun_elevation_deg"] < SUNRISE_SUNSET_ALTITUDE_DEG)
    # Fastest deformation while the sun rises or sets through the low band: not on a polar day or
    # night, when it stays up (or down) and its heating changes slowly.
    out["sun_transition"] = (
        (out["sun_elevation_deg"] >= -6.0) & (out["sun_elevation_deg"] <= 15.0) & (np.abs(state) != 2)
    )

    # --- reference scan and calibrator ----------------------------------------------------
    out["has_reference"] = np.isfinite(out["reference_age_h"])  # the age is NaN exactly without one
    if "calibrator_gravity_residual_um" not in out:
        astro = site.astronomical
        out["calibrator_gravity_residual_um"] = np.asarray(
            gravity_residual_um(
                out["calibrator_mid_elevation_deg"],
                site.session.elevation_deg,
                astro.gravity_sin_um,
                astro.gravity_cos_um,
            ),
            dtype=float,
        )
    out["wind_pointing_error_arcsec"] = th.pointing_error_arcsec_at_4ms * (out["wind_gust_ms"] / 4.0) ** 2
    out["reference_mismatch_um"] = mismatch_um_per_c(site) * out["reference_temp_delta_c"]

    # --- expected surface of each method (before rule error terms) ---------------------------
    out["scan_surface_rms_um"] = laser_surface_rms_um(
        site, out["wind_gust_ms"], out["reference_age_h"], out["reference_temp_delta_c"]
    )
    out["astronomical_surface_rms_um"] = astronomical_surface_rms_um(
        site, out["wind_gust_ms"], out["air_temp_rate_c_per_h"], out["calibrator_gravity_residual_um"]
    )
