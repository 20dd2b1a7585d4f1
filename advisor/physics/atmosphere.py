"""Atmosphere: water vapour, zenith opacity, transmission, system temperature and the time it costs.

    rho_gm3 = water_vapour_density_gm3(temp_c, rel_humidity_pct)         216.7 e / T
    pwv_mm = precipitable_water_mm(rho_gm3, scale_height_km=2.0)         rho H
    p_hpa = standard_pressure_hpa(height_m)                               when no barometer
    tau = zenith_opacity_nepers(freq_ghz, p_hpa, temp_c, rho_gm3)         ITU-R P.676-12 Annex 2
    a = airmass(elevation_deg)                                            1 / sin(el), el >= 5 deg
    t = transmission(tau, elevation_deg)                                  exp(-tau A)
    t_atm_k = atmosphere_temperature_k(temp_c)                            1.12 T_s - 50 K
    tsys_k = system_temperature_above_atmosphere_k(t_rx_k, tau, el, t_atm_k)
    factor = integration_time_factor(tsys_k, ref_tsys_k, eta, ref_eta)   ((T/eta) / (T_ref/eta_ref))^2

The opacity model is the Recommendation's own approximate method for 1-350 GHz: specific
attenuations at the surface (line by line, :mod:`advisor.physics.absorption`) times equivalent
heights.  Against the full line-by-line integration through the ITU-R P.835 reference
atmosphere it is within about 7 % in dB wherever the zenith opacity is below 3 nepers, and
underestimates the cores of the 60 GHz complex and of the 118.75 GHz line, where both give
an opaque sky (more than 10 nepers).
"""

from __future__ import annotations

import numpy as np

from advisor.physics.absorption import (
    equivalent_height_oxygen_km,
    equivalent_height_water_km,
    specific_attenuation_oxygen_db_km,
    specific_attenuation_water_db_km,
    zenith_water_attenuation_from_pwv_db,
)
from advisor.physics.moisture import saturation_vapour_pressure_hpa, vapour_pressure_hpa

__all__ = [
    "DB_PER_NEPER",
    "DEFAULT_MIN_ELEVATION_DEG",
    "DEFAULT_WATER_SCALE_HEIGHT_KM",
    "water_vapour_density_gm3",
    "water_vapour_density_from_dew_point_gm3",
    "precipitable_water_mm",
    "standard_pressure_hpa",
    "zenith_opacity_nepers",
    "airmass",
    "transmission",
    "atmosphere_temperature_k",
    "system_temperature_above_atmosphere_k",
    "integration_time_factor",
]

#: Decibels per neper of power: 10 log10(e).
DB_PER_NEPER = 10.0 / np.log(10.0)
#: Scale height of water vapour in the ITU-R P.835 reference atmosphere [km]; sites differ
#: (and so do seasons): fit it to radiometer or GNSS precipitable water where available.
DEFAULT_WATER_SCALE_HEIGHT_KM = 2.0
#: Lowest elevation of the plane-parallel air mass [deg]; ITU-R P.676 Annex 2 states its
#: slant-path method for 5-90 deg.
DEFAULT_MIN_ELEVATION_DEG = 5.0
#: Water-vapour density from vapour pressure: rho = 216.7 e / T [g K / (m^3 hPa)], i.e.
#: 1e5 / R_v with R_v = 461.5 J/(kg K).
_RHO_PER_E_OVER_T = 216.7


def _finish(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def water_vapour_density_gm3(temp_c, rel_humidity_pct):
    """Water-vapour density (absolute humidity) from temperature and relative humidity.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]
    rel_humidity_pct : numeric
        Relative humidity over liquid water (the hygrometer's reading, also below 0 C). [%]

    Returns
    -------
    ndarray (float for scalar input)
        rho_v = 216.7 e / T [g/m^3], e the vapour pressure [hPa], T [K].

    Notes
    -----
    Ideal gas: rho_v = e / (R_v T), R_v = 461.5 J/(kg K); e = RH/100 e_w(T) by the Magnus
    form (:mod:`advisor.physics.moisture`).

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Attenuation by atmospheric gases and related
    effects, Annex 1 (e = rho T / 216.7).
    """
    t = np.asarray(temp_c, dtype=float)
    return _finish(_RHO_PER_E_OVER_T * np.asarray(vapour_pressure_hpa(t, rel_humidity_pct)) / (t + 273.15))


def water_vapour_density_from_dew_point_gm3(temp_c, dew_point_c):
    """Water-vapour density from temperature and dew point.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]
    dew_point_c : numeric
        Dew point (over water). [C]

    Returns
    -------
    ndarray (float for scalar input)
        rho_v = 216.7 e_w(T_d) / T. [g/m^3]

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Attenuation by atmospheric gases and related
    effects, Annex 1 (e = rho T / 216.7).
    """
    t = np.asarray(temp_c, dtype=float)
    return _finish(_RHO_PER_E_OVER_T * np.asarray(saturation_vapour_pressure_hpa(dew_point_c)) / (t + 273.15))


def precipitable_water_mm(water_vapour_density_gm3, scale_height_km=DEFAULT_WATER_SCALE_HEIGHT_KM):
    """Precipitable water vapour above the site from its surface water-vapour density.

    Parameters
    ----------
    water_vapour_density_gm3 : numeric
        Water-vapour density at the site. [g/m^3]
    scale_height_km : numeric, default 2
        Scale height H of the exponential profile rho(h) = rho_0 exp(-h / H). [km]

    Returns
    -------
    ndarray (float for scalar input)
        PWV = rho_0 H [mm] (1 g/m^3 x 1 km = 1 kg/m^2 = 1 mm of liquid water).

    Notes
    -----
    The integral of rho_0 exp(-h/H) from the site upwards.  The reference atmosphere of ITU-R
    P.835 has rho_0 = 7.5 g/m^3 and H = 2 km at sea level, i.e. 15 mm.  Real profiles depart
    from it (inversions, dry air aloft): the surface gives an estimate, not a measurement.

    References
    ----------
    ITU-R Recommendation P.835-6 (12/2017), Reference standard atmospheres, section 1 (mean
    annual global reference atmosphere: rho_0 = 7.5 g/m^3, h_0 = 2 km).
    """
    rho = np.asarray(water_vapour_density_gm3, dtype=float)
    return _finish(rho * np.asarray(scale_height_km, dtype=float))


def standard_pressure_hpa(height_m):
    """Pressure of the mean annual reference atmosphere at a height (troposphere).

    Parameters
    ----------
    height_m : numeric
        Height above mean sea level (geometric), -500..11000. [m]

    Returns
    -------
    ndarray (float for scalar input)
        P = 1013.25 (288.15 / (288.15 - 6.5 h'))^(-34.1632 / 6.5) [hPa], h' the geopotential
        height [km]; NaN outside the range.  For sites without a barometer: the day's pressure
        differs by a few per cent.

    Notes
    -----
    Geopotential height h' = 6356.766 h / (6356.766 + h) [km].

    References
    ----------
    ITU-R Recommendation P.835-6 (12/2017), Reference standard atmospheres, section 1 (mean
    annual global reference atmosphere, 0-11 km).
    """
    h_km = np.asarray(height_m, dtype=float) / 1000.0
    h_geo = 6356.766 * h_km / (6356.766 + h_km)
    p = 1013.25 * (288.15 / (288.15 - 6.5 * h_geo)) ** (-34.1632 / 6.5)
    return _finish(np.where((h_km >= -0.5) & (h_km <= 11.0), p, np.nan))


def zenith_opacity_nepers(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3, pwv_mm=None, site_height_m=0.0):
    """Zenith opacity of oxygen and water vapour from surface weather.

    Parameters
    ----------
    freq_ghz : numeric
        Observing frequency, 1..350. [GHz]
    pressure_hpa : numeric
        Total barometric pressure at the site. [hPa]
    temp_c : numeric
        Air temperature at the site. [C]
    water_vapour_density_gm3 : numeric
        Water-vapour density at the site. [g/m^3]
    pwv_mm : numeric or None, default None
        Precipitable water (e.g. :func:`precipitable_water_mm` with the site's scale height, or
        a radiometer's).  If given, the water term comes from it; otherwise from the surface
        density and the Recommendation's equivalent height. [mm]
    site_height_m : numeric, default 0
        Site height above sea level, used with ``pwv_mm`` only (clipped to 0..4000 m). [m]

    Returns
    -------
    ndarray (float for scalar input)
        tau = A / (10 log10 e) [nepers], A the zenith attenuation [dB]; NaN outside 1..350 GHz
        or where an input is NaN.

    Notes
    -----
    A = gamma_o h_o + A_w, with gamma_o the dry-air specific attenuation at the surface and
    h_o its equivalent height; A_w = gamma_w h_w (surface density), or the integrated-content
    method from ``pwv_mm``.  The surface values stand for the whole column: an inversion or a
    dry layer aloft is not seen.

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Attenuation by atmospheric gases and related
    effects, Annex 1 (specific attenuation) and Annex 2, sections 2.1-2.3 (zenith path).
    """
    args = (freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3)
    dry_db = np.asarray(specific_attenuation_oxygen_db_km(*args)) * np.asarray(equivalent_height_oxygen_km(*args))
    if pwv_mm is None:
        wet_db = np.asarray(specific_attenuation_water_db_km(*args)) * np.asarray(equivalent_height_water_km(*args))
    else:
        height_km = np.asarray(site_height_m, dtype=float) / 1000.0
        wet_db = np.asarray(zenith_water_attenuation_from_pwv_db(freq_ghz, pwv_mm, height_km))
    return _finish((dry_db + wet_db) / DB_PER_NEPER)


def airmass(elevation_deg, min_elevation_deg=DEFAULT_MIN_ELEVATION_DEG):
    """Plane-parallel air mass relative to the zenith.

    Parameters
    ----------
    elevation_deg : numeric
        Elevation of the line of sight. [deg]
    min_elevation_deg : float, default 5
        Elevations between 0 and this are evaluated at this (the plane-parallel form grows
        without bound towards the horizon, the real path does not). [deg]

    Returns
    -------
    ndarray (float for scalar input)
        A = 1 / sin(max(el, el_min)) [1]; NaN below the horizon (el < 0) or for NaN input.

    Notes
    -----
    Through a homogeneous spherical shell of thickness H on an Earth of radius R the air mass
    is sqrt((R/H sin el)^2 + 2 R/H + 1) - R/H sin el; above 10 deg the plane-parallel value is
    within 0.6 % of it for H = 2 km (water vapour) and within 2 % for H = 8 km (dry air).
    At the 5 deg floor, A = 11.47.

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Annex 2, section 2 (slant paths: zenith
    attenuation / sin(phi), 5 <= phi <= 90 deg).
    """
    el = np.asarray(elevation_deg, dtype=float)
    use = np.maximum(el, float(min_elevation_deg))
    with np.errstate(invalid="ignore"):
        return _finish(np.where(el >= 0.0, 1.0 / np.sin(np.radians(use)), np.nan))


def transmission(zenith_opacity_nepers, elevation_deg, min_elevation_deg=DEFAULT_MIN_ELEVATION_DEG):
    """Fraction of the source's power that gets through the atmosphere.

    Parameters
    ----------
    zenith_opacity_nepers : numeric
        Zenith opacity tau. [nepers]
    elevation_deg : numeric
        Elevation of the source. [deg]
    min_elevation_deg : float, default 5
        Floor of the air mass, see :func:`airmass`. [deg]

    Returns
    -------
    ndarray (float for scalar input)
        exp(-tau A), 0..1 [1]; NaN below the horizon.

    References
    ----------
    Wilson, T. L., Rohlfs, K., Hüttemeister, S. *Tools of Radio Astronomy*, Springer
    (radiative transfer through an absorbing layer, chapter on the atmosphere).
    """
    tau = np.asarray(zenith_opacity_nepers, dtype=float)
    return _finish(np.exp(-tau * np.asarray(airmass(elevation_deg, min_elevation_deg))))


def atmosphere_temperature_k(temp_c):
    """Effective (mean radiating) temperature of the atmosphere from the surface temperature.

    Parameters
    ----------
    temp_c : numeric
        Air temperature at the surface. [C]

    Returns
    -------
    ndarray (float for scalar input)
        T_atm = 1.12 T_s - 50 K [K] (273 K for 15 C; 0.94-0.95 T_s at usual temperatures).

    Notes
    -----
    The sky brightness is T_atm (1 - exp(-tau A)).  Checked in the tests against radiative
    transfer through the ITU-R P.835 reference atmosphere: within 12 K wherever the zenith
    opacity is below 3 nepers (lower for a dry, mostly oxygen sky whose emission comes from
    higher up; higher where the sky is opaque close to the ground).  The expression is quoted
    from memory of the Recommendation below.

    References
    ----------
    ITU-R Recommendation P.372 (Radio noise), section on atmospheric gases:
    T_mr = 1.12 T_s - 50 K.
    """
    return _finish(1.12 * (np.asarray(temp_c, dtype=float) + 273.15) - 50.0)


def system_temperature_above_atmosphere_k(
    receiver_temp_k,
    zenith_opacity_nepers,
    elevation_deg,
    atmosphere_temp_k,
    min_elevation_deg=DEFAULT_MIN_ELEVATION_DEG,
):
    """System temperature referred to above the atmosphere, T_sys*.

    Parameters
    ----------
    receiver_temp_k : numeric
        Receiver (and spillover) noise temperature. [K]
    zenith_opacity_nepers : numeric
        Zenith opacity tau. [nepers]
    elevation_deg : numeric
        Elevation of the source. [deg]
    atmosphere_temp_k : numeric
        Effective atmosphere temperature (:func:`atmosphere_temperature_k`). [K]
    min_elevation_deg : float, default 5
        Floor of the air mass. [deg]

    Returns
    -------
    ndarray (float for scalar input)
        T_sys* = (T_rx + T_atm (1 - exp(-tau A))) / exp(-tau A) [K]; NaN below the horizon.

    Notes
    -----
    The receiver sees the sky's emission T_atm (1 - e^(-tau A)) on top of its own noise, and
    the source is attenuated by e^(-tau A); dividing by the transmission refers the noise to a
    source outside the atmosphere.  The cosmic background (< 3 K) is left out.

    References
    ----------
    Wilson, T. L., Rohlfs, K., Hüttemeister, S. *Tools of Radio Astronomy*, Springer
    (chapter on the atmosphere and calibration of mm-wave observations).
    """
    trans = np.asarray(transmission(zenith_opacity_nepers, elevation_deg, min_elevation_deg))
    t_rx = np.asarray(receiver_temp_k, dtype=float)
    t_atm = np.asarray(atmosphere_temp_k, dtype=float)
    with np.errstate(divide="ignore"):
        return _finish((t_rx + t_atm * (1.0 - trans)) / trans)


def integration_time_factor(tsys_k, ref_tsys_k, efficiency=1.0, ref_efficiency=1.0):
    """Time to reach the same sensitivity, relative to a reference night.

    Parameters
    ----------
    tsys_k : numeric
        System temperature referred to above the atmosphere now. [K]
    ref_tsys_k : numeric
        The same on the reference (e.g. a dry night). [K]
    efficiency : numeric, default 1
        Aperture efficiency now (e.g. Ruze and pointing factors). [1]
    ref_efficiency : numeric, default 1
        Aperture efficiency on the reference. [1]

    Returns
    -------
    ndarray (float for scalar input)
        ((T_sys* / eta) / (T_sys*_ref / eta_ref))^2 [1]: 4 means four times the integration.

    Notes
    -----
    Radiometer equation: the noise is T_sys / sqrt(B t), the signal proportional to eta, so
    the time to a given signal-to-noise ratio scales as (T_sys / eta)^2.

    References
    ----------
    Wilson, T. L., Rohlfs, K., Hüttemeister, S. *Tools of Radio Astronomy*, Springer
    (the radiometer equation).
    """
    now = np.asarray(tsys_k, dtype=float) / np.asarray(efficiency, dtype=float)
    ref = np.asarray(ref_tsys_k, dtype=float) / np.asarray(ref_efficiency, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return _finish((now / ref) ** 2)
