"""The site's figures: the methods' error budgets and timing, the atmosphere, the session, the
decision thresholds and the structure's thermal response (``methods:``, ``atmosphere:``,
``session:``, ``thresholds:``, ``structure:`` of the site file; units in the names).
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class ScanFigures:
    """Laser-scanner error budget and timing."""

    noise_um_at_calm: float = 80.0
    wind_term_um_per_ms2: float = 4.0
    reference_ageing_um_per_day: float = 15.0
    # |ΔT| from the reference scan's air temperature: the air's refractive index along the beam
    # and the mount's thermal motion (advisor.physics.laser); a site may instead give the
    # combined coefficient it has measured (reference_mismatch_um_per_c).
    air_path_m: float = 60.0
    refraction_compensated_fraction: float = 0.7
    mount_um_per_c: float = 10.0
    reference_mismatch_um_per_c: float | None = None
    duration_min: float = 12.0


@dataclass(frozen=True)
class AstronomicalFigures:
    """Out-of-focus holography error budget, timing and source limits."""

    surface_rms_um: float = 180.0
    wind_term_um_per_ms2: float = 3.0
    thermal_drift_um_per_c: float = 25.0
    duration_min: float = 45.0
    uncorrected_surface_rms_um: float | None = None  # the surface with no fresh correction (optional)
    min_calibrator_elevation_deg: float = 25.0
    max_calibrator_elevation_deg: float = 80.0
    # Never point at a calibrator closer to the Sun than this over the measurement [deg]: sites set
    # 15 to over 40 deg (receivers, subreflector and panel heating; common practice); 30 is on the
    # careful side of that range for a site that has not set its own.
    sun_avoidance_deg: float = 30.0
    # Gravity deformation of the dish, rms per unit sin E and cos E [um] (one orthonormal mode,
    # z(E) = a sin E + b cos E + c): what a holography correction made at the calibrator's elevation
    # leaves at the session's (advisor.physics.aperture.gravity_residual_um).  0 = not known: no term.
    gravity_sin_um: float = 0.0
    gravity_cos_um: float = 0.0


@dataclass(frozen=True)
class AtmosphereFigures:
    """``atmosphere:`` — the water-vapour column above the site and the reference night.

    ``water_scale_height_km``: PWV = surface water-vapour density x this (ITU-R P.835-6's reference
    atmosphere has 2 km; fit it to radiometer or GNSS PWV where the site has them).  The
    integration-time factor compares the sky now with a dry reference night: ``reference_pwv_mm``
    at ``reference_air_temp_c``, the site's standard pressure, the same frequency and elevation,
    and a receiver of ``receiver_temp_k``.
    """

    water_scale_height_km: float = 2.0
    reference_pwv_mm: float = 4.0
    reference_air_temp_c: float = 0.0
    receiver_temp_k: float = 60.0


@dataclass(frozen=True)
class SessionSettings:
    """``session:`` — the high-frequency session the call is for (``--elevation`` overrides).

    ``elevation_deg``: the elevation the session observes at (the site's typical, 45 deg if it
    says nothing): the laser corrects the surface there, holography at the calibrator's; the
    atmosphere's transmission is taken there.
    """

    elevation_deg: float = 45.0


@dataclass(frozen=True)
class Thresholds:
    """Decision thresholds (units in the names)."""

    high_frequency_wind_limit_ms: float = 4.0
    high_frequency_min_ghz: float = 30.0
    surface_requirement_fraction: float = 16.0  # the surface must reach λ/N (Ruze η 0.54 at λ/16)
    min_ruze_efficiency: float = 0.30
    laser_preference_efficiency: float = 0.08
    min_p_usable: float = 0.5
    fog_spread_c: float = 1.0
    fog_rel_humidity_pct: float = 97.0
    fog_visibility_m: float = 1000.0
    precip_mm_h: float = 0.1
    pointing_error_arcsec_at_4ms: float = 1.2
    # The session a check chooses for: a method is worth η² × (session − its duration) × its odds
    # (advisor.decision.session_value); 0 means unknown, and laser_preference_efficiency decides.
    session_hours: float = 4.0


@dataclass(frozen=True)
class StructureFigures:
    """``structure:`` — how a correction decays as the structure's temperature changes.

    Defaults are common practice, order-of-magnitude figures from memory; a site measures its own
    (:mod:`advisor.physics.thermal`).
    """

    drift_um_per_c: float = 25.0  # surface rms added per °C the structure moved since the correction
    time_constant_h: float = 1.0  # how fast the structure follows the air (first-order lag)
    sun_heating_c_per_kwm2: float = 4.0  # sunlit structure above the air, per kW/m² of irradiance
    max_efficiency_loss: float = 0.10  # a correction holds while it meets λ/N or has lost at most this of η
