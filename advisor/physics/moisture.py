"""Moisture: vapour pressure, dew point and frost point, relative humidity over water and ice.

    es_hpa = saturation_vapour_pressure_hpa(temp_c)            over water
    ei_hpa = saturation_vapour_pressure_ice_hpa(temp_c)        over ice
    e_hpa = vapour_pressure_hpa(temp_c, rel_humidity_pct)
    td_c = dew_point_c(temp_c, rel_humidity_pct)
    tf_c = frost_point_c(temp_c, rel_humidity_pct)
    rh_pct = relative_humidity_pct(temp_c, dew_point_c)
    rhi_pct = relative_humidity_ice_pct(temp_c, rel_humidity_pct)
    spread_c = dew_point_spread_c(temp_c, dew_point_c)         (frost_point_spread_c likewise)

Magnus forms with the Alduchov & Eskridge (1996) coefficients: over water a = 17.625,
b = 243.04 C, c = 6.1094 hPa (about 0.1 % from -40 to +50 C); over ice a = 22.587,
b = 273.86 C, c = 6.1121 hPa (-80 to 0 C).

Relative humidity is over liquid water throughout, also below 0 C: that is what hygrometers
report (WMO-No. 8, ch. 4).  Air saturated over ice at -15 C therefore reads about 86 %, and a
fog/frost test on RH must use the frost point or :func:`relative_humidity_ice_pct` there.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "saturation_vapour_pressure_hpa",
    "dew_point_c",
    "relative_humidity_pct",
    "dew_point_spread_c",
    "saturation_vapour_pressure_ice_hpa",
    "vapour_pressure_hpa",
    "frost_point_c",
    "frost_point_from_dew_point_c",
    "relative_humidity_ice_pct",
    "frost_point_spread_c",
]

MAGNUS_A = 17.625
MAGNUS_B_C = 243.04
MAGNUS_C_HPA = 6.1094
#: Magnus coefficients over ice (Alduchov & Eskridge 1996, their "AERKi").
MAGNUS_ICE_A = 22.587
MAGNUS_ICE_B_C = 273.86
MAGNUS_ICE_C_HPA = 6.1121


def _finish(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def saturation_vapour_pressure_hpa(temp_c):
    """Saturation vapour pressure over liquid water.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]

    Returns
    -------
    ndarray (float for scalar input)
        Saturation vapour pressure. [hPa]

    Notes
    -----
    e_s = c exp(a T / (b + T)), a = 17.625, b = 243.04 C, c = 6.1094 hPa.

    References
    ----------
    Alduchov, O. A., Eskridge, R. E. (1996). Improved Magnus form approximation of saturation
    vapor pressure. J. Appl. Meteor. 35, 601-609.
    """
    t = np.asarray(temp_c, dtype=float)
    return _finish(MAGNUS_C_HPA * np.exp(MAGNUS_A * t / (MAGNUS_B_C + t)))


def dew_point_c(temp_c, rel_humidity_pct):
    """Dew point from air temperature and relative humidity.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]
    rel_humidity_pct : numeric
        Relative humidity over water. [%]

    Returns
    -------
    ndarray (float for scalar input)
        Dew point [C]; NaN where the relative humidity is 0, negative or NaN.

    Notes
    -----
    gamma = ln(RH / 100) + a T / (b + T);  T_d = b gamma / (a - gamma).

    References
    ----------
    Alduchov, O. A., Eskridge, R. E. (1996). Improved Magnus form approximation of saturation
    vapor pressure. J. Appl. Meteor. 35, 601-609.
    """
    t = np.asarray(temp_c, dtype=float)
    rh = np.asarray(rel_humidity_pct, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        gamma = np.log(rh / 100.0) + MAGNUS_A * t / (MAGNUS_B_C + t)
        td = MAGNUS_B_C * gamma / (MAGNUS_A - gamma)
    return _finish(np.where(rh > 0.0, td, np.nan))


def relative_humidity_pct(temp_c, dew_point_c):
    """Relative humidity from air temperature and dew point.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]
    dew_point_c : numeric
        Dew point. [C]

    Returns
    -------
    ndarray (float for scalar input)
        Relative humidity over water, 100 e_s(T_d) / e_s(T). [%]

    References
    ----------
    Alduchov, O. A., Eskridge, R. E. (1996). Improved Magnus form approximation of saturation
    vapor pressure. J. Appl. Meteor. 35, 601-609.
    """
    t = np.asarray(temp_c, dtype=float)
    td = np.asarray(dew_point_c, dtype=float)
    log_ratio = MAGNUS_A * td / (MAGNUS_B_C + td) - MAGNUS_A * t / (MAGNUS_B_C + t)
    return _finish(100.0 * np.exp(log_ratio))


def dew_point_spread_c(temp_c, dew_point_c):
    """Dew-point spread (depression) T - T_d.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]
    dew_point_c : numeric
        Dew point. [C]

    Returns
    -------
    ndarray (float for scalar input)
        Temperature minus dew point [C]; small values (below ~1-2 C) mean near-saturated air.
    """
    return _finish(np.asarray(temp_c, dtype=float) - np.asarray(dew_point_c, dtype=float))


def saturation_vapour_pressure_ice_hpa(temp_c):
    """Saturation vapour pressure over ice.

    Parameters
    ----------
    temp_c : numeric
        Temperature of the air (or of the ice surface). [C]

    Returns
    -------
    ndarray (float for scalar input)
        Saturation vapour pressure over a plane ice surface. [hPa]

    Notes
    -----
    e_i = c exp(a T / (b + T)), a = 22.587, b = 273.86 C, c = 6.1121 hPa, fitted for
    -80..0 C.  Below 0 C it is lower than over (supercooled) water: at -15 C, e_i / e_w = 0.86.

    References
    ----------
    Alduchov, O. A., Eskridge, R. E. (1996). Improved Magnus form approximation of saturation
    vapor pressure. J. Appl. Meteor. 35, 601-609.
    """
    t = np.asarray(temp_c, dtype=float)
    return _finish(MAGNUS_ICE_C_HPA * np.exp(MAGNUS_ICE_A * t / (MAGNUS_ICE_B_C + t)))


def vapour_pressure_hpa(temp_c, rel_humidity_pct):
    """Partial pressure of water vapour from temperature and relative humidity over water.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]
    rel_humidity_pct : numeric
        Relative humidity over liquid water, as hygrometers report it at all temperatures. [%]

    Returns
    -------
    ndarray (float for scalar input)
        e = RH / 100 * e_w(T). [hPa]

    References
    ----------
    Alduchov, O. A., Eskridge, R. E. (1996). J. Appl. Meteor. 35, 601-609 (e_w).
    WMO (2018). Guide to Instruments and Methods of Observation, WMO-No. 8, vol. I, ch. 4
    (relative humidity is defined over water, also below 0 C).
    """
    rh = np.asarray(rel_humidity_pct, dtype=float)
    return _finish(rh / 100.0 * np.asarray(saturation_vapour_pressure_hpa(temp_c)))


def _frost_point_from_vapour_pressure_c(e_hpa):
    e = np.asarray(e_hpa, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        gamma = np.log(e / MAGNUS_ICE_C_HPA)
        tf = MAGNUS_ICE_B_C * gamma / (MAGNUS_ICE_A - gamma)
    return np.where(e > 0.0, tf, np.nan)


def frost_point_c(temp_c, rel_humidity_pct):
    """Frost point: the temperature at which the air's vapour would saturate over ice.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]
    rel_humidity_pct : numeric
        Relative humidity over liquid water (the hygrometer's reading). [%]

    Returns
    -------
    ndarray (float for scalar input)
        Frost point [C]; NaN where RH is 0, negative or NaN.  A surface at or below it collects
        hoar frost.  Only meaningful below 0 C (above, the value is the formula's, where water,
        not ice, condenses: use the dew point).  Below 0 C it lies above the dew point.

    Notes
    -----
    e = RH/100 e_w(T) (over water, Magnus); then e_i(T_f) = e inverted:
    gamma = ln(e / c_i), T_f = b_i gamma / (a_i - gamma), a_i = 22.587, b_i = 273.86 C,
    c_i = 6.1121 hPa.

    References
    ----------
    Alduchov, O. A., Eskridge, R. E. (1996). Improved Magnus form approximation of saturation
    vapor pressure. J. Appl. Meteor. 35, 601-609.
    WMO (2018). Guide to Instruments and Methods of Observation, WMO-No. 8, vol. I, ch. 4.
    """
    return _finish(_frost_point_from_vapour_pressure_c(vapour_pressure_hpa(temp_c, rel_humidity_pct)))


def frost_point_from_dew_point_c(dew_point_c):
    """Frost point from the dew point (the same vapour pressure, saturated over ice instead).

    Parameters
    ----------
    dew_point_c : numeric
        Dew point over water. [C]

    Returns
    -------
    ndarray (float for scalar input)
        Frost point [C], from e_i(T_f) = e_w(T_d); equal to the dew point at 0 C.

    References
    ----------
    Alduchov, O. A., Eskridge, R. E. (1996). Improved Magnus form approximation of saturation
    vapor pressure. J. Appl. Meteor. 35, 601-609.
    """
    return _finish(_frost_point_from_vapour_pressure_c(saturation_vapour_pressure_hpa(dew_point_c)))


def relative_humidity_ice_pct(temp_c, rel_humidity_pct):
    """Relative humidity with respect to ice, from the hygrometer's RH over water.

    Parameters
    ----------
    temp_c : numeric
        Air temperature. [C]
    rel_humidity_pct : numeric
        Relative humidity over liquid water. [%]

    Returns
    -------
    ndarray (float for scalar input)
        RH_i = RH_w e_w(T) / e_i(T) [%]; above 100 % the air is supersaturated over ice (frost
        and rime can grow).  Above 0 C it is below RH_w and has no practical meaning.

    Notes
    -----
    Both saturation pressures by the Magnus forms of Alduchov & Eskridge (1996).  Saturation
    over ice at -15 C: RH_w = 100 e_i/e_w = 86 %.

    References
    ----------
    Alduchov, O. A., Eskridge, R. E. (1996). Improved Magnus form approximation of saturation
    vapor pressure. J. Appl. Meteor. 35, 601-609.
    WMO (2018). Guide to Instruments and Methods of Observation, WMO-No. 8, vol. I, ch. 4.
    """
    rh = np.asarray(rel_humidity_pct, dtype=float)
    ratio = np.asarray(saturation_vapour_pressure_hpa(temp_c)) / np.asarray(saturation_vapour_pressure_ice_hpa(temp_c))
    return _finish(rh * ratio)


def frost_point_spread_c(temp_c, frost_point_c):
    """Frost-point spread T - T_f.

    Parameters
    ----------
    temp_c : numeric
        Air (or surface) temperature. [C]
    frost_point_c : numeric
        Frost point. [C]

    Returns
    -------
    ndarray (float for scalar input)
        Temperature minus frost point [C]; at or below 0 a surface at that temperature is
        saturated over ice.  Panels cooled by radiation to a clear night sky run a few C below
        the air (common practice), so a small positive spread already means frost risk.
    """
    return _finish(np.asarray(temp_c, dtype=float) - np.asarray(frost_point_c, dtype=float))
