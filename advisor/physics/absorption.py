"""Absorption by oxygen and water vapour: ITU-R P.676-12 specific attenuation and equivalent heights.

    gamma_o_db_km = specific_attenuation_oxygen_db_km(freq_ghz, pressure_hpa, temp_c, rho_gm3)
    gamma_w_db_km = specific_attenuation_water_db_km(freq_ghz, pressure_hpa, temp_c, rho_gm3)
    h_o_km = equivalent_height_oxygen_km(freq_ghz, pressure_hpa, temp_c, rho_gm3)
    h_w_km = equivalent_height_water_km(freq_ghz, pressure_hpa, temp_c, rho_gm3)
    a_w_db = zenith_water_attenuation_from_pwv_db(freq_ghz, pwv_mm, site_height_km)

Annex 1 of the Recommendation sums 44 oxygen lines (with the 50-70 GHz complex and the
118.75 GHz line), 35 water-vapour lines (with the 22.235 GHz line) and the dry continuum;
Annex 2 turns the surface values into a zenith attenuation with equivalent heights, or the
water part directly from the precipitable water.  Pressures here are the total barometric
pressure a station reports; the dry-air pressure p = P - e the Recommendation uses is
derived inside.  The zenith attenuation in dB is A = gamma_o h_o + gamma_w h_w; the opacity in
nepers is A / (10 log10 e) (:mod:`advisor.physics.atmosphere`).

Cost: 79 lines per input row, summed in blocks of rows; a year of 1-minute rows takes about
a second on a 2-core machine for the two specific attenuations.
"""

from __future__ import annotations

import numpy as np

from advisor.physics.p676_tables import (
    OXYGEN_HEIGHT_LINES,
    OXYGEN_LINES,
    WATER_HEIGHT_LINES,
    WATER_LINES,
)

__all__ = [
    "specific_attenuation_oxygen_db_km",
    "specific_attenuation_water_db_km",
    "equivalent_height_oxygen_km",
    "equivalent_height_water_km",
    "zenith_water_attenuation_from_pwv_db",
]

#: Rows per block in the line sums: block x 44 lines stays in the processor cache.
_BLOCK = 2048
#: Frequency ranges of validity [GHz]: Annex 1 line-by-line and Annex 2 zenith methods.
ANNEX1_RANGE_GHZ = (1.0, 1000.0)
ANNEX2_RANGE_GHZ = (1.0, 350.0)


def _finish(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def _inputs(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3):
    """Broadcast inputs; return f [GHz], dry pressure p [hPa], e [hPa], theta = 300/T, T [K]."""
    f, p_tot, t_c, rho = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3))
    )
    t_k = t_c + 273.15
    e = rho * t_k / 216.7  # ITU-R P.676 / P.453: e = rho T / 216.7
    return f, p_tot - e, e, 300.0 / t_k, t_k


def _line_sum(terms, *arrays):
    """Sum ``terms(*column_arrays)`` over the line axis, in blocks of rows (not a loop over rows)."""
    flat = [a.ravel()[:, None] for a in arrays]
    out = np.empty(flat[0].shape[0])
    for start in range(0, out.size, _BLOCK):
        block = [a[start : start + _BLOCK] for a in flat]
        out[start : start + _BLOCK] = terms(*block).sum(axis=1)
    return out.reshape(arrays[0].shape)


def _in_range(f, bounds):
    return (f >= bounds[0]) & (f <= bounds[1])


#: Line constants as (1, n_lines) rows, scaled to the units of the formulas.
_O_F0, _O_A1, _O_A2, _O_A3, _O_A4, _O_A5, _O_A6 = (
    c[None, :] for c in OXYGEN_LINES.T * np.array([1.0, 1e-7, 1.0, 1e-4, 1.0, 1e-4, 1e-4])[:, None]
)
_W_F0, _W_B1, _W_B2, _W_B3, _W_B4, _W_B5, _W_B6 = (
    c[None, :] for c in WATER_LINES.T * np.array([1.0, 1e-1, 1.0, 1e-4, 1.0, 1.0, 1.0])[:, None]
)
#: Every oxygen line of P.676-12 has a4 = 0 (checked by the tests), so the pressure width goes
#: as theta^0.8 for all of them and is computed once per row.
_W_DOPPLER = 2.1316e-12 * _W_F0**2


def _line_shape(f, f0, width, mixing=None):
    """f/f0 [(w - delta (f0 - f)) / ((f0 - f)^2 + w^2) + (w - delta (f0 + f)) / ((f0 + f)^2 + w^2)]."""
    w2 = width * width
    below, above = f0 - f, f0 + f
    if mixing is None:
        shape = width / (below * below + w2) + width / (above * above + w2)
    else:
        shape = (width - mixing * below) / (below * below + w2) + (width - mixing * above) / (above * above + w2)
    shape *= f / f0
    return shape


def _oxygen_terms(f, p_theta3, width_row, mixing_row, theta):
    """S_i F_i for the oxygen lines, one row per input (Annex 1, eqs. 3, 6a-7)."""
    strength = np.exp(_O_A2 * (1.0 - theta))
    strength *= _O_A1 * p_theta3
    width = np.sqrt((_O_A3 * width_row) ** 2 + 2.25e-6)
    mixing = (_O_A5 + _O_A6 * theta) * mixing_row
    strength *= _line_shape(f, _O_F0, width, mixing)
    return strength


def _water_terms(f, p, e, theta):
    """S_i F_i for the water-vapour lines, one row per input (Annex 1, eqs. 3, 6b)."""
    log_theta = np.log(theta)
    strength = np.exp(_W_B2 * (1.0 - theta) + 3.5 * log_theta)
    strength *= _W_B1 * e
    width = _W_B3 * (p * np.exp(_W_B4 * log_theta) + _W_B5 * e * np.exp(_W_B6 * log_theta))
    width = 0.535 * width + np.sqrt(0.217 * width * width + _W_DOPPLER / theta)
    strength *= _line_shape(f, _W_F0, width)
    return strength


def specific_attenuation_oxygen_db_km(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3):
    """Specific attenuation by dry air (oxygen lines, pressure-induced nitrogen, Debye continuum).

    Parameters
    ----------
    freq_ghz : numeric
        Frequency, 1..1000. [GHz]
    pressure_hpa : numeric
        Total barometric pressure. [hPa]
    temp_c : numeric
        Air temperature. [C]
    water_vapour_density_gm3 : numeric
        Water-vapour density (it broadens the oxygen lines). [g/m^3]

    Returns
    -------
    ndarray (float for scalar input)
        gamma_o [dB/km]; NaN outside 1..1000 GHz.

    Notes
    -----
    gamma_o = 0.1820 f (sum_i S_i F_i + N''_D(f)), with theta = 300/T, dry pressure p = P - e,
    e = rho T / 216.7;  S_i = a1 1e-7 p theta^3 exp(a2 (1 - theta));
    Delta f = a3 1e-4 (p theta^(0.8 - a4) + 1.1 e theta), widened for Zeeman splitting to
    sqrt(Delta f^2 + 2.25e-6);  delta = (a5 + a6 theta) 1e-4 (p + e) theta^0.8;
    F_i = f/f_i [(Df - delta (f_i - f)) / ((f_i - f)^2 + Df^2) + (Df - delta (f_i + f)) / ((f_i + f)^2 + Df^2)];
    N''_D = f p theta^2 [6.14e-5 / (d (1 + (f/d)^2)) + 1.4e-12 p theta^1.5 / (1 + 1.9e-5 f^1.5)],
    d = 5.6e-4 (p + e) theta^0.8.

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Attenuation by atmospheric gases and related
    effects, Annex 1, eqs. (1)-(9) and Table 1.
    """
    f, p, e, theta, _t = _inputs(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3)
    theta08 = theta**0.8
    lines = _line_sum(_oxygen_terms, f, p * theta**3, p * theta08 + 1.1 * e * theta, (p + e) * theta08, theta)
    d = 5.6e-4 * (p + e) * theta08
    continuum = (
        f * p * theta**2 * (6.14e-5 / (d * (1.0 + (f / d) ** 2)) + 1.4e-12 * p * theta**1.5 / (1.0 + 1.9e-5 * f**1.5))
    )
    gamma = 0.1820 * f * (lines + continuum)
    return _finish(np.where(_in_range(f, ANNEX1_RANGE_GHZ), gamma, np.nan))


def specific_attenuation_water_db_km(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3):
    """Specific attenuation by water vapour (35 lines including the continuum pseudo-line).

    Parameters
    ----------
    freq_ghz : numeric
        Frequency, 1..1000. [GHz]
    pressure_hpa : numeric
        Total barometric pressure. [hPa]
    temp_c : numeric
        Air temperature. [C]
    water_vapour_density_gm3 : numeric
        Water-vapour density. [g/m^3]

    Returns
    -------
    ndarray (float for scalar input)
        gamma_w [dB/km]; NaN outside 1..1000 GHz.

    Notes
    -----
    gamma_w = 0.1820 f sum_i S_i F_i;  S_i = b1 1e-1 e theta^3.5 exp(b2 (1 - theta));
    Df = b3 1e-4 (p theta^b4 + b5 e theta^b6), Doppler-widened to
    0.535 Df + sqrt(0.217 Df^2 + 2.1316e-12 f_i^2 / theta); no line mixing (delta = 0);
    F_i as for oxygen.

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Attenuation by atmospheric gases and related
    effects, Annex 1, eqs. (1)-(7), (11) and Table 2.
    """
    f, p, e, theta, _t = _inputs(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3)
    gamma = 0.1820 * f * _line_sum(_water_terms, f, p, e, theta)
    return _finish(np.where(_in_range(f, ANNEX1_RANGE_GHZ), gamma, np.nan))


def equivalent_height_oxygen_km(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3):
    """Equivalent height of dry air: zenith attenuation = gamma_o(surface) h_o.

    Parameters
    ----------
    freq_ghz : numeric
        Frequency, 1..350. [GHz]
    pressure_hpa : numeric
        Total barometric pressure at the site. [hPa]
    temp_c : numeric
        Air temperature at the site. [C]
    water_vapour_density_gm3 : numeric
        Water-vapour density at the site. [g/m^3]

    Returns
    -------
    ndarray (float for scalar input)
        h_o [km]; NaN outside 1..350 GHz.

    Notes
    -----
    r_p = P / 1013.25;  t1 = 5.1040 / (1 + 0.066 r_p^-2.3) exp(-((f - 59.7) / (2.87 + 12.4 exp(-7.9 r_p)))^2);
    t2 = sum_i c_i exp(2.12 r_p) / ((f - f_i)^2 + 0.025 exp(2.2 r_p)) (Table 3);
    t3 = 0.0114 f / (1 + 0.14 r_p^-2.6) (15.02 f^2 - 1353 f + 5.333e4) / (f^3 - 151.3 f^2 + 9629 f - 6803);
    A = 0.7832 + 0.00709 (T - 273.15);  h_o = 6.1 A / (1 + 0.17 r_p^-1.1) (1 + t1 + t2 + t3),
    at most 10.7 r_p^0.3 below 70 GHz.

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Attenuation by atmospheric gases and related
    effects, Annex 2, section 2.1 and Table 3.
    """
    f, p, e, _theta, t_k = _inputs(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3)
    rp = (p + e) / 1013.25
    t1 = 5.1040 / (1.0 + 0.066 * rp**-2.3) * np.exp(-(((f - 59.7) / (2.87 + 12.4 * np.exp(-7.9 * rp))) ** 2))
    c, fi = (x[None, :] for x in OXYGEN_HEIGHT_LINES.T)
    t2 = _line_sum(lambda f, rp: c * np.exp(2.12 * rp) / ((f - fi) ** 2 + 0.025 * np.exp(2.2 * rp)), f, rp)
    t3 = (
        0.0114
        * f
        / (1.0 + 0.14 * rp**-2.6)
        * (15.02 * f**2 - 1353.0 * f + 5.333e4)
        / (f**3 - 151.3 * f**2 + 9629.0 * f - 6803.0)
    )
    a = 0.7832 + 0.00709 * (t_k - 273.15)
    h_o = 6.1 * a / (1.0 + 0.17 * rp**-1.1) * (1.0 + t1 + t2 + t3)
    h_o = np.where(f < 70.0, np.minimum(h_o, 10.7 * rp**0.3), h_o)
    return _finish(np.where(_in_range(f, ANNEX2_RANGE_GHZ), h_o, np.nan))


def equivalent_height_water_km(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3):
    """Equivalent height of water vapour: zenith attenuation = gamma_w(surface) h_w.

    Parameters
    ----------
    freq_ghz : numeric
        Frequency, 1..350. [GHz]
    pressure_hpa : numeric
        Total barometric pressure at the site. [hPa]
    temp_c : numeric
        Air temperature at the site. [C]
    water_vapour_density_gm3 : numeric
        Water-vapour density at the site. [g/m^3]

    Returns
    -------
    ndarray (float for scalar input)
        h_w [km]; NaN outside 1..350 GHz.

    Notes
    -----
    A = 1.9298 - 0.04166 (T - 273.15) + 0.0517 rho;  B = 1.1674 - 0.00622 (T - 273.15) + 0.0063 rho;
    sigma_w = 1.013 / (1 + exp(-8.6 (r_p - 0.57)));  h_w = A + B sum_i a_i sigma_w / ((f - f_i)^2 + b_i sigma_w)
    over the lines of Table 4.

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Attenuation by atmospheric gases and related
    effects, Annex 2, section 2.2 and Table 4.
    """
    f, p, e, _theta, t_k = _inputs(freq_ghz, pressure_hpa, temp_c, water_vapour_density_gm3)
    rho = np.broadcast_to(np.asarray(water_vapour_density_gm3, dtype=float), f.shape)
    rp = (p + e) / 1013.25
    a = 1.9298 - 0.04166 * (t_k - 273.15) + 0.0517 * rho
    b = 1.1674 - 0.00622 * (t_k - 273.15) + 0.0063 * rho
    sigma = 1.013 / (1.0 + np.exp(-8.6 * (rp - 0.57)))
    fi, ai, bi = (x[None, :] for x in WATER_HEIGHT_LINES.T)
    lines = _line_sum(lambda f, s: ai * s / ((f - fi) ** 2 + bi * s), f, sigma)
    return _finish(np.where(_in_range(f, ANNEX2_RANGE_GHZ), a + b * lines, np.nan))


#: The integrated-content method for one frequency and many rows evaluates its reference ratio
#: on a grid of ln V_t (step 0.003) and interpolates: relative error below 1e-6 (see the tests).
_PWV_GRID_MIN_POINTS = 4096
_PWV_GRID_LOG_STEP = 0.003


def _pwv_ratio(f, v):
    """gamma_w(f, ref) / gamma_w(20.6 GHz, ref) at the reference state of V_t (Annex 2, 2.3)."""
    rho_ref = v / 2.38
    t_ref_c = 14.0 * np.log(0.22 * v / 2.38) + 3.0
    p_tot = 845.0 + rho_ref * (t_ref_c + 273.15) / 216.7  # so that the dry pressure is p_ref
    return np.asarray(specific_attenuation_water_db_km(f, p_tot, t_ref_c, rho_ref)) / np.asarray(
        specific_attenuation_water_db_km(20.6, p_tot, t_ref_c, rho_ref)
    )


def zenith_water_attenuation_from_pwv_db(freq_ghz, pwv_mm, site_height_km):
    """Zenith attenuation by water vapour from the precipitable water (integrated content).

    Parameters
    ----------
    freq_ghz : numeric
        Frequency, 1..350. [GHz]
    pwv_mm : numeric
        Precipitable water vapour V_t (1 mm = 1 kg/m^2). [mm]
    site_height_km : numeric
        Height of the site above mean sea level; clipped to 0..4 km as the method asks. [km]

    Returns
    -------
    ndarray (float for scalar input)
        A_w at the zenith [dB]; NaN outside 1..350 GHz.

    Notes
    -----
    A_w = 0.0176 V_t gamma_w(f, p_ref, rho_ref, t_ref) / gamma_w(f_ref, p_ref, rho_ref, t_ref),
    multiplied by (a h^b + 1) above 20 GHz; f_ref = 20.6 GHz, p_ref = 845 hPa,
    rho_ref = V_t / 2.38 g/m^3, t_ref = 14 ln(0.22 V_t / 2.38) + 3 C;
    a = 0.2048 exp(-((f - 22.43)/3.097)^2) + 0.2326 exp(-((f - 183.5)/4.096)^2)
    + 0.2073 exp(-((f - 325)/3.651)^2) - 0.1113;  b = 8.741e4 exp(-0.587 f) + 312.2 f^-2.38 + 0.723.
    Here p_ref is taken as the dry-air pressure, as the line formulas of Annex 1 use it.

    References
    ----------
    ITU-R Recommendation P.676-12 (08/2019), Attenuation by atmospheric gases and related
    effects, Annex 2, section 2.3.
    """
    f, v, h = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (freq_ghz, pwv_mm, site_height_km)))
    with np.errstate(divide="ignore", invalid="ignore"):
        positive = np.isfinite(v) & (v > 0.0)
        if f.size > _PWV_GRID_MIN_POINTS and positive.any() and np.all(f == f.flat[0]):
            # one frequency, many rows: the ratio depends on V_t alone and is smooth in ln V_t
            lo, hi = v[positive].min(), v[positive].max()
            grid = np.geomspace(lo, hi, int(np.ceil(np.log(hi / lo) / _PWV_GRID_LOG_STEP)) + 2)
            ratio = np.interp(np.log(v), np.log(grid), _pwv_ratio(f.flat[0], grid))
        else:
            ratio = _pwv_ratio(f, v)
        b = 8.741e4 * np.exp(-0.587 * f) + 312.2 * f**-2.38 + 0.723
    a = (
        0.2048 * np.exp(-(((f - 22.43) / 3.097) ** 2))
        + 0.2326 * np.exp(-(((f - 183.5) / 4.096) ** 2))
        + 0.2073 * np.exp(-(((f - 325.0) / 3.651) ** 2))
        - 0.1113
    )
    attenuation = 0.0176 * v * ratio
    with np.errstate(over="ignore", invalid="ignore"):  # h^b is huge below 20 GHz, where it is unused
        attenuation = np.where(f > 20.0, attenuation * (a * np.clip(h, 0.0, 4.0) ** b + 1.0), attenuation)
    attenuation = np.where(v == 0.0, 0.0, attenuation)
    return _finish(np.where(_in_range(f, ANNEX2_RANGE_GHZ) & (v >= 0.0), attenuation, np.nan))
