"""Thermal state of the structure: how fast it follows the air and the sun, and how a correction decays.

    ghi_wm2 = clear_sky_irradiance_wm2(sun_elevation_deg)          Haurwitz (1945) clear sky
    t_eq_c = equilibrium_temperature_c(air_temp_c, solar_wm2, heating_c_per_kwm2)
    t_s_c = first_order_lag(elapsed_h, t_eq_c, time_constant_h)    the structure follows T_eq
    sigma_um = drifted_surface_rms_um(sigma0_um, drift_um_per_c, delta_t_c)

The structure is modelled as one body with a first-order thermal lag: it relaxes towards an
equilibrium temperature, the air temperature plus a sunshine heating term, with a time
constant.  A surface correction made when the structure was at ``T_s(t0)`` then degrades as
σ(t) = √(σ₀² + (k·|T_s(t) − T_s(t0)|)²): fast after sunrise and in sunshine, slow a few hours
after sunset (common practice).  The structure's temperature change stands in for the thermal
gradients that actually deform the surface; ``k`` (µm/°C), the time constant and the heating
term are site figures (see the site file's ``structure:`` section).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "HAURWITZ_GHI_WM2",
    "clear_sky_irradiance_wm2",
    "equilibrium_temperature_c",
    "first_order_lag",
    "drifted_surface_rms_um",
]

#: The Haurwitz (1945) clear-sky constant: GHI = 1098 cos z exp(-0.059 / cos z). [W/m²]
HAURWITZ_GHI_WM2 = 1098.0
_HAURWITZ_EXTINCTION = 0.059
#: Elapsed time over which the lag's closed form is evaluated in one piece, in time constants
#: (exp(50) is far from overflow; longer series are done in blocks).
_BLOCK_TIME_CONSTANTS = 50.0


def _finish(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def clear_sky_irradiance_wm2(sun_elevation_deg):
    """Global horizontal irradiance under a clear sky, from the sun's elevation alone.

    Parameters
    ----------
    sun_elevation_deg : numeric
        Apparent (refraction-corrected) elevation of the sun's centre. [deg]

    Returns
    -------
    ndarray (float for scalar input)
        GHI [W/m²]; 0 with the sun at or below the horizon.

    Notes
    -----
    GHI = 1098 cos z exp(−0.059 / cos z) with z the apparent zenith angle.  Used where a feed
    has no irradiance sensor: a clear sky is the pessimistic case for thermal drift.

    References
    ----------
    Haurwitz, B. (1945). Journal of Meteorology 2, 154–166; Haurwitz, B. (1946). Journal of
    Meteorology 3, 123–124.
    """
    cos_z = np.sin(np.radians(np.asarray(sun_elevation_deg, dtype=float)))
    up = cos_z > 0
    safe = np.where(up, cos_z, 1.0)
    return _finish(np.where(up, HAURWITZ_GHI_WM2 * safe * np.exp(-_HAURWITZ_EXTINCTION / safe), 0.0))


def equilibrium_temperature_c(air_temp_c, solar_wm2, heating_c_per_kwm2):
    """The temperature the structure would settle at: the air's, plus the sun's heating.

    Parameters
    ----------
    air_temp_c : numeric
        Air temperature. [°C]
    solar_wm2 : numeric
        Global horizontal irradiance; negative readings (sensor offsets at night) count as 0. [W/m²]
    heating_c_per_kwm2 : float
        How far above the air a sunlit structure settles per kW/m² (a site figure). [°C/(kW/m²)]

    Returns
    -------
    ndarray (float for scalar input)
        T_eq = T_air + h · max(G, 0) / 1000 [°C].

    Notes
    -----
    A steady heat balance between absorbed sunshine and convective loss gives an excess
    temperature proportional to the irradiance; the proportion depends on paint, wind and
    geometry, so it is a site figure (common practice: a few °C per kW/m² for white-painted
    steel; a figure from memory, to be measured at the site).
    """
    g = np.clip(np.asarray(solar_wm2, dtype=float), 0.0, None)
    return _finish(np.asarray(air_temp_c, dtype=float) + float(heating_c_per_kwm2) * g / 1000.0)


def first_order_lag(elapsed_h, forcing, time_constant_h, initial=None):
    """Response of a first-order system to a forcing known at (possibly irregular) times.

    Parameters
    ----------
    elapsed_h : 1-D array
        Sample times, increasing. [h]
    forcing : 1-D array
        The input u(t) at those times (here the equilibrium temperature), taken as varying
        linearly between samples. [any unit]
    time_constant_h : float
        Time constant τ (> 0). [h]
    initial : float, optional
        The output at the first sample; default the first input (the system starts settled).

    Returns
    -------
    ndarray
        y(t) at the sample times, in the input's unit.

    Notes
    -----
    dy/dt = (u − y)/τ.  For u linear over a step of length Δ with slope s the exact solution is
    y₁ = a·y₀ + u₁ − a·u₀ − s·τ·(1 − a), a = exp(−Δ/τ) (the ramp response of a first-order
    system plus its free decay), so the result is exact for piecewise-linear forcing whatever
    the step.  The linear recurrence is solved in closed form with cumulative sums (no loop
    over samples): y_k = P_k (y₀ + Σ_{j≤k} b_j / P_j), P_k = exp(−(t_k − t₀)/τ), in blocks of
    at most 50 τ so that 1/P stays finite.

    References
    ----------
    Ogata, K. *Modern Control Engineering*, Prentice Hall (first-order systems: unit-ramp
    response y(t) = t − τ + τ e^(−t/τ)).
    """
    t = np.asarray(elapsed_h, dtype=float)
    u = np.asarray(forcing, dtype=float)
    tau = float(time_constant_h)
    if t.ndim != 1 or t.shape != u.shape:
        raise ValueError(f"elapsed_h and forcing must be 1-D of the same length, got {t.shape} and {u.shape}")
    if not tau > 0:
        raise ValueError(f"time_constant_h must be positive, got {tau!r}")
    out = np.empty_like(u)
    if len(u) == 0:
        return out
    out[0] = float(u[0] if initial is None else initial)
    start = 0
    while start < len(u) - 1:  # blocks of at most 50 time constants sharing their end samples
        stop = int(np.searchsorted(t, t[start] + _BLOCK_TIME_CONSTANTS * tau, side="right"))
        stop = min(max(stop, start + 2), len(u))
        out[start:stop] = _lag_block(t[start:stop], u[start:stop], tau, out[start])
        start = stop - 1
    return out


def _lag_block(t: np.ndarray, u: np.ndarray, tau: float, y0: float) -> np.ndarray:
    """Closed form of the recurrence over one block starting at y(t[0]) = y0."""
    dt = np.diff(t)
    a = np.exp(-dt / tau)
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(dt > 0, np.diff(u) / np.where(dt > 0, dt, 1.0), 0.0)
    b = u[1:] - a * u[:-1] - slope * tau * (1.0 - a)
    decay_from_start = (t[1:] - t[0]) / tau  # -ln P_k
    grow = np.exp(decay_from_start)  # 1 / P_k
    y = np.empty_like(u)
    y[0] = y0
    y[1:] = np.exp(-decay_from_start) * (y0 + np.cumsum(b * grow))
    return y


def drifted_surface_rms_um(surface_rms_um, drift_um_per_c, structure_temp_change_c):
    """Surface rms some time after a correction, once the structure's temperature has moved.

    Parameters
    ----------
    surface_rms_um : numeric
        σ₀, the surface rms the correction left. [µm]
    drift_um_per_c : float
        k, surface rms added per °C of structure temperature change (a site figure). [µm/°C]
    structure_temp_change_c : numeric
        T_s(t) − T_s(t₀) since the correction; the sign does not matter. [°C]

    Returns
    -------
    ndarray (float for scalar input)
        σ(t) = √(σ₀² + (k·|ΔT_s|)²) [µm]: the drift is independent of the error the correction
        left, so the two add in quadrature.
    """
    drift = float(drift_um_per_c) * np.abs(np.asarray(structure_temp_change_c, dtype=float))
    return _finish(np.hypot(np.asarray(surface_rms_um, dtype=float), drift))
