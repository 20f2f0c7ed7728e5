"""J-values at reference conditions, table interpolation, l m n fitting and the jvalues command."""
from __future__ import annotations

import warnings

import numpy as np
import pytest

from boxchem.cli import main
from boxchem.photolysis.actinic import flux_grid
from boxchem.photolysis.crosssections import cross_section_data, quantum_yield_data
from boxchem.photolysis.fitting import fit_lmn
from boxchem.photolysis.jtable import integrate_j, spectral_product
from boxchem.photolysis.spectrum import model_wavelength_edges

EDGES = model_wavelength_edges()


def _j(xs, qy, sza, altitude_m, ozone_DU=300.0, temperature_K=220.0, albedo=0.3):
    flux = flux_grid(np.atleast_1d(sza), altitude_m, [ozone_DU], albedo=albedo)[:, 0]
    pairs = [(cross_section_data(xs), quantum_yield_data(qy))]
    return integrate_j(flux, spectral_product(pairs, EDGES, [temperature_K]), EDGES)[:, 0, 0]


# Reference values are typical published magnitudes, recalled from memory (no table at hand):
# J(NO2) ~ 1e-2 s-1 for high sun in the lower stratosphere; J(O3 -> O1D) ~ 5e-5 s-1 at
# 20 km for SZA 30; J(O2) ~ 1e-10 s-1 at 30 km overhead-ish sun, ~1e-12 at 20 km; J(Cl2O2)
# ~ 1-3e-3 s-1 at 20 km for SZA 60.  Factor 2-3 is allowed (4 for J(O2)): the data sets are
# recalled approximations (10-30 %), the ozone profile is idealised, the Schumann-Runge
# bands are bin-averaged, and the recalled references themselves span such a range.
@pytest.mark.parametrize("xs, qy, sza, z, expected, factor", [
    ("NO2", "NO2", 30.0, 20_000.0, 1.2e-2, 2.0),
    ("O3", "O3_O1D", 30.0, 20_000.0, 5.0e-5, 3.0),
    ("O2", 1.0, 30.0, 30_000.0, 1.0e-10, 4.0),
    ("Cl2O2", 1.0, 60.0, 20_000.0, 2.0e-3, 2.5),
])
def test_reference_j_values(xs, qy, sza, z, expected, factor):
    j = float(_j(xs, qy, sza, z)[0])
    assert expected / factor < j < expected * factor, j


def test_j_zero_beyond_horizon_positive_before():
    j = _j("Cl2O2", 1.0, [92.0, 96.0], 20_000.0)
    assert j[0] > 0.0 and j[1] == 0.0


def test_rates_table_matches_direct_integral_off_grid():
    from boxchem.mechanism import load_mechanism
    from boxchem.photolysis.rates import PhotolysisRates

    mech = load_mechanism("stratosphere")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rates = PhotolysisRates(mech, altitude_m=20_000.0)
    col = mech.reaction_ids.index("j_no2")
    for sza, oz, t in ((37.0, 280.0, 213.0), (86.3, 320.0, 195.0), (93.1, 200.0, 230.0)):
        direct = float(_j("NO2", "NO2", sza, 20_000.0, oz, t)[0])
        # interpolation error of log J on the default grids: within 3 % (common practice, no source)
        assert rates(sza, oz, t)[col] == pytest.approx(direct, rel=0.03, abs=0)
    assert np.all(rates(96.0, 300.0, 220.0) == 0.0)
    assert rates.source["j_no2"] == "spectral"


def test_fit_lmn_recovers_known_parameters():
    sza = np.linspace(0.0, 84.0, 30)
    c = np.cos(np.radians(sza))
    j = 2.0e-3 * c**0.8 * np.exp(-0.35 / c)          # invented shape, exact form
    l, m, n, rms = fit_lmn(sza, j)
    assert (l, m, n) == pytest.approx((2.0e-3, 0.8, 0.35), rel=1e-5, abs=0)
    assert rms < 1e-8


def test_fit_lmn_with_altitude_recovers_what_runs_evaluate_up_to_the_horizon():
    # J curve produced by the runs' own parametric evaluation at 20 km, to 94 deg
    from boxchem.mechanism import parse_mechanism
    from boxchem.photolysis.rates import PhotolysisRates
    mech = parse_mechanism("[species]\nX lumped\nY lumped\n[reactions]\n"
                           "jx X + hv -> Y photolysis l=2.0e-3 m=0.8 n=0.35\n")
    rates = PhotolysisRates(mech, altitude_m=20_000.0, method="parametric")
    sza = np.linspace(0.0, 94.0, 60)
    j = rates(sza)[:, 0]
    l, m, n, rms = fit_lmn(sza, j, altitude_m=20_000.0)
    # the fit inverts the runs' form exactly (common practice, no source)
    assert (l, m, n) == pytest.approx((2.0e-3, 0.8, 0.35), rel=1e-4, abs=0)
    assert rms < 1e-3      # runs interpolate the air mass on a 0.01 deg grid


def test_jvalues_command_csv(capsys):
    assert main(["jvalues", "stratosphere", "--sza", "30", "92", "96", "--altitude", "20km",
                 "--ozone-column", "300DU", "--format", "csv"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert lines[0].split(",")[:4] == ["id", "equation", "sza", "j"]
    no2 = [ln for ln in lines if ln.startswith("j_no2,")]
    assert len(no2) == 3
    j = [float(ln.split(",")[-2]) for ln in no2]
    assert j[0] > j[1] > 0.0 and j[2] == 0.0


def test_jvalues_lab_file_ratio(tmp_path, capsys):
    data = cross_section_data("Cl2O2")
    lab = tmp_path / "Cl2O2.csv"          # a plain lab file takes its species from the file name
    wl = data.wavelength_nm
    # a "lab" spectrum 10 % above the shipped one: the ratio must come out 1.1
    lab.write_text("wavelength (nm),cross section (cm2)\n"
                   + "".join(f"{w:g},{1.1 * s:.6e}\n" for w, s in zip(wl, data(wl, 220.0))))
    assert main(["jvalues", "--cross-section", str(lab), "--sza", "60", "--temperature", "220"]) == 0
    out = capsys.readouterr().out
    assert "Cl2O2 (file)" in out
    ratio = float(out.split("ratio file/shipped = ")[1].split()[0])
    # the lab file samples the shipped table at its own points, so only the 1.1 remains
    assert ratio == pytest.approx(1.1, rel=0.01, abs=0)


def test_jvalues_errors_are_reported(capsys):
    assert main(["jvalues", "stratosphere", "--altitude", "20 parsecs"]) == 2
    assert "--altitude" in capsys.readouterr().err


def test_j_of_a_flat_cross_section_above_the_atmosphere_is_the_photon_flux_integral(tmp_path):
    # J = integral sigma phi F dlambda (the definition of a photolysis frequency, e.g. Seinfeld
    # and Pandis 2016, ch. 4).  With a flat sigma = 1e-20 cm2, phi = 1 and nothing between the
    # sun and the box, J = sigma x the solar photon flux integrated over the model grid.  The
    # reference photon flux comes from the ASTM E490-00a table shipped with pyspectral,
    # converted to photons with E = h c / lambda (exact SI constants), independently of the
    # binned spectrum; 0.5 % is the accuracy required of the binned spectrum (test_spectrum.py).
    pyspectral = pytest.importorskip("pyspectral")
    from pathlib import Path
    table = np.loadtxt(Path(pyspectral.__file__).resolve().parent / "data" / "e490_00a.dat", comments="#")
    wl, irr = table[:, 0] * 1000.0, table[:, 1] * 1e-3                       # nm, W m-2 nm-1
    grid = np.union1d(wl[(wl > EDGES[0]) & (wl < EDGES[-1])], EDGES)
    photons = np.interp(grid, wl, irr) * grid * 1e-9 / (6.62607015e-34 * 299792458.0) * 1e-4  # cm-2 s-1 nm-1
    reference = 1e-20 * np.trapezoid(photons, grid)
    lab = tmp_path / "flat.csv"
    lab.write_text(f"wavelength (nm),cross section (cm2)\n{EDGES[0]:g},1e-20\n{EDGES[-1]:g},1e-20\n")
    pairs = [(cross_section_data(lab), quantum_yield_data(1.0))]
    flux = flux_grid([0.0, 60.0], 20_000.0, [300.0], absorbers=(), rayleigh=False, diffuse=False)[:, 0]
    j = integrate_j(flux, spectral_product(pairs, EDGES, [220.0]), EDGES)[:, 0, 0]
    assert j[0] == pytest.approx(reference, rel=5e-3, abs=0)
    # nothing absorbs or scatters: the sun's elevation does not matter (common practice, no source)
    assert j[1] == pytest.approx(j[0], rel=1e-12, abs=0)
