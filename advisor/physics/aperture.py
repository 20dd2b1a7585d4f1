"""Aperture: wavelength, Ruze surface efficiency, surface tolerance, beam width, error budgets.

    wavelength_mm(freq_ghz)                       lambda = c / f
    ruze_efficiency(surface_rms_um, freq_ghz)     exp(-(4 pi sigma / lambda)^2)
    required_surface_rms_um(freq_ghz, 16.0)       lambda / 16
    beam_fwhm_arcsec(freq_ghz, diameter_m)        1.2 lambda / D
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
    """Aperture efficiency factor due to random surface errors (Ruze loss).

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
    return _finish(np.asarray(taper_factor, dtype=float) * lam_m / np.asarray(diameter_m, dtype=float) * _ARCSEC_PER_RAD)


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
