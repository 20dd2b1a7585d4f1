"""Tests for advisor.physics.aperture: wavelength, Ruze efficiency, tolerance, beam, RSS."""

from __future__ import annotations

import numpy as np
import pytest

from advisor.physics import aperture


def test_wavelength_from_exact_speed_of_light():
    """SI definition (BIPM SI Brochure, 9th ed.): c = 299 792 458 m/s exactly, so
    299.792458 GHz has a wavelength of exactly 1 mm and 100 GHz of 2.99792458 mm."""
    assert aperture.wavelength_mm(299.792458) == pytest.approx(1.0, rel=1e-15)
    np.testing.assert_allclose(aperture.wavelength_mm(np.array([100.0, 30.0])), [2.99792458, 9.9930819333], rtol=1e-10)


@pytest.mark.parametrize("fraction, efficiency", [(16.0, 0.5396), (20.0, 0.6738)])
def test_ruze_efficiency_at_standard_tolerances(fraction, efficiency):
    """Ruze (1966), Proc. IEEE 54, 633: eta = exp(-(4 pi sigma / lambda)^2);
    sigma = lambda/16 -> exp(-(pi/4)^2) = 0.5396, sigma = lambda/20 -> exp(-(pi/5)^2) = 0.6738 (by hand)."""
    for freq_ghz in (30.0, 86.0, 116.0):
        sigma_um = aperture.wavelength_mm(freq_ghz) * 1e3 / fraction
        assert aperture.ruze_efficiency(sigma_um, freq_ghz) == pytest.approx(efficiency, abs=5e-5)


def test_required_surface_rms_is_lambda_over_fraction():
    """lambda/16 at 100 GHz = 2997.92458 um / 16 = 187.37 um, and it gives the Ruze (1966)
    efficiency 0.5396 at that frequency; a tighter fraction gives a smaller tolerance."""
    assert aperture.required_surface_rms_um(100.0) == pytest.approx(2997.92458 / 16.0)
    freq_ghz = np.array([30.0, 86.0, 116.0])
    sigma_um = aperture.required_surface_rms_um(freq_ghz)
    np.testing.assert_allclose(aperture.ruze_efficiency(sigma_um, freq_ghz), 0.5396, atol=5e-5)
    assert np.all(aperture.required_surface_rms_um(freq_ghz, fraction=20.0) < sigma_um)


def test_ruze_efficiency_is_vectorised_and_bounded():
    """Broadcasting surface rms (m,1) against frequency (n,): 1 for a perfect surface,
    decreasing with rms and with frequency (Ruze 1966)."""
    sigma_um = np.array([[0.0], [100.0], [250.0], [400.0]])
    freq_ghz = np.array([22.0, 43.0, 86.0])
    eta = aperture.ruze_efficiency(sigma_um, freq_ghz)
    assert eta.shape == (4, 3)
    np.testing.assert_allclose(eta[0], 1.0)
    assert np.all(np.diff(eta, axis=0) < 0.0) and np.all(np.diff(eta[1:], axis=1) < 0.0)
    assert isinstance(aperture.ruze_efficiency(200.0, 86.0), float)
    assert np.isnan(aperture.ruze_efficiency(np.nan, 86.0))


def test_beam_of_100m_dish_at_86ghz():
    """Common practice: a 100 m dish at 86 GHz has a beam of about 8.6 arcsec with
    FWHM = 1.2 lambda/D (Wilson, Rohlfs & Huettemeister, Tools of Radio Astronomy, for the
    1.2 factor): 1.2 * 3.486 mm / 100 m = 4.18e-5 rad = 8.63 arcsec."""
    assert aperture.beam_fwhm_arcsec(86.0, 100.0) == pytest.approx(8.6, rel=0.01)
    # scales as 1/f and 1/D, linearly with the taper factor
    assert aperture.beam_fwhm_arcsec(43.0, 100.0) == pytest.approx(2.0 * aperture.beam_fwhm_arcsec(86.0, 100.0))
    assert aperture.beam_fwhm_arcsec(86.0, 50.0, taper_factor=1.0) == pytest.approx(
        2.0 / 1.2 * aperture.beam_fwhm_arcsec(86.0, 100.0)
    )


def test_root_sum_square_of_independent_terms():
    """Common practice: independent error terms add in quadrature; 230 um and 100 um
    combine to about 250 um (sqrt(62900) = 250.8)."""
    assert aperture.root_sum_square(230.0, 100.0) == pytest.approx(250.0, abs=2.0)
    assert aperture.root_sum_square(3.0, 4.0, 12.0) == pytest.approx(13.0)
    assert aperture.root_sum_square(-5.0) == pytest.approx(5.0)
    out = aperture.root_sum_square(np.array([3.0, np.nan, 6.0]), 4.0, np.array([[0.0], [8.0]]))
    assert out.shape == (2, 3)
    np.testing.assert_allclose(out[0], [5.0, np.nan, np.sqrt(52.0)])
    np.testing.assert_allclose(out[1], [np.sqrt(89.0), np.nan, np.sqrt(116.0)])
    with pytest.raises(TypeError):
        aperture.root_sum_square()
