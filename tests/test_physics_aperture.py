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


def test_pointing_efficiency_of_a_gaussian_beam():
    """Gaussian main beam (Wilson, Rohlfs & Huettemeister, Tools of Radio Astronomy): gain
    exp(-4 ln2 (sigma/theta)^2); by the definition of the half-power width it is exactly 0.5
    at an offset of theta/2; at theta/10 (the common-practice pointing limit) 0.97265
    (exp(-0.0277259)); 1 on the source; vectorised and NaN-propagating."""
    assert aperture.pointing_efficiency(0.0, 8.6) == 1.0
    assert aperture.pointing_efficiency(4.3, 8.6) == pytest.approx(0.5, rel=1e-12)
    assert aperture.pointing_efficiency(0.86, 8.6) == pytest.approx(0.972655, abs=1e-6)
    beam = aperture.beam_fwhm_arcsec(np.array([22.0, 86.0, 116.0]), 100.0)
    eff = aperture.pointing_efficiency(2.0, beam)
    assert eff.shape == (3,) and np.all(np.diff(eff) < 0.0)  # the same error costs more at higher f
    assert np.isnan(aperture.pointing_efficiency(np.nan, 8.6))
    # Averaging exp(-4 ln2 r^2/theta^2) over a circular Gaussian jitter with per-axis rms s gives
    # 1/(1 + 8 ln2 s^2/theta^2) (the docstring's closed form, checked by Monte Carlo); radial rms
    # sigma^2 = 2 s^2 that is 1/(1 + 4 ln2 sigma^2/theta^2) >= exp(-4 ln2 sigma^2/theta^2).
    rng = np.random.default_rng(1)
    s_axis, theta = 1.5, 8.6
    offsets = rng.normal(0.0, s_axis, (200000, 2))
    jitter_mean = aperture.pointing_efficiency(np.hypot(offsets[:, 0], offsets[:, 1]), theta).mean()
    assert jitter_mean == pytest.approx(1.0 / (1.0 + 8.0 * np.log(2.0) * (s_axis / theta) ** 2), abs=2e-3)
    assert (
        aperture.pointing_efficiency(np.sqrt(2.0) * s_axis, theta)
        < jitter_mean
        < aperture.pointing_efficiency(s_axis, theta)
    )


def test_gravity_residual_against_the_definition():
    """Definition (each mode a sin E + b cos E + c, orthonormal modes in quadrature; Nikolic,
    Hills & Richer 2007, A&A 465, 679), values by hand:
    - one mode, a = 100 um, b = 0, corrected at 30 deg, used at 90 deg: 100 (1 - 0.5) = 50 um;
    - one mode a = 100, b = 200 um, 30 -> 90 deg: |50 + 200 (0 - 0.8660254)| = 123.205 um;
    - two modes (a, b) = (100, 0) and (0, 200): sqrt(50^2 + 173.205^2) = 180.278 um;
    - the same elevation leaves nothing; the residual is symmetric in E1, E2."""
    assert aperture.gravity_residual_um(30.0, 90.0, 100.0, 0.0) == pytest.approx(50.0)
    assert aperture.gravity_residual_um(30.0, 90.0, 100.0, 200.0) == pytest.approx(123.2051, abs=1e-4)
    assert aperture.gravity_residual_um(30.0, 90.0, [100.0, 0.0], [0.0, 200.0]) == pytest.approx(180.2776, abs=1e-4)
    assert aperture.gravity_residual_um(47.0, 47.0, [100.0, 30.0], [200.0, -50.0]) == 0.0
    el_cal = np.array([[20.0], [45.0], [80.0]])
    el_session = np.array([30.0, 60.0])
    out = aperture.gravity_residual_um(el_cal, el_session, [120.0, 40.0], [-80.0, 60.0])
    assert out.shape == (3, 2)
    np.testing.assert_allclose(
        out, aperture.gravity_residual_um(el_session[None, :], el_cal, [120.0, 40.0], [-80.0, 60.0])
    )
    assert isinstance(aperture.gravity_residual_um(30.0, 60.0, 100.0, 100.0), float)
    with pytest.raises(ValueError):
        aperture.gravity_residual_um(30.0, 60.0, [[1.0, 2.0]], [[1.0, 2.0]])
