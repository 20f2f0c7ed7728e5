"""Actinic flux of the model atmosphere against DISORT (reference library).

DISORT, the discrete-ordinates solver of Stamnes, Tsay, Wiscombe and Jayaweera
(1988), Appl. Opt. 27, 2502, doi:10.1364/AO.27.002502, as packaged on PyPI
(``pydisort``), is run on exactly the layers of the model atmosphere
(vertical Rayleigh optical depth of each layer from the model's air columns
and Bodhaine et al. 1999 cross sections, single-scattering albedo 1,
Rayleigh phase-function moments, Lambertian ground) with 32 streams; its
mean intensity (direct + diffuse, up and down) times 4 pi is the actinic
flux per unit extraterrestrial flux.  DISORT is plane-parallel, the model
pseudo-spherical: at SZA <= 60 deg and these altitudes the direct beams
agree to 0.2 % (checked below).

Measured (2026-12, 300-420 nm in 20 nm bins, albedo 0 and 0.3, SZA 30 and
60 deg, 10/24/32 km): model / DISORT total actinic flux 0.970-0.995, diffuse
part alone 0.953-0.984 (the model's diffuse light is 2-5 % low, lowest at
310 nm), so the radiative transfer does not explain a J(NO2) above the
measurement (docs/photolysis.md).
"""
import numpy as np
import pytest

pydisort = pytest.importorskip("pydisort")
torch = pytest.importorskip("torch")

from boxchem.photolysis.actinic import flux_grid, layered_atmosphere  # noqa: E402
from boxchem.photolysis.rayleigh import rayleigh_cross_section  # noqa: E402
from boxchem.photolysis.spectrum import extraterrestrial_flux  # noqa: E402

STREAMS = 32
EDGES = np.arange(300.0, 421.0, 20.0)


def _disort_at_level(dtau, mu0, albedo, level):
    """DISORT (Stamnes et al. 1988) at the top of layer ``level``: (direct, total) actinic flux per unit F0.

    ``dtau`` (n_bins, n_layers) vertical Rayleigh optical depths, top first."""
    torch.set_num_threads(1)
    n_bins, n_lay = dtau.shape
    direct, total = np.empty(n_bins), np.empty(n_bins)
    f64 = torch.float64
    for i in range(n_bins):
        op = pydisort.DisortOptions().flags("usrtau,lamber,quiet,onlyfl")
        op.ds().nlyr, op.ds().nstr, op.ds().nmom, op.ds().nphase = n_lay, STREAMS, STREAMS, STREAMS
        op.nwave(1).ncol(1)
        op.user_tau(np.array([float(dtau[i, :level].sum())]))
        solver = pydisort.Disort(op)
        prop = torch.zeros((1, 1, n_lay, 2 + STREAMS), dtype=f64)
        prop[..., 0] = torch.tensor(dtau[i], dtype=f64)
        prop[..., 1] = 1.0 - 1e-9                       # conservative scattering
        prop[..., 2:] = pydisort.scattering_moments(STREAMS, "rayleigh")
        solver.forward(prop, umu0=torch.tensor([mu0], dtype=f64), phi0=torch.tensor([0.0], dtype=f64),
                       fbeam=torch.tensor([[1.0]], dtype=f64), albedo=torch.tensor([[albedo]], dtype=f64),
                       fluor=torch.zeros((1, 1), dtype=f64), fisot=torch.zeros((1, 1), dtype=f64))
        out = solver.gather_flx()[0, 0, 0].numpy()      # rfldir, fldn, flup, dfdt, uavg, ...
        direct[i] = out[pydisort.kIRFLDIR] / mu0
        total[i] = 4.0 * np.pi * out[pydisort.kIUAVG]
    return direct, total


def _model_and_reference(altitude_m, sza, albedo):
    atm = layered_atmosphere(altitude_m)
    sigma = rayleigh_cross_section(0.5 * (EDGES[1:] + EDGES[:-1]))
    dtau = sigma[:, None] * atm.air_column[None, :]
    mu0 = float(np.cos(np.radians(sza)))
    ref_direct, ref_total = _disort_at_level(dtau, mu0, albedo, atm.box_level)
    d, s = flux_grid([sza], altitude_m, [300.0], albedo=albedo, absorbers=(), wavelength_edges_nm=EDGES,
                     components=True)
    f0 = extraterrestrial_flux(EDGES)
    return d[0, 0] / f0, s[0, 0] / f0, ref_direct, ref_total


@pytest.mark.parametrize("altitude_m, sza, albedo", [(24_000.0, 30.0, 0.0), (24_000.0, 30.0, 0.3),
                                                    (24_000.0, 60.0, 0.0), (24_000.0, 60.0, 0.3),
                                                    (10_000.0, 60.0, 0.3), (32_000.0, 30.0, 0.0)])
def test_actinic_flux_matches_disort_in_rayleigh_atmosphere(altitude_m, sza, albedo):
    # reference: DISORT (Stamnes et al. 1988, Appl. Opt. 27, 2502), run here on the same layers.
    # Total actinic flux within 4 % (measured 0.970-0.995), diffuse part within 6 % (0.953-0.984);
    # the direct beams (pseudo-spherical vs plane-parallel) within 0.3 %.  A factor-2 error in
    # the diffuse light moves the total by 15-40 % and fails.
    direct, diffuse, ref_direct, ref_total = _model_and_reference(altitude_m, sza, albedo)
    np.testing.assert_allclose(direct, ref_direct, rtol=3e-3)
    np.testing.assert_allclose(direct + diffuse, ref_total, rtol=0.04)
    np.testing.assert_allclose(diffuse, ref_total - ref_direct, rtol=0.06)


def test_albedo_effect_matches_disort():
    # The light added by a Lambertian ground of albedo 0.3 at 24 km, SZA 30 deg (the balloon case of
    # docs/photolysis.md): model against DISORT (Stamnes et al. 1988) within 5 %.  Counting the
    # reflected light twice or as irradiance instead of actinic flux would be off by ~50-100 %.
    d0, s0, _, t0 = _model_and_reference(24_000.0, 30.0, 0.0)
    d3, s3, _, t3 = _model_and_reference(24_000.0, 30.0, 0.3)
    np.testing.assert_allclose((d3 + s3) - (d0 + s0), t3 - t0, rtol=0.05)
