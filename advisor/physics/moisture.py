"""Moisture: saturation vapour pressure, dew point, relative humidity and dew-point spread.

    es_hpa = saturation_vapour_pressure_hpa(temp_c)
    td_c = dew_point_c(temp_c, rel_humidity_pct)
    rh_pct = relative_humidity_pct(temp_c, dew_point_c)
    spread_c = dew_point_spread_c(temp_c, dew_point_c)

All over liquid water, by the Magnus form with the Alduchov & Eskridge (1996) coefficients
a = 17.625, b = 243.04 C, c = 6.1094 hPa (good to ~0.1 % from -40 to +50 C).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "saturation_vapour_pressure_hpa",
    "dew_point_c",
    "relative_humidity_pct",
    "dew_point_spread_c",
]

MAGNUS_A = 17.625
MAGNUS_B_C = 243.04
MAGNUS_C_HPA = 6.1094


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
