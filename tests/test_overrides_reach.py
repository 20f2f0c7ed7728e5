"""Every override reaches what it overrides, and the result file says what ran (issue 13.1).

Kinds: the mechanism (Python override, ``boxchem run --set``, a sweep value),
a trajectory file, a cross-section file.  The physics checks use the
first-order chain of tests/data/runner_chain.mech, whose closed form
A(t) = A0 exp(-k t) is textbook (Bateman 1910; common practice).
"""
from __future__ import annotations

import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import boxchem
from boxchem.scenario import load_scenario

DATA = Path(__file__).parent / "data"
CHAIN = DATA / "runner_chain.toml"
EXAMPLE = Path(__file__).parent.parent / "examples" / "lab-spectrum"


@pytest.fixture()
def faster_chain(tmp_path):
    """A copy of the chain mechanism with k(a_to_b) doubled, in another folder."""
    folder = tmp_path / "mine"
    folder.mkdir()
    text = (DATA / "runner_chain.mech").read_text().replace("k=1e-4", "k=2e-4")
    path = folder / "fast_chain.mech"
    path.write_text(text)
    return path


def _a_ratio(ds) -> float:
    a = ds.number_density.sel(species="A").values
    return float(a[-1] / a[0])


def test_python_override_of_the_mechanism_runs_that_mechanism(faster_chain):
    ds = boxchem.run(CHAIN, **{"run.mechanism": str(faster_chain), "run.duration": "6 h"})
    # A(6 h)/A0 = exp(-k 21600 s) with the overriding k = 2e-4 s-1 (closed form)
    assert _a_ratio(ds) == pytest.approx(math.exp(-2e-4 * 21600), rel=1e-5)
    assert ds.attrs["mechanism_source"] == str(faster_chain)
    assert ds.attrs["mechanism_sha256"] == boxchem.load_mechanism(faster_chain).text_sha256
    assert "k=2e-4" in ds.attrs["mechanism_text"]
    assert json.loads(ds.attrs["scenario_overrides"])["run.mechanism"] == str(faster_chain)


def test_without_override_the_scenario_mechanism_runs():
    ds = boxchem.run(CHAIN, **{"run.duration": "6 h"})
    assert _a_ratio(ds) == pytest.approx(math.exp(-1e-4 * 21600), rel=1e-5)


def test_cli_set_mechanism_is_read_from_the_working_folder(faster_chain, tmp_path, monkeypatch):
    from boxchem.cli import main
    monkeypatch.chdir(faster_chain.parent)
    out = tmp_path / "out.nc"
    rc = main(["run", str(CHAIN), "-o", str(out), "-q",
               "--set", 'run.mechanism="fast_chain.mech"', "--set", 'run.duration="6 h"'])
    assert rc == 0
    with xr.open_dataset(out) as ds:
        assert _a_ratio(ds) == pytest.approx(math.exp(-2e-4 * 21600), rel=1e-5)
        assert ds.attrs["mechanism_source"] == str(faster_chain.resolve())


def test_sweep_value_of_the_mechanism_reaches_each_member(faster_chain, monkeypatch):
    from boxchem.analysis.sweep import run_member
    monkeypatch.chdir(faster_chain.parent)
    slow = run_member(str(CHAIN), {"run.duration": "6 h"})
    fast = run_member(str(CHAIN), {"run.duration": "6 h", "run.mechanism": "fast_chain.mech"})
    assert _a_ratio(slow) == pytest.approx(math.exp(-1e-4 * 21600), rel=1e-5)
    assert _a_ratio(fast) == pytest.approx(math.exp(-2e-4 * 21600), rel=1e-5)
    assert fast.attrs["mechanism_source"] == str(faster_chain.resolve())


def test_trajectory_override_reaches_the_environment(tmp_path):
    for name, kelvin in (("cold.csv", 190.0), ("warm.csv", 230.0)):
        (tmp_path / name).write_text(f"time,temperature_K,pressure_hPa\n0,{kelvin},70\n"
                                     f"86400,{kelvin},70\n")
    base = load_scenario(CHAIN).with_overrides(**{
        "environment.temperature": None, "environment.pressure": None,
        "environment.trajectory": str(tmp_path / "cold.csv"), "run.duration": "2 h"})
    warm = base.with_overrides(**{"environment.trajectory": str(tmp_path / "warm.csv")})
    ds_cold, ds_warm = boxchem.run(base), boxchem.run(warm)
    np.testing.assert_allclose(ds_cold.temperature.values, 190.0)
    np.testing.assert_allclose(ds_warm.temperature.values, 230.0)
    record = {e["key"]: e for e in json.loads(ds_warm.attrs["input_files"])}
    assert record["[environment].trajectory"]["path"] == str((tmp_path / "warm.csv").resolve())
    assert record["[environment].trajectory"]["text"].startswith("time,temperature_K")


def test_cross_section_override_reaches_photolysis_and_provenance(tmp_path):
    from boxchem.runner import prepare
    from boxchem.io.provenance import input_files
    lab = tmp_path / "lab_copy.csv"
    shutil.copy(EXAMPLE / "Cl2O2_lab.csv", lab)
    base = load_scenario(EXAMPLE / "base.toml").with_overrides(duration="1 h")
    over = base.with_overrides(**{"photolysis.cross_sections": {"j_cl2o2": str(lab)}})
    assert over.photolysis_cross_sections == {"j_cl2o2": lab.resolve()}
    mech = over.mechanism
    col = mech.reaction_ids.index("j_cl2o2")
    sza = np.array([60.0, 80.0])
    j_over = prepare(over).photolysis(sza, 220.0, 195.0)[:, col]
    j_base = prepare(base).photolysis(sza, 220.0, 195.0)[:, col]
    # the lab file differs from the shipped one (its README: a constant factor; common practice)
    assert np.all(np.abs(j_over / j_base - 1.0) > 1e-3)
    record = {e["key"]: e for e in input_files(mech, over)}
    assert record["[photolysis].cross_sections.j_cl2o2"]["path"] == str(lab.resolve())
    assert len(record["[photolysis].cross_sections.j_cl2o2"]["sha256"]) == 64


def test_overriding_path_from_python_is_read_against_the_scenario_folder(faster_chain):
    # Python overrides keep the documented rule: relative paths are read against the scenario's
    # folder (the command line reads them from the working folder instead)
    with pytest.raises(boxchem.ScenarioError, match=r"run.mechanism=.*tests/data/fast_chain.mech"):
        load_scenario(CHAIN).with_overrides(**{"run.mechanism": "fast_chain.mech"})
