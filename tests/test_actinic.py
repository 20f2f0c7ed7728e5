"""Actinic flux: switches, Beer-Lambert, Rayleigh, horizon, diffuse light."""
from __future__ import annotations

import numpy as np
import pytest

from boxchem.environment.atmosphere import ozone_column_above
from boxchem.photolysis.actinic import actinic_flux, flux_grid
from boxchem.photolysis.rayleigh import rayleigh_cross_section
from boxchem.photolysis.spectrum import extraterrestrial_flux
from boxchem.units import DOBSON_UNIT_CM2


def test_rayleigh_matches_bodhaine_fit():
    # Bodhaine et al. (1999) J. Atmos. Oceanic Technol. 16, 1854, Eq. (29): their fit of the
    # full formula for 360 ppm CO2, stated accurate to better than 0.01 % from 250 to 850 nm
    # (fit coefficients recalled from memory).  Checked on a 1 nm grid at the fit's stated
    # accuracy: a slip of 1e-4 in the standard-air density N_s (sigma ~ 1/N_s^2) fails here;
    # smaller slips are below what the published fit can resolve.
    wl = np.arange(250.0, 850.1, 1.0)
    lam = wl * 1e-3
    fit = 1e-28 * (1.0455996 - 341.29061 * lam**-2 - 0.90230850 * lam**2) / (
        1.0 + 0.0027059889 * lam**-2 - 85.968563 * lam**2)
    np.testing.assert_allclose(rayleigh_cross_section(wl), fit, rtol=1e-4, atol=0)
    # 4.5e-27 cm2 at 550 nm (textbook value, recalled from memory)
    assert rayleigh_cross_section(550.0) == pytest.approx(4.51e-27, rel=0.01, abs=0)


def test_no_absorbers_no_scattering_gives_extraterrestrial_flux():
    # conservation: nothing in the path -> the top-of-atmosphere flux x (1 AU/r)^2 (common practice, no source)
    f0 = extraterrestrial_flux()
    for sza in (0.0, 45.0, 80.0, 92.0):
        _, f = actinic_flux(sza, 20_000.0, 300.0, absorbers=(), rayleigh=False, diffuse=False,
                            distance_factor=1.0339)
        np.testing.assert_allclose(f, 1.0339 * f0, rtol=1e-12)
    # even with diffuse light switched on: no scatterer and black ground -> no diffuse light
    _, f = actinic_flux(30.0, 20_000.0, 300.0, absorbers=(), rayleigh=False, albedo=0.0)
    np.testing.assert_allclose(f, f0, rtol=1e-12)


def test_beer_lambert_vertical_path_single_absorber():
    # F = F0 exp(-sigma N) with N the ozone column above the box (Beer-Lambert law), N from the
    # environment's ozone profile (independent closed form of the column above)
    sigma = 3.0e-19                                                   # cm2, constant test value
    n_bins = extraterrestrial_flux().size
    for z in (0.0, 15_000.0, 20_000.0, 33_500.0):
        _, f = actinic_flux(0.0, z, 300.0, absorbers=("O3",), rayleigh=False, diffuse=False,
                            cross_sections={"O3": np.full(n_bins, sigma)})
        column = float(ozone_column_above(z, 300.0)) * DOBSON_UNIT_CM2
        np.testing.assert_allclose(f, extraterrestrial_flux() * np.exp(-sigma * column), rtol=1e-10)


def test_slant_path_at_60_deg_is_close_to_secant():
    # plane-parallel limit: slant column = vertical column x sec(chi), within the sphericity
    # correction (< 0.5 % at 60 deg; common practice, no source)
    sigma = 1.0e-19
    n_bins = extraterrestrial_flux().size
    _, f = actinic_flux(60.0, 20_000.0, 300.0, absorbers=("O3",), rayleigh=False, diffuse=False,
                        cross_sections={"O3": np.full(n_bins, sigma)})
    column = float(ozone_column_above(20_000.0, 300.0)) * DOBSON_UNIT_CM2
    tau = -np.log(f / extraterrestrial_flux())
    np.testing.assert_allclose(tau, 2.0 * sigma * column, rtol=5e-3)


def test_zero_below_horizon_positive_before():
    # horizon at 20 km is 94.5 deg (90 + arccos(R/(R+z)); geometry, common practice, no source)
    _, f = actinic_flux(np.array([92.0, 96.0]), 20_000.0, 300.0)
    assert np.all(f[1] == 0.0)
    assert np.all(f[0, 200:] > 0.0)          # visible light reaches the box at 92 deg


def test_diffuse_light_is_positive_and_grows_with_albedo():
    # Rayleigh scattering adds diffuse light; a brighter ground adds more (common practice, no source)
    d0, s0 = flux_grid([30.0], 20_000.0, [300.0], albedo=0.0, components=True)
    d1, s1 = flux_grid([30.0], 20_000.0, [300.0], albedo=0.8, components=True)
    vis = slice(200, None)
    assert np.all(s0[..., vis] > 0.0)
    assert np.all(s1[..., vis] > s0[..., vis])
    # the direct beam never meets the ground: it does not depend on the albedo (common practice, no source)
    np.testing.assert_allclose(d0, d1, rtol=1e-12, atol=0)


def test_surface_diffuse_fraction_pure_rayleigh():
    # pure Rayleigh atmosphere, black ground, overhead sun at 400 nm (tau ~ 0.36): the direct beam
    # is exp(-tau) exactly; the diffuse actinic flux is of order of the scattered fraction
    # 1 - exp(-tau) ~ 0.3 (single-scattering estimate; common practice, no source), allow 0.2-0.45
    wl, f = actinic_flux(0.0, 0.0, 300.0, absorbers=(), albedo=0.0)
    i = int(np.argmin(abs(wl - 402.5)))
    d, s = flux_grid([0.0], 0.0, [300.0], absorbers=(), albedo=0.0, components=True)
    ratio = s[0, 0, i] / extraterrestrial_flux()[i]
    assert 0.2 < ratio < 0.45
    assert d[0, 0, i] / extraterrestrial_flux()[i] == pytest.approx(np.exp(-0.36), rel=0.05, abs=0)
