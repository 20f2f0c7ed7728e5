"""A user's spectrum in a run, the scenario form of ``boxchem jvalues``, and the
overhead ozone column following the box (issue 4, user-facing parts)."""
from __future__ import annotations

import csv
import io
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from boxchem.cli import main
from boxchem.errors import DataFileError, MechanismError, ScenarioError
from boxchem.mechanism import load_mechanism
from boxchem.photolysis.crosssections import cross_section_data
from boxchem.photolysis.rates import PhotolysisRates
from boxchem.scenario import Scenario, load_scenario

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "lab-spectrum"
LAB_FACTOR = 1.3
#: coarse J-table grids: these tests compare J with J on the same grid
GRIDS = dict(temperature_grid=[190.0, 230.0], ozone_grid_DU=[150.0, 300.0])
SZA = np.array([20.0, 60.0, 85.0, 91.0, 93.5])


def _write_lab_file(path: Path, factor: float) -> None:
    """Plain two-column lab file: the shipped Cl2O2 table times ``factor`` on its own wavelengths."""
    shipped = cross_section_data("Cl2O2")
    sigma = np.ravel(shipped.at_temperature(298.0))
    rows = "\n".join(f"{float(w)!r},{float(factor * s)!r}" for w, s in zip(shipped.wavelength_nm, sigma))
    path.write_text(f"wavelength (nm),cross section (cm2)\n{rows}\n", encoding="utf-8")


def _j(mechanism, rid, **kw):
    rates = PhotolysisRates(mechanism, altitude_m=18_500.0, albedo=0.8, **GRIDS, **kw)
    return rates(SZA, 220.0, 200.0)[:, mechanism.reaction_ids.index(rid)]


@pytest.fixture(scope="module")
def stratosphere():
    return load_mechanism("stratosphere")


@pytest.fixture(scope="module")
def j_shipped(stratosphere):
    return _j(stratosphere, "j_cl2o2")


# ---------------------------------------------------------------------------
# 1. [changed reactions] data=PATH, relative to the mechanism file
# ---------------------------------------------------------------------------
def test_replace_with_relative_path_scales_j_by_the_lab_factor(tmp_path, monkeypatch, j_shipped):
    folder = tmp_path / "lab"
    folder.mkdir()
    _write_lab_file(folder / "dimer.csv", LAB_FACTOR)
    (folder / "mine.mech").write_text(
        'extends "stratosphere"\n[changed reactions]\n'
        'j_cl2o2  Cl2O2 + hv -> Cl + ClOO  photolysis data=dimer.csv qy=0.9  ref="test lab file"\n',  # qy as shipped (issue 11)
        encoding="utf-8")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)           # the path must not depend on the working directory
    mech = load_mechanism(str(folder / "mine.mech"))
    assert Path(mech.reactions[mech.reaction_ids.index("j_cl2o2")].parameters["data"]) == \
        (folder / "dimer.csv").resolve()
    j_lab = _j(mech, "j_cl2o2")
    lit = SZA < 94.0
    assert np.all(j_shipped[lit] > 0)
    # a constant-ratio cross section on the same grid scales J exactly (common practice, no source)
    np.testing.assert_allclose(j_lab[lit] / j_shipped[lit], LAB_FACTOR, rtol=1e-6)
    # a reaction the [changed reactions] did not touch is unchanged (common practice, no source)
    stratosphere = load_mechanism("stratosphere")
    np.testing.assert_allclose(_j(mech, "j_no2"), _j(stratosphere, "j_no2"), rtol=1e-12)


def test_shipped_example_lab_spectrum_is_the_stated_factor(monkeypatch, tmp_path, j_shipped):
    monkeypatch.chdir(tmp_path)
    mech = load_mechanism(str(EXAMPLE / "cl2o2-lab.mech"))
    j_lab = _j(mech, "j_cl2o2")
    # the example's README says the lab file is 1.3 x the shipped set (our own demo file)
    np.testing.assert_allclose(j_lab[SZA < 94] / j_shipped[SZA < 94], LAB_FACTOR, rtol=1e-5)


def test_missing_relative_data_file_without_lmn_is_an_error_naming_the_path(tmp_path, stratosphere):
    (tmp_path / "m.mech").write_text(
        'extends "stratosphere"\n[changed reactions]\n'
        'j_cl2o2  Cl2O2 + hv -> Cl + ClOO  photolysis data=nothere.csv\n', encoding="utf-8")
    # an error when the mechanism is read (check and run), at the data= column
    with pytest.raises(MechanismError) as info:
        load_mechanism(str(tmp_path / "m.mech"))
    p = info.value.problems[0]
    assert p.location.line == 3 and p.location.text[p.location.column - 1:].startswith("data=")
    assert "nothere.csv" in p.message and "no such file" in p.message


# ---------------------------------------------------------------------------
# 2. scenario key [photolysis].cross_sections
# ---------------------------------------------------------------------------
_SCENARIO = """
[run]
mechanism = "stratosphere"
start = "2026-09-15T00:00:00Z"
duration = "1 d"
output_interval = "3 h"
[location]
latitude = -70.0
altitude = "18.5 km"
[environment]
temperature = "195 K"
pressure = "60 hPa"
ozone_column = "220 DU"
albedo = 0.8
[initial]
O3 = "2.6 ppmv"
H2O = "4 ppmv"
CH4 = "1.3 ppmv"
H2 = "0.5 ppmv"
HCl = "0.6 ppbv"
ClO = "0.3 ppbv"
Cl2O2 = "0.9 ppbv"
ClONO2 = "0.2 ppbv"
"""


def test_scenario_cross_sections_key_feeds_the_run(stratosphere):
    key = load_scenario(EXAMPLE / "lab-scenario-key.toml")
    assert key.photolysis_cross_sections == {"j_cl2o2": (EXAMPLE / "Cl2O2_lab.csv").resolve()}
    base = load_scenario(EXAMPLE / "base.toml")
    from boxchem.runner import prepare
    p_key, p_base = prepare(key.with_overrides(duration="1 h")).photolysis, \
        prepare(base.with_overrides(duration="1 h")).photolysis
    col = stratosphere.reaction_ids.index("j_cl2o2")
    j_key, j_base = p_key(SZA, 220.0, 195.0), p_base(SZA, 220.0, 195.0)
    lit = SZA < 94.0
    # constant-ratio lab file: J scales by the factor (common practice, no source)
    np.testing.assert_allclose(j_key[lit, col] / j_base[lit, col], LAB_FACTOR, rtol=1e-6)
    other = [i for i, r in enumerate(stratosphere.reactions) if r.law == "photolysis" and i != col]
    np.testing.assert_allclose(j_key[:, other], j_base[:, other], rtol=1e-12)


@pytest.mark.parametrize("table, message", [
    ('{ j_cl2o2 = "missing.csv" }', r"\[photolysis\]\.cross_sections\.j_cl2o2: no file .*missing\.csv"),
    ('{ j_cl2o3 = "lab.csv" }', r"\[photolysis\]\.cross_sections\.j_cl2o3: no photolysis reaction "
                                r"'j_cl2o3'.*did you mean 'j_cl2o2'"),
    ('{ cl_o3 = "lab.csv" }', r"\[photolysis\]\.cross_sections\.cl_o3: no photolysis reaction"),
    ('{ j_cl2o2 = 3 }', r"\[photolysis\]\.cross_sections\.j_cl2o2: expected a file path string"),
    ('"lab.csv"', r"\[photolysis\]\.cross_sections: expected a table"),
    ('{ j_cl2o2 = "bad.csv" }', r"\[photolysis\]\.cross_sections\.j_cl2o2: .*bad\.csv:4: "),
])
def test_scenario_cross_sections_errors_name_the_key(tmp_path, stratosphere, table, message):
    _write_lab_file(tmp_path / "lab.csv", LAB_FACTOR)
    (tmp_path / "bad.csv").write_text("wavelength_nm,sigma_cm2\n200,1e-18\n210,2e-18\n205,2e-18\n",
                                      encoding="utf-8")
    text = _SCENARIO + f"[photolysis]\ncross_sections = {table}\n"
    with pytest.raises(ScenarioError, match=message):
        Scenario.from_text(text, base_dir=tmp_path, source="t.toml", mechanism=stratosphere)


def test_scenario_cross_sections_refused_with_the_parametric_method(tmp_path, stratosphere):
    _write_lab_file(tmp_path / "lab.csv", LAB_FACTOR)
    text = _SCENARIO + '[photolysis]\nmethod = "parametric"\ncross_sections = { j_cl2o2 = "lab.csv" }\n'
    with pytest.raises(ScenarioError, match=r"\[photolysis\]\.cross_sections: .*spectral"):
        Scenario.from_text(text, base_dir=tmp_path, source="t.toml", mechanism=stratosphere)


# ---------------------------------------------------------------------------
# 3. boxchem jvalues SCENARIO --day
# ---------------------------------------------------------------------------
def test_jvalues_scenario_form_csv_and_plot(tmp_path, capsys):
    png = tmp_path / "jday.png"
    assert main(["jvalues", str(EXAMPLE / "base.toml"), "--day", "2026-09-15", "--step", "1h",
                 "--format", "csv", "--plot", str(png)]) == 0
    out = capsys.readouterr().out
    rows = list(csv.DictReader(io.StringIO(out)))
    assert {"id", "time", "sza", "j"} <= set(rows[0])
    ids = {r["id"] for r in rows}
    mech = load_mechanism("stratosphere")
    assert ids == {r.id for r in mech.reactions if r.law == "photolysis"}
    assert len(rows) == len(ids) * 25                       # 00:00 to 24:00 every hour
    no2 = {r["time"]: r for r in rows if r["id"] == "j_no2"}
    midnight, noon = no2["2026-09-15T00:00:00Z"], no2["2026-09-15T12:00:00Z"]
    # 70 S, 0 E, 15 September: sun far below the horizon at 00 UTC, up at 12 UTC
    # (solar geometry; pvlib reference below)
    assert float(midnight["j"]) == 0.0
    # J(NO2) ~ 1e-2 s-1 in the sunlit lower stratosphere, nearly flat in SZA up to ~75 deg
    # (typical published magnitude, recalled from memory); factor 3 each way (was only > 1e-3)
    assert 3e-3 < float(noon["j"]) < 3e-2
    pvlib = pytest.importorskip("pvlib")
    ref = pvlib.solarposition.get_solarposition(pd.DatetimeIndex(["2026-09-15T12:00:00Z"]), -70.0, 0.0)
    # SZA against the NREL SPA of pvlib (Reda & Andreas 2004), geometric zenith
    assert float(noon["sza"]) == pytest.approx(float(ref["zenith"].iloc[0]), abs=0.05)
    all_night = [r for r in rows if float(r["sza"]) >= float(r["horizon_sza"])]
    assert all_night and all(float(r["j"]) == 0.0 for r in all_night)   # contract: J = 0 below the horizon
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 10_000


def test_jvalues_scenario_form_text_and_argument_errors(capsys):
    assert main(["jvalues", str(EXAMPLE / "base.toml"), "--day", "2026-09-15", "--step", "2h"]) == 0
    out = capsys.readouterr().out
    assert "j_cl2o2" in out and "24-h mean" in out
    assert main(["jvalues", str(EXAMPLE / "base.toml"), "--sza", "30"]) == 2
    assert "--sza belongs to the mechanism form" in capsys.readouterr().err
    assert main(["jvalues", "stratosphere", "--day", "2026-09-15"]) == 2
    assert "--day belongs to the scenario form" in capsys.readouterr().err
    assert main(["jvalues", str(EXAMPLE / "base.toml"), "--day", "15.9.2026"]) == 2
    assert "expected a UTC date YYYY-MM-DD" in capsys.readouterr().err


def test_jvalues_lab_file_reference_by_file_name(capsys):
    assert main(["jvalues", "--cross-section", str(EXAMPLE / "Cl2O2_lab.csv"), "--sza", "60", "88",
                 "--format", "csv"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    lab = [float(r["j"]) for r in rows if r["id"].endswith("(file)")]
    shipped = [float(r["j"]) for r in rows if r["id"] == "Cl2O2 (shipped)"]
    # the example file is 1.3 x the shipped set (our own demo file; common practice, no source)
    np.testing.assert_allclose(np.array(lab) / np.array(shipped), LAB_FACTOR, rtol=1e-6)


# ---------------------------------------------------------------------------
# 4. ozone_column_follows_box
# ---------------------------------------------------------------------------
def test_ozone_column_following_the_box_raises_j_o1d_as_box_ozone_falls():
    import boxchem
    from boxchem.units import DOBSON_UNIT_CM2

    base = load_scenario(EXAMPLE / "base.toml").with_overrides(duration="1 d", output_interval="6 h")
    plain = boxchem.run(base)
    follow = boxchem.run(base.with_overrides(**{"photolysis.ozone_column_follows_box": True}))
    o3 = follow["number_density"].sel(species="O3").values
    assert o3[-1] < o3[0]                                    # chlorine-activated box loses ozone
    col = follow["ozone_column"].values
    x = o3 / follow["air_number_density"].values
    # the documented rule: column - (x0 - x) [M] H / (1 DU), H = 10 km (common practice, no source)
    expected = 220.0 - (x[0] - x) * follow["air_number_density"].values * 1e6 / DOBSON_UNIT_CM2
    np.testing.assert_allclose(col, expected, rtol=1e-12)
    assert np.all(plain["ozone_column"].values == 220.0)
    sunlit = np.flatnonzero(follow["solar_zenith_angle"].values < 90.0)
    assert sunlit.size
    j_plain = plain["rate_coefficient"].sel(reaction="j_o3_o1d").values[sunlit]
    j_follow = follow["rate_coefficient"].sel(reaction="j_o3_o1d").values[sunlit]
    # less overhead ozone -> more UV-B at the box -> larger J(O3 -> O1D) (Beer-Lambert)
    later = sunlit[col[sunlit] < 220.0 - 0.5]
    assert later.size
    assert np.all(j_follow[np.isin(sunlit, later)] > j_plain[np.isin(sunlit, later)] * 1.001)


def test_ozone_column_follows_box_key_errors(tmp_path, stratosphere):
    for line, message in [
        ('ozone_column_follows_box = 1', r"ozone_column_follows_box: expected true or false"),
        ('ozone_column_follows_box = true\nozone_loss_layer_depth = "-2 km"',
         r"ozone_loss_layer_depth: must be > 0"),
        ('ozone_loss_layer_depth = "5 hPa"', r"ozone_loss_layer_depth"),
    ]:
        with pytest.raises(ScenarioError, match=message):
            Scenario.from_text(_SCENARIO + f"[photolysis]\n{line}\n", base_dir=tmp_path,
                               source="t.toml", mechanism=stratosphere)
