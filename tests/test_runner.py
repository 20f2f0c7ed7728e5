"""The whole pipeline, scenario file -> Dataset, against closed forms and the output contract."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import boxchem
from boxchem.errors import IntegrationError
from boxchem.progress import ProgressBar
from boxchem.scenario import load_scenario

DATA = Path(__file__).parent / "data"
CHAIN = DATA / "runner_chain.toml"
K1, K2, A0 = 1e-4, 5e-5, 1e9       # values of tests/data/runner_chain.mech / .toml


def seconds(ds):
    return (ds.time - ds.time[0]).values / np.timedelta64(1, "s")


def chain_solution(t, k1=K1, k2=K2, a0=A0):
    """A -> B -> C, first order: Bateman (1910), Proc. Cambridge Philos. Soc. 15, 423."""
    a = a0 * np.exp(-k1 * t)
    b = a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))
    return a, b, a0 - a - b


@pytest.fixture(scope="module")
def chain():
    return boxchem.run(CHAIN, **{"solver.rtol": 1e-7})


def test_chain_matches_closed_form(chain):
    t = seconds(chain)
    for name, exact in zip("ABC", chain_solution(t)):
        got = chain.number_density.sel(species=name).values
        # closed form above (Bateman 1910); tolerance: rtol 1e-7 per step over ~1e3 steps
        np.testing.assert_allclose(got, exact, rtol=0, atol=1e-6 * A0)


def test_output_times_are_every_interval_to_the_end(chain):
    t = seconds(chain)
    np.testing.assert_array_equal(t, np.arange(13) * 7200.0)
    assert chain.time.values[0] == np.datetime64("2026-09-01T00:00:00", "ns")


def test_rates_families_cycles_and_fixed_species(chain):
    nd = chain.number_density
    a, b = nd.sel(species="A"), nd.sel(species="B")
    k = chain.rate_coefficient
    np.testing.assert_allclose(k.sel(reaction="a_to_b"), K1)
    np.testing.assert_allclose(chain.reaction_rate.sel(reaction="a_to_b"), K1 * a, rtol=1e-12)
    np.testing.assert_allclose(chain.reaction_rate.sel(reaction="b_to_c"), K2 * b, rtol=1e-12)
    np.testing.assert_allclose(chain.family_number_density.sel(family="AB"), a + b, rtol=1e-12)
    np.testing.assert_allclose(chain.cycle_rate.sel(cycle="chain"), K2 * b, rtol=1e-12)
    # ideal gas: n = p / (k_B T), k_B = 1.380649e-23 J K-1 (CODATA 2018 exact value)
    air = 7000.0 / (1.380649e-23 * 200.0) * 1e-6
    np.testing.assert_allclose(chain.air_number_density, air, rtol=1e-12)
    np.testing.assert_allclose(nd.sel(species="M"), air, rtol=1e-12)
    np.testing.assert_allclose(chain.mole_fraction.sel(species="O2"), 0.2095, rtol=1e-12)  # mechanism value
    np.testing.assert_allclose(chain.mole_fraction.sel(species="N2"), 0.7808, rtol=1e-12)  # scenario value
    np.testing.assert_allclose(chain.mole_fraction.sel(species="A"), a / air, rtol=1e-12)


def test_dataset_contract(chain):
    dims = {"number_density": ("time", "species"), "mole_fraction": ("time", "species"),
            "rate_coefficient": ("time", "reaction"), "reaction_rate": ("time", "reaction"),
            "family_number_density": ("time", "family"), "cycle_rate": ("time", "cycle"),
            "solar_zenith_angle": ("time",), "temperature": ("time",), "pressure": ("time",),
            "air_number_density": ("time",)}
    units = {"number_density": "cm-3", "mole_fraction": "1", "reaction_rate": "cm-3 s-1",
             "family_number_density": "cm-3", "cycle_rate": "cm-3 s-1",
             "solar_zenith_angle": "degree", "temperature": "K", "pressure": "Pa",
             "air_number_density": "cm-3"}
    for name, d in dims.items():
        assert chain[name].dims == d, name
        assert chain[name].attrs.get("long_name"), name
    for name, u in units.items():
        assert chain[name].attrs["units"] == u, name
    assert chain.temperature.attrs["standard_name"] == "air_temperature"
    assert chain.pressure.attrs["standard_name"] == "air_pressure"
    assert chain.solar_zenith_angle.attrs["standard_name"] == "solar_zenith_angle"
    assert chain.time.dtype == np.dtype("datetime64[ns]")
    assert list(chain.species.values) == ["A", "B", "C", "D", "M", "O2", "N2"]
    assert list(chain.reaction.values) == ["a_to_b", "b_to_c", "d_loss"]
    assert list(chain.equation.values) == ["A -> B", "B -> C", "D + O2 -> C + O2"]
    assert list(chain.rate_coefficient_units.values) == ["s-1", "s-1", "cm3 s-1"]
    assert list(chain.family.values) == ["AB"] and list(chain.cycle.values) == ["chain"]
    # arrays the budget diagnostics read (products minus reactants; family weights)
    np.testing.assert_array_equal(chain.stoichiometry.sel(reaction="a_to_b"), [-1, 1, 0, 0, 0, 0, 0])
    np.testing.assert_array_equal(chain.stoichiometry.sel(reaction="d_loss"), [0, 0, 1, -1, 0, 0, 0])
    np.testing.assert_array_equal(chain.family_weight.sel(family="AB"), [1, 1, 0, 0, 0, 0, 0])
    np.testing.assert_array_equal(chain.cycle_coefficient.sel(cycle="chain"), [0, 1, 0])
    attrs = chain.attrs
    assert attrs["Conventions"] == "CF-1.10"
    assert attrs["boxchem_version"] == boxchem.__version__
    assert attrs["scenario"] == CHAIN.read_text()
    mech = load_scenario(CHAIN).mechanism
    assert attrs["mechanism_sha256"] == mech.text_sha256
    assert attrs["solver_rtol"] == 1e-7 and attrs["solver_atol"] == 1e-3 and attrs["solver_atol_units"] == "cm-3"
    assert attrs["scenario_overrides"] == '{"solver.rtol": "1e-07"}'
    assert attrs["integration_status"] == "success"
    for counter in ("steps", "rejected_steps", "rhs_evaluations", "jacobian_evaluations",
                    "lu_decompositions"):
        assert isinstance(attrs[f"solver_{counter}"], int)
    # work bound: a linear 2-species chain over 1 day at rtol 1e-7 (common practice, no source:
    # a third-order method needs of order (1/rtol)^(1/3) steps per e-folding)
    assert 10 < attrs["solver_steps"] < 2000


def test_scale_multiplies_the_rate_coefficient():
    ds = boxchem.run(CHAIN, scale={"a_to_b": 2.0}, **{"solver.rtol": 1e-7})
    np.testing.assert_allclose(ds.rate_coefficient.sel(reaction="a_to_b"), 2 * K1)
    a, b, c = chain_solution(seconds(ds), k1=2 * K1)   # Bateman (1910) with k1 doubled
    np.testing.assert_allclose(ds.number_density.sel(species="B"), b, rtol=0, atol=1e-6 * A0)


def test_environment_series_and_psc_rule_reach_the_output():
    s = load_scenario(CHAIN).with_overrides(**{
        "environment.temperature": {"times": ["0 h", "24 h"], "values": ["190 K", "200 K"]},
        "environment.psc_surface_area": {"rule": "threshold", "area": "2 um2 cm-3",
                                         "below": "195 K", "width": "1 K"}})
    ds = boxchem.run(s)
    t = seconds(ds)
    temperature = 190.0 + 10.0 * t / 86400.0
    np.testing.assert_allclose(ds.temperature, temperature, rtol=1e-12)
    x = np.clip(195.0 - temperature, 0.0, 1.0)          # smoothstep over 1 K below 195 K
    np.testing.assert_allclose(ds.psc_surface_area, 2e-8 * x * x * (3 - 2 * x), rtol=1e-12)
    assert ds.psc_surface_area[0] == 2e-8 and ds.psc_surface_area[-1] == 0.0


def test_integration_failure_keeps_the_result_so_far():
    with pytest.raises(IntegrationError) as info:
        boxchem.run(DATA / "runner_blowup.toml")
    exc = info.value
    # dA/dt = k A^2 blows up at t = 1/(k A0) = 1e4 s (closed form A0 / (1 - k A0 t))
    assert "2026-09-01T02:46" in str(exc.time) and exc.worst_species == "A"
    partial = exc.partial_result
    assert partial.attrs["integration_status"] == "failed"
    t = seconds(partial)
    np.testing.assert_array_equal(t, [0.0, 3600.0, 7200.0])
    exact = 1e9 / (1 - 1e-13 * 1e9 * t)
    np.testing.assert_allclose(partial.number_density.sel(species="A"), exact, rtol=1e-3)


def test_progress_callable_sees_every_output_time():
    seen = []
    boxchem.run(CHAIN, progress=seen.append)
    np.testing.assert_allclose(seen, np.arange(1, 13) * 7200.0)


def test_progress_bar_draws_only_when_asked():
    import io
    quiet = io.StringIO()
    bar = ProgressBar(2 * 86400.0, stream=quiet)        # StringIO is not a terminal
    bar(86400.0)
    bar.close()
    assert quiet.getvalue() == ""
    loud = io.StringIO()
    bar = ProgressBar(2 * 86400.0, stream=loud, force=True, min_interval_s=0.0)
    bar(86400.0)
    bar.close()
    assert "day    1.00 / 2.00" in loud.getvalue() and loud.getvalue().endswith("\n")
    assert "#" * 15 + "-" * 15 in loud.getvalue()


# -- the shipped scenario ---------------------------------------------------------------

def _atoms(ds, mechanism, element):
    variable = [s.name for s in mechanism.species if not s.fixed]
    weights = np.array([mechanism.species_by_name(n).atoms(element) for n in variable], float)
    return ds.number_density.sel(species=variable).values @ weights


def _closing_scale(mechanism, element):
    """Reactions that move ``element`` atoms into or out of fixed species (e.g. N2O -> N2)."""
    out = {}
    for r in mechanism.reactions:
        def count(terms):
            return sum(t.coefficient * mechanism.species_by_name(t.species).atoms(element)
                       for t in terms if not mechanism.species_by_name(t.species).fixed)
        if abs(count(r.reactants) - count(r.products)) > 0:
            out[r.id] = 0.0
    return out


@pytest.mark.parametrize("method", ["parametric", "spectral"])
def test_shipped_scenario_conserves_cl_br_n_atoms(method):
    if method == "spectral":
        pytest.importorskip("boxchem.photolysis.jtable")
    scenario = load_scenario("stratosphere-box")
    mech = scenario.mechanism
    # N atoms leave to fixed N2 via N2O photolysis and O(1D) + N2O -> N2 + O2:
    # switch those off so that N is closed as well as Cl and Br
    off = _closing_scale(mech, "N")
    assert set(off) == {"o1d_n2o_b", "j_n2o"}
    assert not _closing_scale(mech, "Cl") and not _closing_scale(mech, "Br")
    ds = boxchem.run(scenario, scale=off, duration="2 d",
                     **{"photolysis.method": method})
    for element in ("Cl", "Br", "N"):
        # in mole fraction: the scenario warms, so the air expands and number densities
        # follow it (the box conserves mixing ratios of its elements)
        total = _atoms(ds, mech, element) / ds.air_number_density.values
        # conservation to 1e-6 relative (issue 3, section 4); common practice, no source
        np.testing.assert_allclose(total, total[0], rtol=1e-6, err_msg=element)
    # the sun rises and sets at 70 S in early September: both day and night at the box
    sza = ds.solar_zenith_angle.values
    assert sza.min() < 85.0 and sza.max() > 95.0
    j = ds.rate_coefficient.sel(reaction="j_no2").values
    night = sza >= 90.0 + np.degrees(np.arccos(6371008.8 / (6371008.8 + 18500.0)))
    assert np.all(j[night] == 0.0) and np.all(j[sza < 85.0] > 0.0)
    assert (ds.number_density >= 0).all()


def test_location_by_pressure_uses_the_standard_atmosphere():
    s = load_scenario(CHAIN).with_overrides(**{
        "location.altitude": None, "location.pressure": "54.75 hPa",
        "environment.pressure": None, "environment.temperature": None})
    ds = boxchem.run(s, duration="2 h")
    # U.S. Standard Atmosphere 1976: 20 km geopotential, 5474.9 Pa, 216.65 K (NOAA/NASA/USAF 1976, Table I)
    np.testing.assert_allclose(ds.pressure, 5475.0, rtol=1e-12)
    np.testing.assert_allclose(ds.temperature, 216.65, atol=0.01)
    # 20 km geopotential is z = r0 H / (r0 - H) = 20063 m geometric, r0 = 6356.766 km
    # (USSA 1976, recalled from memory); 54.75 hPa lies 0.1 m below the layer base
    assert float(ds.altitude) == pytest.approx(20000.0 * 6356766.0 / (6356766.0 - 20000.0), rel=0, abs=1.0)


def test_trajectory_file_drives_the_box(tmp_path):
    (tmp_path / "parcel.csv").write_text(
        "# invented parcel path\n"
        "time,temperature_K,pressure_hPa,latitude,longitude\n"
        "2026-09-01T00:00:00Z,200,70,-70,0\n"
        "2026-09-02T00:00:00Z,190,60,-60,90\n")
    text = CHAIN.read_text().replace('temperature = "200 K"\npressure = "70 hPa"\n',
                                     'trajectory = "parcel.csv"\n')
    text = text.replace("latitude = -70.0\nlongitude = 0.0\n", "")
    text = text.replace('"runner_chain.mech"', f'"{DATA / "runner_chain.mech"}"')
    path = tmp_path / "parcel.toml"
    path.write_text(text)
    ds = boxchem.run(path)
    frac = seconds(ds) / 86400.0
    np.testing.assert_allclose(ds.temperature, 200 - 10 * frac, rtol=1e-12)
    np.testing.assert_allclose(ds.pressure, 7000 - 1000 * frac, rtol=1e-12)
    np.testing.assert_allclose(ds.latitude, -70 + 10 * frac, rtol=1e-12)
    np.testing.assert_allclose(ds.longitude, 90 * frac, atol=1e-9)
    # the same parcel as a netCDF trajectory (chosen by the .nc suffix) gives the same box
    import xarray as xr
    xr.Dataset({"temperature_K": ("time", [200.0, 190.0]), "pressure_hPa": ("time", [70.0, 60.0]),
                "latitude": ("time", [-70.0, -60.0]), "longitude": ("time", [0.0, 90.0])},
               coords={"time": np.array(["2026-09-01T00:00", "2026-09-02T00:00"], dtype="datetime64[ns]")}
               ).to_netcdf(tmp_path / "parcel.nc")
    nc_path = tmp_path / "parcel_nc.toml"
    nc_path.write_text(text.replace('"parcel.csv"', '"parcel.nc"'))
    ds_nc = boxchem.run(nc_path)
    for name in ("temperature", "pressure", "latitude", "longitude"):
        np.testing.assert_allclose(ds_nc[name], ds[name], rtol=1e-12, atol=1e-9)
    # a key given both ways is an error
    path.write_text(text.replace('[environment]\n', '[environment]\ntemperature = "200 K"\n'))
    with pytest.raises(boxchem.ScenarioError, match=r"\[environment\]\.temperature: given both"):
        load_scenario(path)
