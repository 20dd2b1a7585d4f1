"""Laser ranging through air: how the air's temperature changes the distances a scanner measures.

    dn_dt = air_index_temperature_coefficient_per_k(pressure_hpa, temp_c)
    um_per_c = reference_mismatch_um_per_c(path_m, compensated_fraction, mount_um_per_c, ...)

A scanner measures a range as a time of flight divided by the group velocity c/n of its light in
air.  At constant pressure the refractivity n − 1 of air scales as the density, P/T, so
d(n − 1)/dT = −(n − 1)/T: about −0.9 ppm/K near 900 hPa.  Over a path L that is a range change of
|dn/dT|·L per kelvin (about 50 µm/K over 60 m) unless the scanner compensates with its own
temperature and pressure readings, and compensation is never complete along the whole path.
The mount that holds the scanner also moves as it warms.  This is why a reference scan taken at
another air temperature degrades the laser's differential method: an error term that grows
with |ΔT|, not a reason the difference map is wrong.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "STANDARD_AIR_REFRACTIVITY",
    "air_refractivity",
    "air_index_temperature_coefficient_per_k",
    "reference_mismatch_um_per_c",
]

#: Refractivity n − 1 of dry standard air (15 °C, 1013.25 hPa, 0.04 % CO2) for near-infrared
#: light (about 1 µm) [1] (Ciddor 1996, Appl. Opt. 35, 1566; Edlén 1966, Metrologia 2, 71).
STANDARD_AIR_REFRACTIVITY = 2.73e-4
_STANDARD_PRESSURE_HPA = 1013.25
_STANDARD_TEMPERATURE_K = 288.15


def air_refractivity(pressure_hpa, temp_c):
    """Refractivity n − 1 of dry air at a pressure and temperature [1].

    Parameters
    ----------
    pressure_hpa : array_like
        Air pressure [hPa].
    temp_c : array_like
        Air temperature [°C].

    Returns
    -------
    numpy.ndarray or float
        n − 1 [1].

    Notes
    -----
    (n − 1) = (n_s − 1) · (P / P_s) · (T_s / T): refractivity proportional to density (ideal
    gas), scaled from standard air.  Water vapour changes n − 1 by well under 1 % in the near
    infrared and is neglected.

    References
    ----------
    Edlén, B. 1966, Metrologia 2, 71.  Ciddor, P. E. 1996, Appl. Opt. 35, 1566.
    """
    p = np.asarray(pressure_hpa, dtype=float)
    t_k = np.asarray(temp_c, dtype=float) + 273.15
    out = STANDARD_AIR_REFRACTIVITY * (p / _STANDARD_PRESSURE_HPA) * (_STANDARD_TEMPERATURE_K / t_k)
    return out if out.ndim else float(out)


def air_index_temperature_coefficient_per_k(pressure_hpa, temp_c):
    """dn/dT of air at constant pressure [1/K] (negative: warmer air is thinner).

    Parameters
    ----------
    pressure_hpa : array_like
        Air pressure [hPa].
    temp_c : array_like
        Air temperature [°C].

    Returns
    -------
    numpy.ndarray or float
        dn/dT [1/K]; about −0.94e-6 at 900 hPa and 0 °C.

    Notes
    -----
    d(n − 1)/dT = −(n − 1)/T with (n − 1) from :func:`air_refractivity`.

    References
    ----------
    Edlén, B. 1966, Metrologia 2, 71.  Ciddor, P. E. 1996, Appl. Opt. 35, 1566.
    """
    t_k = np.asarray(temp_c, dtype=float) + 273.15
    out = -np.asarray(air_refractivity(pressure_hpa, temp_c)) / t_k
    return out if out.ndim else float(out)


def reference_mismatch_um_per_c(path_m, compensated_fraction, mount_um_per_c, pressure_hpa=900.0, temp_c=0.0):
    """Surface error a laser scan gains per °C between the air now and at the reference scan [µm/°C].

    Parameters
    ----------
    path_m : float
        Typical one-way path from the scanner to the surface [m].
    compensated_fraction : float
        Fraction (0..1) of the air-index change the scanner's own weather compensation removes.
    mount_um_per_c : float
        Thermal motion of the scanner's mount that reaches the surface map [µm/°C].
    pressure_hpa, temp_c : float
        Air state at which the coefficient is evaluated [hPa], [°C].

    Returns
    -------
    float
        √((|dn/dT| · L · (1 − c))² + mount²) [µm/°C].

    Notes
    -----
    The two causes are independent and add in quadrature.  Over 60 m at 900 hPa the
    uncompensated air term is about 56 µm/°C.

    References
    ----------
    Edlén, B. 1966, Metrologia 2, 71.  Ciddor, P. E. 1996, Appl. Opt. 35, 1566.
    """
    air = abs(float(air_index_temperature_coefficient_per_k(pressure_hpa, temp_c))) * float(path_m) * 1e6
    air *= 1.0 - float(compensated_fraction)
    return float(np.hypot(air, float(mount_um_per_c)))
