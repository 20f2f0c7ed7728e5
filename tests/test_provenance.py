"""Provenance: a result file holds what ran, and ``boxchem rerun`` reproduces it from the file alone.

The checks are exact (common practice, no source): the same inputs on the same
machine give the same numbers; edits of the input files after the run must
not change a re-run.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from boxchem.cli import main
from boxchem.io import open_result

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "lab-spectrum"
CHANGED = ('clo_clo_m  ClO + ClO + M -> Cl2O2 + M   falloff k0=2.0e-32 n=4.0 kinf=3.0e-12 m=1.5 '
           'ref="invented test value"')


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    folder = tmp_path_factory.mktemp("prov")
    for name in ("base.toml", "Cl2O2_lab.csv"):
        (folder / name).write_text((EXAMPLE / name).read_text())
    (folder / "mine.mech").write_text(
        '# a lab test\nextends "stratosphere"\n[changed reactions]\n' + CHANGED + "\n"
        "j_cl2o2  Cl2O2 + hv -> Cl + ClOO  photolysis data=Cl2O2_lab.csv\n"
        "[dropped reactions]\nhet_hocl_hcl_sa\n")
    toml = (folder / "base.toml").read_text().replace('mechanism = "stratosphere"', 'mechanism = "mine.mech"')
    (folder / "s.toml").write_text(toml)
    out = folder / "run.nc"
    assert main(["run", str(folder / "s.toml"), "-o", str(out), "-q", "--scale", "cl_o3=1.1",
                 "--set", 'run.duration="3 h"', "--set", 'run.start="2026-09-15T10:00:00Z"']) == 0
    return folder, out


def test_result_holds_every_mechanism_file_and_the_command(result):
    folder, out = result
    ds = open_result(out)
    files = json.loads(ds.attrs["mechanism_files"])
    assert [Path(f["path"]).name for f in files] == ["mine.mech", "stratosphere.mech"]
    assert files[1]["parent"] == 0 and files[1]["reference"] == "stratosphere"
    text = ds.attrs["mechanism_text"]
    assert (folder / "mine.mech").read_text() in text
    assert Path(files[1]["path"]).read_text() in text
    assert ds.attrs["command_line"].startswith("boxchem run ") and "--scale cl_o3=1.1" in ds.attrs["command_line"]
    changes = ds.attrs["mechanism_changes"].splitlines()
    assert [c.split()[0] + " " + c.split()[1] for c in changes] == [
        "changed clo_clo_m", "changed j_cl2o2", "dropped het_hocl_hcl_sa"]
    assert ds.attrs["Conventions"].startswith("CF-")


def test_reaction_definitions_and_references_are_coordinates(result):
    _, out = result
    ds = open_result(out)
    assert ds["reaction_definition"].dims == ("reaction",) and "reaction_definition" in ds.coords
    dimer = ds.sel(reaction="clo_clo_m")
    assert str(dimer.reaction_definition.values) == ('falloff k0=2.0e-32 n=4.0 kinf=3.0e-12 m=1.5 '
                                                     'ref="invented test value"')
    assert str(dimer.reaction_reference.values) == "invented test value"
    assert "het_hocl_hcl_sa" not in ds.reaction.values
    assert str(ds.sel(reaction="j_cl2o2").photolysis_data.values).endswith("Cl2O2_lab.csv")
    # an unchanged reaction keeps the shipped definition and its source
    assert "JPL" in str(ds.sel(reaction="cl_o3").reaction_reference.values)


def test_rerun_gives_the_same_numbers_after_the_inputs_were_edited(result, capsys):
    folder, out = result
    # edits after the run: none of them may reach the re-run
    (folder / "mine.mech").unlink()
    (folder / "s.toml").write_text("not a scenario any more")
    lab = (folder / "Cl2O2_lab.csv").read_text().replace("e-18", "e-17")
    (folder / "Cl2O2_lab.csv").write_text(lab)
    again = folder / "again.nc"
    assert main(["rerun", str(out), "-o", str(again), "-q"]) == 0
    captured = capsys.readouterr()
    assert "result: matches" in captured.out and "Cl2O2_lab.csv: changed since the run" in captured.err
    a, b = open_result(out), open_result(again)
    for name in ("number_density", "rate_coefficient", "reaction_rate", "cycle_rate"):
        np.testing.assert_array_equal(a[name].values, b[name].values)
    assert a.attrs["mechanism_sha256"] == b.attrs["mechanism_sha256"]
    assert b.attrs["command_line"].startswith("boxchem rerun")
    # the lab file as it is now (10 x larger) does change the result, and rerun says so
    assert main(["rerun", str(out), "-o", str(folder / "disk.nc"), "-q", "--data-from-disk"]) == 1
    assert "result: DIFFERS" in capsys.readouterr().out


def test_rerun_of_a_file_without_provenance_says_why(tmp_path, capsys):
    import xarray as xr
    xr.Dataset(attrs={"scenario": "x"}).to_netcdf(tmp_path / "old.nc")
    assert main(["rerun", str(tmp_path / "old.nc")]) == 2
    assert "holds no mechanism text" in capsys.readouterr().err
