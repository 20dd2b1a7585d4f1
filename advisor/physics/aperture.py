"""Aperture: wavelength, Ruze surface efficiency, surface tolerance, beam width, error budgets.

wavelength_mm(freq_ghz)                       lambda = c / f
ruze_efficiency(surface_rms_um, freq_ghz)     exp(-(4 pi sigma / lambda)^2)
required_surface_rms_um(freq_ghz, 16.0)       lambda / 16
beam_fwhm_arcsec(freq_ghz, diameter_m)        1.2 lambda / D
pointing_efficiency(error_arcsec, fwhm_arcsec) exp(-4 ln2 (sigma / theta)^2)
gravity_residual_um(el_corr, el_used, a_um, b_um) rms of a (sin E2 - sin E1) + b (cos E2 - cos E1)
root_sum_square(a_um, b_um, ...)              sqrt(a^2 + b^2 + ...)
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "SPEED_OF_LIGHT_M_S",
    "wavelength_mm",
    "ruze_efficiency",
    "required_surface_rms_um",
    "beam_fwhm_arcsec",
    "pointing_efficiency",
    "gravity_residual_um",
    "root_sum_square",
]

#: Speed of light in vacuum, exact by the SI definition of the metre. [m/s]
SPEED_OF_LIGHT_M_S = 299_792_458.0
_ARCSEC_PER_RAD = 180.0 / np.pi * 3600.0


def _finish(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def wavelength_mm(freq_ghz):
    """Free-space wavelength.

    Parameters
    ----------
    freq_ghz : numeric
        Frequency. [GHz]

    Returns
    -------
    ndarray (float for scalar input)
        Wavelength lambda = c / f. [mm]

    References
    ----------
    BIPM (2019). The International System of Units (SI), 9th ed.: c = 299 792 458 m/s exactly.
    """
    f_hz = np.asarray(freq_ghz, dtype=float) * 1e9
    with np.errstate(divide="ignore"):
        return _finish(SPEED_OF_LIGHT_M_S / f_hz * 1e3)


def ruze_efficiency(surface_rms_um, freq_ghz):
    """Ruze surface efficiency: the factor of the aperture efficiency lost to random surface errors.

    Parameters
    ----------
    surface_rms_um : numeric
        Effective rms surface error (half-path-length convention, normal to the surface). [um]
    freq_ghz : numeric
        Observing frequency. [GHz]

    Returns
    -------
    ndarray (float for scalar input)
        eta = exp(-(4 pi sigma / lambda)^2), 0..1. [1]

    References
    ----------
    Ruze, J. (1966). Antenna tolerance theory - a review. Proc. IEEE 54(4), 633-640.
    """
    sigma_um = np.asarray(surface_rms_um, dtype=float)
    lam_um = np.asarray(wavelength_mm(freq_ghz), dtype=float) * 1e3
    return _finish(np.exp(-((4.0 * np.pi * sigma_um / lam_um) ** 2)))


def required_surface_rms_um(freq_ghz, fraction=16.0):
    """Largest surface rms that meets a lambda / fraction tolerance.

    Parameters
    ----------
    freq_ghz : numeric
        Observing frequency. [GHz]
    fraction : numeric, default 16
        Tolerance as a fraction of the wavelength; lambda/16 gives Ruze efficiency 0.54. [1]

    Returns
    -------
    ndarray (float for scalar input)
        lambda / fraction. [um]

    References
    ----------
    Ruze, J. (1966). Antenna tolerance theory - a review. Proc. IEEE 54(4), 633-640.
    """
    lam_um = np.asarray(wavelength_mm(freq_ghz), dtype=float) * 1e3
    return _finish(lam_um / np.asarray(fraction, dtype=float))


def beam_fwhm_arcsec(freq_ghz, diameter_m, taper_factor=1.2):
    """Half-power beam width of a tapered circular aperture.

    Parameters
    ----------
    freq_ghz : numeric
        Observing frequency. [GHz]
    diameter_m : numeric
        Aperture diameter. [m]
    taper_factor : numeric, default 1.2
        FWHM in units of lambda / D; ~1.02 uniform, ~1.2 for a typical edge taper. [1]

    Returns
    -------
    ndarray (float for scalar input)
        FWHM = taper lambda / D. [arcsec]

    References
    ----------
    Wilson, T. L., Rohlfs, K., Hüttemeister, S. *Tools of Radio Astronomy*, Springer
    (chapter on filled-aperture antennas).
    """
    lam_m = np.asarray(wavelength_mm(freq_ghz), dtype=float) * 1e-3
    return _finish(
        np.asarray(taper_factor, dtype=float) * lam_m / np.asarray(diameter_m, dtype=float) * _ARCSEC_PER_RAD
    )


def pointing_efficiency(pointing_error_arcsec, beam_fwhm_arcsec):
    """Gain left when a Gaussian beam points off the source.

    Parameters
    ----------
    pointing_error_arcsec : numeric
        Pointing offset, or the rms of the total (radial) offset, see Notes. [arcsec]
    beam_fwhm_arcsec : numeric
        Half-power beam width theta. [arcsec]

    Returns
    -------
    ndarray (float for scalar input)
        exp(-4 ln 2 (sigma / theta)^2), 0..1 [1]: 0.5 at sigma = theta / 2 (the definition of
        the half-power width), 0.973 at sigma = theta / 10 (a common pointing requirement).

    Notes
    -----
    Exact for a steady offset sigma of a Gaussian main beam.  For random jitter whose total
    (radial) offset has rms sigma (sigma^2 = sigma_x^2 + sigma_y^2) the time-averaged gain is
    1 / (1 + 4 ln 2 sigma^2 / theta^2), a little higher: used with the radial rms this function
    is slightly conservative.  (With sigma the rms per axis, the average is
    1 / (1 + 8 ln 2 sigma^2 / theta^2), lower than this function gives.)  The loss does not
    depend on how the surface was corrected.

    References
    ----------
    Wilson, T. L., Rohlfs, K., Hüttemeister, S. *Tools of Radio Astronomy*, Springer
    (Gaussian main beam, chapter on filled-aperture antennas).
    """
    ratio = np.asarray(pointing_error_arcsec, dtype=float) / np.asarray(beam_fwhm_arcsec, dtype=float)
    return _finish(np.exp(-4.0 * np.log(2.0) * ratio**2))


def gravity_residual_um(el_corrected_deg, el_used_deg, sin_coeff_um, cos_coeff_um):
    """Rms surface error left by gravity when a correction made at one elevation is used at another.

    Parameters
    ----------
    el_corrected_deg : numeric
        Elevation at which the surface was measured and corrected (E1). [deg]
    el_used_deg : numeric
        Elevation at which it is used (E2); broadcasts against ``el_corrected_deg``. [deg]
    sin_coeff_um : numeric or 1-D array
        a_k: rms amplitude of each orthonormal surface mode k (e.g. a Zernike term normalised to
        unit rms over the aperture) per unit sin E; a site figure. [um]
    cos_coeff_um : numeric or 1-D array
        b_k: the same per unit cos E, one per mode (same length as ``sin_coeff_um``). [um]

    Returns
    -------
    ndarray (float for scalar input)
        sqrt(sum_k (a_k (sin E2 - sin E1) + b_k (cos E2 - cos E1))^2) [um], the shape of the
        broadcast elevations; 0 when E2 = E1.

    Notes
    -----
    Under gravity each low-order mode of a homologous reflector varies with elevation as
    z_k(E) = a_k sin E + b_k cos E + c_k.  A correction at E1 removes z_k(E1); at E2 the mode
    is off by z_k(E2) - z_k(E1) (the constant c_k cancels), and orthonormal modes add in
    quadrature.  The laser scan is made at the session's elevation (no residual); a correction
    from a calibrator at another elevation carries this term.

    References
    ----------
    Nikolic, B., Hills, R. E., Richer, J. S. (2007). A&A 465, 679 (elevation dependence of
    the large-scale surface errors, fitted as a sin E + b cos E + c).
    """
    e1 = np.radians(np.asarray(el_corrected_deg, dtype=float))
    e2 = np.radians(np.asarray(el_used_deg, dtype=float))
    d_sin = (np.sin(e2) - np.sin(e1))[..., None]
    d_cos = (np.cos(e2) - np.cos(e1))[..., None]
    a, b = np.broadcast_arrays(
        np.atleast_1d(np.asarray(sin_coeff_um, dtype=float)), np.atleast_1d(np.asarray(cos_coeff_um, dtype=float))
    )
    if a.ndim != 1:
        raise ValueError(f"sin_coeff_um and cos_coeff_um must be scalars or 1-D (one per mode), got shape {a.shape}")
    per_mode = d_sin * a + d_cos * b
    return _finish(np.sqrt(np.sum(per_mode * per_mode, axis=-1)))


def root_sum_square(*terms_um):
    """Combine independent error terms in quadrature, elementwise.

    Parameters
    ----------
    *terms_um : numeric
        One or more error terms, broadcastable against each other. [um]

    Returns
    -------
    ndarray (float for scalar input)
        sqrt(sum of squares) [um]; NaN wherever any term is NaN.
    """
    if not terms_um:
        raise TypeError("root_sum_square() needs at least one term")
    total = np.zeros(np.broadcast_shapes(*(np.shape(t) for t in terms_um)))
    for term in terms_um:  # loop over terms (few), not over rows
        total = total + np.square(np.asarray(term, dtype=float))
    return _finish(np.sqrt(total))
