"""The feature catalogue: every number the rules, the model and the views know, declared once.

    spec = CATALOGUE["wind_gust_ms"]
    spec.unit, spec.meaning, spec.label, spec.fmt, spec.plausible, spec.domain, spec.scope

Each :class:`FeatureSpec` holds a feature's name (which carries its unit), its unit, its
meaning, how the screen labels and formats it, the range a raw measurement must fall in to be
plausible (the feed drops values outside it), the range the feature can take at all (lint's
"can never be true") and its scope: ``row`` features vary with the evaluation time; ``target``
features depend only on the target frequency and the site, and travel as scalars;
``target_row`` features vary per row but depend on the target, so a replay's cache of row
features serves every target frequency.

Adding a feature means adding one entry here and computing it in :mod:`advisor.features`;
lint, ``rules features``, the screen, the model's wording, the outlook table, the feed's
plausibility check and ``check --json`` all read this list.
"""

from __future__ import annotations

import keyword
import math
import re
from dataclasses import dataclass

from advisor import units

__all__ = [
    "FeatureSpec",
    "FEATURES",
    "CATALOGUE",
    "FLAG_NAMES",
    "KEY_FEATURES",
    "STEP_FEATURES",
    "PLAUSIBLE_RANGE",
    "FEATURE_DOMAINS",
    "NEEDS",
    "ROW_FEATURES",
    "TARGET_ROW_FEATURES",
    "TARGET_FEATURES",
    "SCOPES",
    "unit_text",
]

_INF = math.inf
#: Where a feature's value comes from (see FeatureSpec.scope).
SCOPES = ("row", "target", "target_row")
_NAME_RE = re.compile(r"[a-z_][a-z0-9_]*\Z")


@dataclass(frozen=True)
class FeatureSpec:
    """One feature.

    Parameters
    ----------
    name : str
        Feature name, ``[a-z_][a-z0-9_]*``, carrying its unit (``wind_mean_ms``).
    unit : str
        A unit of :mod:`advisor.units`, ``"1"`` for dimensionless, ``"flag"`` for booleans.
    meaning : str
        One line for documentation and lint output.
    label : str
        Short words for the screen and the model's explanations ("gusts"); defaults to the name.
    fmt : str
        ``str.format`` pattern of the value with its unit ("{:.1f} m/s").
    plausible : tuple of float, optional
        (lowest, highest) a measured input may have; the feed drops other values as implausible.
    domain : tuple, optional
        (lowest, highest, why) the feature can ever take when present (lint's impossible ranges).
    scope : str
        ``row``: varies with time, not with the target (a replay caches these);
        ``target``: fixed by the target frequency and the site (travels as a scalar);
        ``target_row``: varies with time and depends on the target (computed after the cache).
    words : str
        The feature in a sentence ("gusts 7.8 m/s lowered the odds"); defaults to the label.
    key : bool
        Shown among the screen's key conditions.
    key_when : str
        With ``key``: the name of a flag feature; the key condition is shown only where it is
        true (the frost-point spread when the air is below freezing).
    step : bool
        Shown per step in the outlook's tables.
    needs : tuple of str
        Optional inputs of the feed this feature cannot be known without: where any of them is
        missing (NaN), a condition reading the feature is unknown there, never "clear"
        (:mod:`advisor.rules.compiler`).  A measured optional input needs itself.
    """

    name: str
    unit: str
    meaning: str = ""
    label: str = ""
    fmt: str = ""
    plausible: tuple[float, float] | None = None
    domain: tuple[float, float, str] | None = None
    scope: str = "row"
    words: str = ""
    key: bool = False
    key_when: str = ""
    step: bool = False
    needs: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        if (
            not isinstance(self.name, str)
            or not _NAME_RE.match(self.name)
            or keyword.iskeyword(self.name)
            or self.name in ("true", "false")
            or self.name.startswith("__")
        ):
            raise ValueError(f"feature name {self.name!r} must match [a-z_][a-z0-9_]* and not be a keyword")
        if self.unit != "flag":
            try:
                units.lookup(self.unit)
            except (units.UnitError, TypeError):
                raise ValueError(f"feature {self.name}: unknown unit {self.unit!r}") from None
        if self.scope not in SCOPES:
            raise ValueError(f"feature {self.name}: scope must be one of {SCOPES}, not {self.scope!r}")

    @property
    def kind(self) -> str:
        """``"flag"`` for booleans, ``"number"`` otherwise."""
        return "flag" if self.unit == "flag" else "number"

    @property
    def phrase(self) -> str:
        """The feature in a sentence: its words, else its label, else its name with spaces."""
        return self.words or self.label or self.name.replace("_", " ")

    @property
    def display_format(self) -> str:
        """Format of a value with its unit; a generic one when the entry gives none."""
        if self.fmt:
            return self.fmt
        return "{:.3g} " + unit_text(self.unit) if unit_text(self.unit) else "{:.3g}"


#: Units as people write them.
_UNIT_TEXT = {
    "degC": "°C",
    "delta_degC": "°C",
    "degC/h": "°C/h",
    "deg": "°",
    "um": "µm",
    "g/m3": "g/m³",
    "1": "",
    "flag": "",
}


def unit_text(unit: str) -> str:
    """A unit as people write it (``delta_degC`` → ``°C``)."""
    return _UNIT_TEXT.get(unit, unit)


def _never_negative(why: str) -> tuple[float, float, str]:
    return (0.0, _INF, f"it is never negative: {why}")


def _measured(lo: float, hi: float) -> tuple[float, float, str]:
    return (lo, hi, f"the feed drops values outside {lo:g}..{hi:g} as implausible")


_ELEVATION = (-90.0, 90.0, "an elevation is between -90 and +90 deg")
_F = FeatureSpec

#: Every feature, in the order tables list them.
FEATURES: tuple[FeatureSpec, ...] = (
    # wind
    _F(
        "wind_mean_ms",
        "m/s",
        "mean wind over the last 10 minutes",
        "wind (10-min mean)",
        "{:.1f} m/s",
        words="mean wind",
        plausible=(0.0, 75.0),
        domain=_measured(0.0, 75.0),
        key=True,
        step=True,
    ),
    _F(
        "wind_gust_ms",
        "m/s",
        "highest gust over the last 10 minutes",
        "gusts (10-min max)",
        "{:.1f} m/s",
        words="gusts",
        plausible=(0.0, 100.0),
        domain=_measured(0.0, 100.0),
        key=True,
        step=True,
    ),
    _F(
        "wind_window_min",
        "min",
        "window of the wind statistics: 10 minutes, or the feed's cadence where it is "
        "coarser (an hourly feed gives 1-h means and maxima)",
        "wind window",
        "{:.0f} min",
        domain=_never_negative("it is a duration"),
    ),
    _F(
        "gust_estimated",
        "flag",
        "the station has no gust sensor: gusts are the site's gust factor times the mean "
        "wind (feed.gust_factor), an estimate",
    ),
    _F(
        "gust_factor",
        "1",
        "gust divided by mean wind (turbulence); NaN below 0.5 m/s mean",
        "gust factor",
        "{:.2f}",
        domain=_never_negative("it is a ratio of two speeds"),
    ),
    _F(
        "wind_pointing_error_arcsec",
        "arcsec",
        "expected wind-induced pointing error (site figure, scales with gust²)",
        "wind pointing error",
        "{:.1f} arcsec",
        domain=_never_negative("it grows with the square of the gust speed"),
    ),
    _F(
        "pointing_beam_fraction",
        "1",
        "wind pointing error as a fraction of the beam FWHM",
        "pointing error / beam",
        "{:.2f}",
        domain=_never_negative("it is a pointing error divided by the beam width"),
        scope="target_row",
    ),
    # moisture
    _F(
        "air_temp_c",
        "degC",
        "air temperature",
        "air temperature",
        "{:.1f} °C",
        plausible=(-60.0, 60.0),
        domain=_measured(-60.0, 60.0),
        key=True,
        step=True,
    ),
    _F(
        "rel_humidity_pct",
        "%",
        "relative humidity",
        "relative humidity",
        "{:.0f} %",
        plausible=(0.0, 100.5),
        domain=(0.0, 100.0, "relative humidity is 0..100 % (the feed drops or clips other values)"),
        key=True,
        step=True,
    ),
    _F(
        "dew_point_c",
        "degC",
        "dew point (Magnus, Alduchov & Eskridge 1996)",
        "dew point",
        "{:.1f} °C",
        plausible=(-80.0, 60.0),
        domain=_measured(-80.0, 60.0),
    ),
    _F(
        "dew_point_spread_c",
        "delta_degC",
        "air temperature minus dew point",
        "dew-point spread",
        "{:.1f} °C",
        key=True,
        step=True,
    ),
    _F(
        "visibility_m",
        "m",
        "visibility (NaN if the feed has none)",
        "visibility",
        "{:.0f} m",
        plausible=(0.0, 1_000_000.0),
        domain=_measured(0.0, 1_000_000.0),
        key=True,
        step=True,
        needs=("visibility_m",),
    ),
    _F(
        "precip_mm_h",
        "mm/h",
        "precipitation rate (NaN if the feed has none)",
        "precipitation",
        "{:.1f} mm/h",
        plausible=(0.0, 500.0),
        domain=_measured(0.0, 500.0),
        key=True,
        step=True,
        needs=("precip_mm_h",),
    ),
    _F(
        "pressure_hpa",
        "hPa",
        "station pressure (NaN if the feed has none)",
        "pressure",
        "{:.0f} hPa",
        plausible=(300.0, 1100.0),
        domain=_measured(300.0, 1100.0),
        needs=("pressure_hpa",),
    ),
    _F(
        "solar_wm2",
        "W/m2",
        "global irradiance (NaN if the feed has none)",
        "irradiance",
        "{:.0f} W/m²",
        plausible=(-20.0, 1500.0),
        domain=_measured(-20.0, 1500.0),
        needs=("solar_wm2",),
    ),
    _F("below_freezing", "flag", "air temperature below 0 °C (humidity then counts over ice)"),
    _F(
        "frost_point_c",
        "degC",
        "frost point: where the air's water vapour saturates over ice (Alduchov & Eskridge "
        "1996 ice form); where the dew point is 0 °C or above, the dew point (dew forms first and freezes on a "
        "surface below 0 °C)",
        "frost point",
        "{:.1f} °C",
        domain=(-80.0, 60.0, "it is the dew point, or between the dew point and 0 °C"),
    ),
    _F(
        "frost_point_spread_c",
        "delta_degC",
        "air temperature minus frost point: at 0 the air is saturated over ice "
        "and frost grows on surfaces at air temperature; panels under a clear night sky run a few °C colder",
        "frost-point spread",
        "{:.1f} °C",
        key=True,
        key_when="below_freezing",
    ),
    _F(
        "rel_humidity_ice_pct",
        "%",
        "relative humidity over ice below 0 °C, from the hygrometer's RH over water "
        "(WMO-No. 8 ch. 4; above 100 %: supersaturated over ice); NaN at or above 0 °C",
        "RH over ice",
        "{:.0f} %",
        domain=_never_negative("it is a ratio of vapour pressures"),
    ),
    _F(
        "fog",
        "flag",
        "fog likely: spread to saturation below the site limit with high RH (over water at or above "
        "0 °C, over ice below), or visibility below the site limit (from the spread alone where the feed has no "
        "visibility)",
    ),
    _F(
        "precipitation",
        "flag",
        "precipitation at or above the site threshold (unknown where the feed has no precipitation)",
        needs=("precip_mm_h",),
    ),
    # atmosphere
    _F(
        "water_vapour_density_gm3",
        "g/m3",
        "water-vapour density of the surface air, 216.7 e / T (ITU-R P.676)",
        "water vapour",
        "{:.1f} g/m³",
        domain=_never_negative("it is a density"),
    ),
    _F(
        "pwv_mm",
        "mm",
        "precipitable water vapour above the site: surface water-vapour density times the site's "
        "scale height (ITU-R P.835 exponential profile)",
        "PWV",
        "{:.1f} mm",
        words="precipitable water",
        domain=_never_negative("it is a column of water"),
        key=True,
        step=True,
    ),
    _F(
        "zenith_opacity",
        "1",
        "zenith opacity at the target frequency [nepers], oxygen and water vapour (ITU-R P.676 "
        "Annex 2; NaN outside 1-350 GHz)",
        "zenith opacity",
        "{:.2f} Np",
        words="zenith opacity",
        domain=_never_negative("it is an optical depth"),
        scope="target_row",
        key=True,
    ),
    _F(
        "transmission",
        "1",
        "fraction of a source's power the atmosphere lets through at the session's elevation, exp(-tau A)",
        "transmission",
        "{:.2f}",
        domain=(0.0, 1.0, "it is a fraction of power"),
        scope="target_row",
    ),
    _F(
        "system_temp_k",
        "K",
        "system temperature referred to above the atmosphere, T_sys* = (T_rx + T_atm (1 - "
        "e^-tau A)) / e^-tau A, at the session's elevation",
        "T_sys*",
        "{:.0f} K",
        scope="target_row",
    ),
    _F(
        "integration_time_factor",
        "1",
        "integration time for the same sensitivity relative to the site's dry "
        "reference night, (T_sys* / T_sys*_ref)^2 (the atmosphere only)",
        "time vs a dry night",
        "{:.1f}×",
        words="integration-time factor",
        domain=_never_negative("it is a ratio of times"),
        scope="target_row",
        key=True,
    ),
    _F(
        "pointing_efficiency",
        "1",
        "the session's gain left after the wind pointing error, exp(-4 ln2 "
        "(sigma/theta)^2) for a Gaussian beam, whichever method corrects the surface",
        "session pointing efficiency",
        "{:.2f}",
        words="pointing efficiency",
        domain=(0.0, 1.0, "it is a fraction of the gain"),
        scope="target_row",
        key=True,
    ),
    # thermal state
    _F(
        "sun_elevation_deg",
        "deg",
        "apparent sun elevation",
        "sun elevation",
        "{:.1f}°",
        domain=_ELEVATION,
        key=True,
        step=True,
    ),
    _F(
        "sun_azimuth_deg",
        "deg",
        "sun azimuth, clockwise from north",
        "sun azimuth",
        "{:.0f}°",
        domain=(0.0, 360.0, "azimuth is counted 0..360 deg from north"),
    ),
    _F(
        "sun_state",
        "1",
        "the sun today: 2 polar day (up all day), 1 up, -1 down, -2 polar night (down all day)",
        "sun",
        "{:+.0f}",
        domain=(-2.0, 2.0, "it is one of -2, -1, 1, 2 (0 only for an unknown time)"),
    ),
    _F(
        "is_night",
        "flag",
        "between sunset and sunrise (sun centre below -0.833 deg, refraction included), "
        "polar night included, polar day excluded",
    ),
    _F("sun_transition", "flag", "sun between -6 and +15 deg on a day it rises or sets: the structure deforms fastest"),
    _F(
        "hours_since_sunset",
        "h",
        "hours since the most recent sunset",
        "since sunset",
        "{:.1f} h",
        words="time since sunset",
        domain=_never_negative("it counts hours since the most recent sunset"),
        key=True,
    ),
    _F(
        "hours_since_sunrise",
        "h",
        "hours since the most recent sunrise",
        "since sunrise",
        "{:.1f} h",
        domain=_never_negative("it counts hours since the most recent sunrise"),
    ),
    _F(
        "air_temp_rate_c_per_h",
        "degC/h",
        "air-temperature change over the last hour (or the feed's cadence where it is coarser)",
        "temperature rate",
        "{:+.1f} °C/h",
        words="temperature change",
        key=True,
    ),
    _F(
        "temp_rate_window_min",
        "min",
        "window of the temperature rate: 60 minutes, or the feed's cadence where it is coarser",
        "temperature-rate window",
        "{:.0f} min",
        domain=_never_negative("it is a duration"),
    ),
    # reference scan
    _F("has_reference", "flag", "a reference scan is in force"),
    _F(
        "reference_age_h",
        "h",
        "age of the reference scan in force (NaN without one)",
        "reference age",
        "{:.1f} h",
        domain=_never_negative("the reference in force is never later than the evaluation time"),
        key=True,
    ),
    _F(
        "reference_temp_delta_c",
        "delta_degC",
        "|air temperature - temperature at the reference scan|",
        "|ΔT| to reference",
        "{:.1f} °C",
        domain=_never_negative("it is an absolute difference"),
        key=True,
    ),
    _F(
        "reference_mismatch_um",
        "um",
        "laser error from |ΔT| to the reference scan: air refractive index along "
        "the beam and the scanner mount's thermal motion",
        "laser error from |ΔT|",
        "{:.0f} µm",
        domain=_never_negative("it is an rms"),
    ),
    # expected surface of each method (site error budget, before rule error terms)
    _F(
        "scan_surface_rms_um",
        "um",
        "expected surface rms after a laser correction, before rule error terms (NaN without a reference)",
        "laser: expected surface",
        "{:.0f} µm",
        domain=_never_negative("it is an rms"),
    ),
    _F(
        "astronomical_surface_rms_um",
        "um",
        "expected surface rms after holography, before rule error terms",
        "holography: expected surface",
        "{:.0f} µm",
        domain=_never_negative("it is an rms"),
    ),
    _F(
        "scan_surface_margin_um",
        "um",
        "surface requirement minus the laser's expected surface (negative: misses it)",
        "laser: margin to the requirement",
        "{:+.0f} µm",
        scope="target_row",
    ),
    _F(
        "astronomical_surface_margin_um",
        "um",
        "surface requirement minus holography's expected surface (negative: misses it)",
        "holography: margin to the requirement",
        "{:+.0f} µm",
        scope="target_row",
    ),
    # calibrators
    _F(
        "calibrator_elevation_deg",
        "deg",
        "elevation of the chosen calibrator now (NaN if none usable)",
        "best calibrator elevation",
        "{:.0f}°",
        domain=_ELEVATION,
        key=True,
    ),
    _F(
        "calibrator_mid_elevation_deg",
        "deg",
        "elevation of the chosen calibrator halfway through the measurement, "
        "where holography corrects the surface (NaN if none usable)",
        "calibrator elevation mid-measurement",
        "{:.0f}°",
        domain=_ELEVATION,
    ),
    _F(
        "calibrator_minutes_up",
        "min",
        "minutes the chosen calibrator stays above the minimum elevation (0 if none)",
        "calibrator stays up",
        "{:.0f} min",
        domain=_never_negative("it is a duration"),
        key=True,
    ),
    _F(
        "calibrator_sun_separation_deg",
        "deg",
        "closest the chosen calibrator comes to the Sun during the measurement (NaN if none usable)",
        "calibrator from the Sun",
        "{:.0f}°",
        domain=(0.0, 180.0, "an angle on the sky is 0..180 deg"),
        key=True,
        key_when="calibrator_available",
    ),
    _F(
        "calibrators_sun_blocked",
        "1",
        "calibrators inside the elevation limits for the whole measurement but "
        "within the site's sun-avoidance limit of the Sun",
        "calibrators too near the Sun",
        "{:.0f}",
        domain=_never_negative("it is a count"),
    ),
    _F(
        "calibrators_sun_closest_deg",
        "deg",
        "closest any calibrator inside the elevation limits for the whole "
        "measurement comes to the Sun during it (NaN if none is inside them)",
        "closest calibrator to the Sun",
        "{:.1f}°",
        domain=(0.0, 180.0, "an angle on the sky is 0..180 deg"),
    ),
    _F(
        "calibrator_gravity_residual_um",
        "um",
        "gravity deformation a correction at the calibrator's elevation "
        "leaves at the session's (site figures; NaN if no calibrator)",
        "gravity residual (holography)",
        "{:.0f} µm",
        domain=_never_negative("it is an rms"),
    ),
    _F(
        "calibrator_available",
        "flag",
        "a calibrator stays inside the elevation limits and clear of the Sun for the whole astronomical measurement",
    ),
    # target and site figures (scalars: the same for every row of one evaluation)
    _F(
        "freq_ghz",
        "GHz",
        "target observing frequency",
        "target frequency",
        "{:g} GHz",
        domain=_never_negative("it is a frequency"),
        scope="target",
    ),
    _F(
        "wavelength_mm",
        "mm",
        "target wavelength",
        "wavelength",
        "{:.2f} mm",
        domain=_never_negative("it is a wavelength"),
        scope="target",
    ),
    _F(
        "surface_requirement_fraction",
        "1",
        "the site's surface requirement as a fraction of the wavelength (16: lambda/16)",
        "requirement fraction",
        "λ/{:g}",
        domain=_never_negative("it is a fraction"),
        scope="target",
    ),
    _F(
        "required_surface_rms_um",
        "um",
        "surface requirement at the target frequency (lambda / the site's fraction)",
        "surface requirement",
        "{:.0f} µm",
        domain=_never_negative("it is an rms"),
        scope="target",
    ),
    _F(
        "beam_fwhm_arcsec",
        "arcsec",
        "beam FWHM at the target frequency (1.2 lambda/D)",
        "beam FWHM",
        "{:.1f} arcsec",
        domain=_never_negative("it is a beam width"),
        scope="target",
    ),
    _F(
        "hf_wind_limit_ms",
        "m/s",
        "site's high-frequency mean-wind limit",
        "high-frequency wind limit",
        "{:.1f} m/s",
        domain=_never_negative("it is a speed"),
        scope="target",
    ),
    _F(
        "high_frequency_min_ghz",
        "GHz",
        "site's lowest frequency counted as high-frequency",
        "lowest high frequency",
        "{:g} GHz",
        domain=_never_negative("it is a frequency"),
        scope="target",
    ),
    _F(
        "scan_duration_min",
        "min",
        "duration of a laser scan (site figure)",
        "laser scan duration",
        "{:.0f} min",
        domain=_never_negative("it is a duration"),
        scope="target",
    ),
    _F(
        "astronomical_duration_min",
        "min",
        "duration of an astronomical measurement (site figure)",
        "astronomical duration",
        "{:.0f} min",
        domain=_never_negative("it is a duration"),
        scope="target",
    ),
    _F(
        "session_elevation_deg",
        "deg",
        "elevation the session observes at (--elevation, else the site's session.elevation_deg, 45 deg by default)",
        "session elevation",
        "{:.0f}°",
        domain=(5.0, 90.0, "the session's elevation is 5..90 deg"),
        scope="target",
    ),
    _F(
        "calibrator_min_elevation_deg",
        "deg",
        "site's lowest calibrator elevation during a measurement",
        "calibrator minimum elevation",
        "{:.0f}°",
        domain=_ELEVATION,
        scope="target",
    ),
    _F(
        "calibrator_max_elevation_deg",
        "deg",
        "site's highest calibrator elevation during a measurement",
        "calibrator maximum elevation",
        "{:.0f}°",
        domain=_ELEVATION,
        scope="target",
    ),
    _F(
        "sun_avoidance_deg",
        "deg",
        "site's sun-avoidance limit: no calibrator closer to the Sun than this",
        "sun-avoidance limit",
        "{:.0f}°",
        domain=(0.0, 90.0, "the site's limit is 0..90 deg"),
        scope="target",
    ),
    _F("site_height_m", "m", "site height above sea level", "site height", "{:.0f} m", scope="target"),
    _F(
        "receiver_temp_k",
        "K",
        "receiver noise temperature used for T_sys* (site figure)",
        "receiver temperature",
        "{:.0f} K",
        scope="target",
    ),
    _F(
        "reference_pwv_mm",
        "mm",
        "PWV of the site's dry reference night (site figure)",
        "reference PWV",
        "{:.1f} mm",
        domain=_never_negative("it is a column of water"),
        scope="target",
    ),
    _F(
        "reference_system_temp_k",
        "K",
        "T_sys* on the dry reference night at the target frequency and the session's elevation",
        "reference T_sys*",
        "{:.0f} K",
        scope="target",
    ),
    # data quality
    _F(
        "data_age_min",
        "min",
        "age of the last good weather sample",
        "data age",
        "{:.1f} min",
        domain=_never_negative("the last good sample is never later than the evaluation time"),
        key=True,
    ),
    _F("data_ok", "flag", "weather data fresh, plausible and complete"),
    _F(
        "input_dropout",
        "flag",
        "an optional sensor that was reporting (visibility, precipitation, pressure, "
        "irradiance) fell silent at the sample in use: no scan until it reports again or the dropout limit passes",
    ),
    _F(
        "feed_cadence_min",
        "min",
        "cadence of the sample in use: median interval between samples of its kind (observed or forecast)",
        "feed cadence",
        "{:.0f} min",
        domain=_never_negative("it is an interval"),
    ),
)

#: name → spec.
CATALOGUE: dict[str, FeatureSpec] = {f.name: f for f in FEATURES}
for _spec in FEATURES:
    if _spec.key_when and (_spec.key_when not in CATALOGUE or CATALOGUE[_spec.key_when].unit != "flag"):
        raise ValueError(f"feature {_spec.name}: key_when must name a flag feature, not {_spec.key_when!r}")
FLAG_NAMES: tuple[str, ...] = tuple(f.name for f in FEATURES if f.unit == "flag")
#: Features that vary with the evaluation time (computed per row, cached by replay).
ROW_FEATURES: tuple[str, ...] = tuple(f.name for f in FEATURES if f.scope == "row")
#: Row features that depend on the target (computed from row features and the targets).
TARGET_ROW_FEATURES: tuple[str, ...] = tuple(f.name for f in FEATURES if f.scope == "target_row")
#: Features fixed by the target frequency and the site (scalars).
TARGET_FEATURES: tuple[str, ...] = tuple(f.name for f in FEATURES if f.scope == "target")
#: The screen's key conditions, in order.
KEY_FEATURES: tuple[FeatureSpec, ...] = tuple(f for f in FEATURES if f.key)
#: The outlook's per-step weather columns.
STEP_FEATURES: tuple[str, ...] = tuple(f.name for f in FEATURES if f.step)
#: Raw measurement → (lowest, highest) plausible value; the feed drops values outside.
PLAUSIBLE_RANGE: dict[str, tuple[float, float]] = {f.name: f.plausible for f in FEATURES if f.plausible}
#: Feature → (lowest, highest, why) it can take when present (lint's "can never be true").
FEATURE_DOMAINS: dict[str, tuple[float, float, str]] = {f.name: f.domain for f in FEATURES if f.domain}
#: Feature → the optional inputs it cannot be known without (conditions reading it are unknown there).
NEEDS: dict[str, tuple[str, ...]] = {f.name: f.needs for f in FEATURES if f.needs}
