"""Features: every number the rules and the decision look at, one row per evaluation time.

``compute_features(frame, times_utc, site, registry, freq_ghz)`` takes the canonical feed frame
(only the rows that may be used: observed ones for a check, observed + forecast for an outlook)
and any array of evaluation times, and returns a DataFrame with one row per time and one column
per entry of :data:`FEATURES` (plus ``time`` and ``calibrator_name``).  Weather values are the
last good sample at or before each time; wind statistics are over the 10 minutes before it.

:data:`FEATURES` is the single list of feature names, units and meanings: the rule compiler,
the lint, ``rules features`` and the JSON output all read it.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.budget import (  # noqa: F401 (re-exported)
    astronomical_surface_rms_um,
    best_surface_rms_um,
    laser_surface_rms_um,
    mismatch_um_per_c,
)
from advisor.calibrator_choice import choose_calibrator
from advisor.catalogue import CATALOGUE, FEATURES, FLAG_NAMES, ROW_FEATURES, FeatureSpec  # noqa: F401 (re-exported)
from advisor.derived_features import DERIVED_ROW_FEATURES, derive_row_features
from advisor.io.references import Registry, reference_in_force
from advisor.io.site import Site
from advisor.io.times import utc_ns as _ns
from advisor.physics.aperture import (
    beam_fwhm_arcsec,
    pointing_efficiency,
    required_surface_rms_um,
    wavelength_mm,
)
from advisor.physics.atmosphere import (
    atmosphere_temperature_k,
    standard_pressure_hpa,
    system_temperature_above_atmosphere_k,
    transmission,
)
from advisor.physics.opacity import zenith_opacity_series_nepers
from advisor.physics.sun import solar_position, sun_state
from advisor.vocabulary import METHODS
from advisor.weather_stats import (  # noqa: F401 (re-exported)
    MIN_WINDOW_COVERAGE,
    TEMP_RATE_WINDOW_MIN,
    WIND_WINDOW_MIN,
    _rolling,
    moisture_features,
    sample_cadence_min,
    statistic_windows_min,
)

#: Feed history a row's features read before its time (10-min wind, 1-h temperature rate): what a
#: chunk of an archive must include before its first row.
LOOKBACK = pd.Timedelta(hours=2)

#: Version of the row features' definition; raise it when their meaning changes without a change
#: in the source of :data:`FEATURE_SOURCE_MODULES` (e.g. a changed data file they read).
FEATURES_VERSION = 3
#: Every module whose code decides the row features.  A replay's feature cache hashes their
#: source; tests/test_featurecache.py fails when the import closure of this module grows beyond it.
FEATURE_SOURCE_MODULES = (
    "advisor.features",
    "advisor.derived_features",
    "advisor.catalogue",
    "advisor.vocabulary",
    "advisor.io.sitemodel",
    "advisor.units",
    "advisor.errors",
    "advisor.physics.sun",
    "advisor.physics.sky",
    "advisor.physics.moisture",
    "advisor.physics.aperture",
    "advisor.io.references",
    "advisor.io.site",
    "advisor.io.feed",
    "advisor.io.fileio",
    "advisor.io.yamlio",
    "advisor.io.bundled",
    "advisor.budget",
    "advisor.io.sitefigures",
    "advisor.weather_stats",
    "advisor.calibrator_choice",
    "advisor.physics.laser",
    "advisor.vocabulary",
    "advisor.physics.ephemeris",
    "advisor.physics.atmosphere",
    "advisor.physics.absorption",
    "advisor.physics.p676_tables",
    "advisor.physics.opacity",
    "advisor.physics.track",
    "advisor.io.feedfile",
    "advisor.io.times",
    "advisor.io.encoding",
    "advisor.text",
    "advisor.io.feedlayout",
    "advisor.io.feedtimes",
    "advisor.io.feedvalues",
    "advisor.io.sitereader",
)


def row_features(frame: pd.DataFrame, times_utc, site: Site, registry: Registry) -> pd.DataFrame:
    """The row-scope features at each of ``times_utc`` (independent of the target frequency).

    Columns: ``time``, every ``row`` feature of the catalogue, ``calibrator_name`` and
    ``source_row`` (position in ``frame`` of the weather sample each row reads, -1 if none).
    This is what a replay caches: it does not depend on the target frequency.  It depends on the
    site, including the session's elevation (``site.session``: the calibrator choice and its
    gravity residual), which a replay's cache key therefore includes.
    """
    t_ns = _ns(times_utc)
    n = len(t_ns)
    times_index = pd.DatetimeIndex(t_ns.astype("datetime64[ns]")).tz_localize("UTC")
    out: dict[str, np.ndarray] = {}

    # --- weather at each time: last good sample at or before it --------------------------
    all_ns = _ns(frame["time"])
    good_mask = frame["good"].to_numpy(dtype=bool)
    good = frame[good_mask]
    good_ns = all_ns[good_mask]
    pos = np.searchsorted(good_ns, t_ns, side="right") - 1
    has = pos >= 0
    safe = np.clip(pos, 0, None)
    kinds = good["kind"].to_numpy() if "kind" in good else np.full(len(good), "observed", dtype=object)
    cadence = sample_cadence_min(good_ns, kinds)
    rolled = _rolling(good, cadence) if len(good) else None

    def take(values: np.ndarray) -> np.ndarray:
        if len(values) == 0:
            return np.full(n, np.nan)
        return np.where(has, values[safe], np.nan)

    for name in (
        "air_temp_c",
        "rel_humidity_pct",
        "dew_point_c",
        "visibility_m",
        "precip_mm_h",
        "pressure_hpa",
        "solar_wm2",
    ):
        col = good[name].to_numpy(dtype=float) if name in good else np.array([])
        out[name] = take(col) if len(col) else np.full(n, np.nan)
    for name in ("wind_mean_ms", "wind_gust_ms", "air_temp_rate_c_per_h", "wind_window_min", "temp_rate_window_min"):
        out[name] = take(rolled[name].to_numpy(dtype=float)) if rolled is not None else np.full(n, np.nan)
    estimated = good["gust_estimated"].to_numpy(dtype=bool) if "gust_estimated" in good else np.zeros(len(good), bool)
    out["gust_estimated"] = take(estimated.astype(float)) == 1.0

    # --- data quality --------------------------------------------------------------------
    age_min = np.where(has, (t_ns - good_ns[safe]) / 6e10, np.nan) if len(good_ns) else np.full(n, np.nan)
    out["data_age_min"] = age_min
    out["feed_cadence_min"] = take(cadence)
    latest = np.searchsorted(all_ns, t_ns, side="right") - 1
    latest_ok = np.where(latest >= 0, good_mask[np.clip(latest, 0, None)] if len(good_mask) else False, False)
    age_limit = site.feed.age_limit_min(out["feed_cadence_min"])
    out["data_ok"] = has & (age_min <= age_limit) & latest_ok & np.isfinite(out["wind_mean_ms"])
    # An optional sensor that was reporting and fell silent at the sample in use never allows a
    # scan (advisor.decision); one the station lacks, or reports now and then, is merely "not seen".
    dropout_bits = (
        good["q_bits_dropout"].to_numpy(dtype=np.int64)
        if "q_bits_dropout" in good
        else np.zeros(len(good), dtype=np.int64)
    )
    dropout_bits = np.where(has, dropout_bits[safe], 0) if len(dropout_bits) else np.zeros(n, dtype=np.int64)

    # --- sun -----------------------------------------------------------------------------
    sun_el, sun_az = solar_position(times_index, site.latitude_deg, site.longitude_deg)
    out["sun_elevation_deg"] = np.asarray(sun_el, dtype=float)
    out["sun_azimuth_deg"] = np.asarray(sun_az, dtype=float)
    state = np.asarray(sun_state(times_index, site.latitude_deg, site.longitude_deg), dtype=np.int8).reshape(n)
    out["sun_state"] = state.astype(float)

    # --- reference scan ------------------------------------------------------------------
    ref_ns, ref_temp = reference_in_force(registry, t_ns)
    out["reference_age_h"] = np.where(ref_ns >= 0, (t_ns - ref_ns) / 3.6e12, np.nan)
    out["reference_temp_delta_c"] = np.abs(out["air_temp_c"] - ref_temp)

    # --- calibrators ---------------------------------------------------------------------
    cal_name = choose_calibrator(times_index, site, out)

    good_rows = np.flatnonzero(good_mask)
    source_row = np.where(has, good_rows[safe] if len(good_rows) else -1, -1).astype(np.int64)
    out["dropout_bits"] = np.asarray(dropout_bits, dtype=np.int64)
    derive_row_features(out, times_index, site)
    return _assemble(times_index, out, cal_name, source_row, np.asarray(latest, dtype=np.int64))


#: The columns of :func:`row_features` a feature cache keeps; :func:`complete_row_features` adds the rest.
STORED_ROW_FEATURES = (
    "time",
    *(name for name in ROW_FEATURES if name not in DERIVED_ROW_FEATURES),
    "calibrator_name",
    "source_row",
    "latest_row",
    "dropout_bits",
)


def _assemble(times_index, out: dict[str, np.ndarray], cal_name, source_row, latest_row) -> pd.DataFrame:
    """The frame of :func:`row_features`: time, the row features in catalogue order, then the pointers."""
    columns: dict[str, object] = {"time": times_index}
    for name in ROW_FEATURES:
        values = out[name]
        columns[name] = (
            np.asarray(values, dtype=bool) if CATALOGUE[name].unit == "flag" else np.asarray(values, dtype=float)
        )
    columns["calibrator_name"] = cal_name
    columns["source_row"] = source_row
    columns["latest_row"] = latest_row
    columns["dropout_bits"] = out["dropout_bits"]
    return pd.DataFrame(columns, copy=False)


def complete_row_features(stored: pd.DataFrame, site: Site) -> pd.DataFrame:
    """The :func:`row_features` frame back from its :data:`STORED_ROW_FEATURES` (what a cache keeps).

    Equal to the frame the stored columns were taken from, bit for bit, when ``stored`` holds
    rows that :func:`row_features` computed together (a chunk of a cache entry) for the same
    site: the derived features are computed by the same code from the same values.
    """
    times_index = pd.DatetimeIndex(stored["time"])
    out = {name: stored[name].to_numpy() for name in STORED_ROW_FEATURES if name in ROW_FEATURES}
    out["dropout_bits"] = stored["dropout_bits"].to_numpy()
    derive_row_features(out, times_index, site)
    frame = _assemble(
        times_index,
        out,
        stored["calibrator_name"].array,
        stored["source_row"].to_numpy(),
        stored["latest_row"].to_numpy(),
    )
    frame.index = stored.index
    return frame


def row_features_chunked(
    frame: pd.DataFrame,
    times_utc: pd.DatetimeIndex,
    site: Site,
    registry: Registry,
    chunk_rows: int = 100_000,
    on_chunk=None,
) -> pd.DataFrame:
    """:func:`row_features` in chunks of ``chunk_rows`` times, each with the feed rows it needs.

    Identical to one call over all times (each chunk gets :data:`LOOKBACK` of history before its
    first time); memory is bounded by the chunk.  ``on_chunk(done_rows, total_rows)`` is called
    after each chunk (for a progress bar).
    """
    frame_ns = _ns(frame["time"])
    t_ns = _ns(times_utc)
    parts = []
    for start in range(0, len(t_ns), chunk_rows):
        chunk = times_utc[start : start + chunk_rows]
        lo = np.searchsorted(frame_ns, t_ns[start] - LOOKBACK.value, side="left")
        hi = np.searchsorted(frame_ns, t_ns[min(start + chunk_rows, len(t_ns)) - 1], side="right")
        part = row_features(frame.iloc[lo:hi], chunk, site, registry)
        for column in ("source_row", "latest_row"):
            rows = part[column].to_numpy()
            part[column] = np.where(rows >= 0, rows + lo, -1)
        parts.append(part)
        if on_chunk:
            on_chunk(min(start + chunk_rows, len(t_ns)), len(t_ns))
    if not parts:
        return row_features(frame.iloc[:0], times_utc, site, registry)
    return pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]


def feature_source_paths() -> list[Path]:
    """Source files of :data:`FEATURE_SOURCE_MODULES` (what a feature cache key hashes)."""
    paths = []
    for name in FEATURE_SOURCE_MODULES:
        spec = importlib.util.find_spec(name)
        if spec is None or spec.origin is None:  # pragma: no cover - a broken install
            raise ImportError(f"cannot locate the source of {name}")
        paths.append(Path(spec.origin))
    return paths


def target_features(site: Site, freq_ghz: float) -> dict[str, float]:
    """The target-scope features: one number each, fixed by the target frequency and the site."""
    th, astro, atm = site.thresholds, site.astronomical, site.atmosphere
    session_el = float(site.session.elevation_deg)
    targets = {
        "freq_ghz": float(freq_ghz),
        "wavelength_mm": float(wavelength_mm(freq_ghz)),
        "surface_requirement_fraction": float(th.surface_requirement_fraction),
        "required_surface_rms_um": float(required_surface_rms_um(freq_ghz, th.surface_requirement_fraction)),
        "beam_fwhm_arcsec": float(beam_fwhm_arcsec(freq_ghz, site.dish_diameter_m)),
        "hf_wind_limit_ms": float(th.high_frequency_wind_limit_ms),
        "high_frequency_min_ghz": float(th.high_frequency_min_ghz),
        "scan_duration_min": float(site.scan.duration_min),
        "astronomical_duration_min": float(astro.duration_min),
        "session_elevation_deg": session_el,
        "calibrator_min_elevation_deg": float(astro.min_calibrator_elevation_deg),
        "calibrator_max_elevation_deg": float(astro.max_calibrator_elevation_deg),
        "sun_avoidance_deg": float(astro.sun_avoidance_deg),
        "site_height_m": float(site.elevation_m),
        "receiver_temp_k": float(atm.receiver_temp_k),
        "reference_pwv_mm": float(atm.reference_pwv_mm),
    }
    # The dry reference night: the site's standard pressure, the reference PWV and air temperature.
    ref_rho = atm.reference_pwv_mm / atm.water_scale_height_km
    ref_tau = _zenith_opacity(
        targets, standard_pressure_hpa(site.elevation_m), atm.reference_air_temp_c, ref_rho, atm.reference_pwv_mm
    )
    targets["reference_system_temp_k"] = float(_system_temp_k(targets, ref_tau, atm.reference_air_temp_c)[0])
    return targets


def _zenith_opacity(targets: dict[str, float], pressure_hpa, temp_c, rho_gm3, pwv_mm) -> np.ndarray:
    """Zenith opacity at the target frequency [nepers] (NaN outside 1-350 GHz)."""
    return zenith_opacity_series_nepers(
        targets["freq_ghz"], pressure_hpa, temp_c, rho_gm3, pwv_mm, min(max(targets["site_height_m"], 0.0), 4000.0)
    )


def _system_temp_k(targets: dict[str, float], tau, temp_c) -> np.ndarray:
    """T_sys* at the session's elevation [K]; inf where the sky is opaque."""
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        return np.atleast_1d(
            np.asarray(
                system_temperature_above_atmosphere_k(
                    targets["receiver_temp_k"], tau, targets["session_elevation_deg"], atmosphere_temperature_k(temp_c)
                ),
                dtype=float,
            )
        )


def with_target(rows: pd.DataFrame, targets: dict[str, float]) -> pd.DataFrame:
    """Row features plus the ``target_row`` ones (row values that depend on the target).

    The atmosphere at the target frequency: zenith opacity from the surface air (the feed's
    pressure, else the site's standard pressure), transmission and T_sys* at the session's
    elevation, and the integration-time factor against the site's dry reference night; the
    session's pointing efficiency on the target's beam; each method's margin to the requirement.
    """
    out = rows.copy(deep=False)
    pointing = rows["wind_pointing_error_arcsec"].to_numpy()
    out["pointing_beam_fraction"] = pointing / targets["beam_fwhm_arcsec"]
    out["pointing_efficiency"] = np.asarray(pointing_efficiency(pointing, targets["beam_fwhm_arcsec"]), dtype=float)
    temp = rows["air_temp_c"].to_numpy(dtype=float)
    pressure = rows["pressure_hpa"].to_numpy(dtype=float)
    pressure = np.where(np.isfinite(pressure), pressure, standard_pressure_hpa(targets["site_height_m"]))
    tau = _zenith_opacity(
        targets,
        pressure,
        temp,
        rows["water_vapour_density_gm3"].to_numpy(dtype=float),
        rows["pwv_mm"].to_numpy(dtype=float),
    )
    tsys = _system_temp_k(targets, tau, temp)
    out["zenith_opacity"] = tau
    out["transmission"] = np.asarray(transmission(tau, targets["session_elevation_deg"]), dtype=float).reshape(-1)
    out["system_temp_k"] = tsys
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        out["integration_time_factor"] = (tsys / targets["reference_system_temp_k"]) ** 2
    for method in METHODS:
        out[f"{method}_surface_margin_um"] = (
            targets["required_surface_rms_um"] - rows[f"{method}_surface_rms_um"].to_numpy()
        )
    return out


def compute_features(frame: pd.DataFrame, times_utc, site: Site, registry: Registry, freq_ghz: float) -> pd.DataFrame:
    """Every feature at each of ``times_utc`` as one wide frame (target features repeated per row).

    For callers that want a plain table (training, tests); the evaluation path keeps the target
    features as scalars (:func:`target_features`).
    """
    targets = target_features(site, freq_ghz)
    out = with_target(row_features(frame, times_utc, site, registry), targets)
    for name, value in targets.items():
        out[name] = np.full(len(out), value)
    return out


def columns_of(features: pd.DataFrame, targets: dict[str, float] | None = None) -> dict[str, np.ndarray]:
    """Feature columns as name → array of the frame's length (what compiled conditions read).

    Target features come from ``targets`` as read-only broadcast views (no memory per row), or
    from the frame when it carries them (:func:`compute_features`).
    """
    n = len(features)
    columns = {name: features[name].to_numpy() for name in CATALOGUE if name in features}
    for name, value in (targets or {}).items():
        columns[name] = np.broadcast_to(np.float64(value), (n,))
    return columns
