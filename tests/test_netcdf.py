"""netCDF writing: round trip with attributes, atomic replacement, and the `boxchem run` command."""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import boxchem
from boxchem.cli import main
from boxchem.io.netcdf import open_result, write_dataset

DATA = Path(__file__).parent / "data"
CHAIN = DATA / "runner_chain.toml"


@pytest.fixture(scope="module")
def result():
    return boxchem.run(CHAIN, **{"solver.rtol": 1e-6})


def test_round_trip_is_identical_including_attributes(result, tmp_path):
    path = write_dataset(result, tmp_path / "run.nc")
    back = open_result(path)
    xr.testing.assert_identical(result, back)
    assert back.time.dtype == np.dtype("datetime64[ns]")
    assert back.attrs["scenario"] == CHAIN.read_text()
    assert back.number_density.encoding["zlib"] is True


def test_file_is_netcdf4_with_cf_time(result, tmp_path):
    import netCDF4
    path = write_dataset(result, tmp_path / "run.nc")
    with netCDF4.Dataset(path) as nc:
        assert nc.data_model == "NETCDF4"
        assert nc["time"].units.startswith("seconds since 2026-09-01")
        assert nc.Conventions == "CF-1.10"
    mask = os.umask(0)
    os.umask(mask)
    assert os.stat(path).st_mode & 0o777 == 0o666 & ~mask   # like any new file, not mkstemp's 0600


def test_failed_write_leaves_nothing_under_the_final_name(result, tmp_path, monkeypatch):
    target = tmp_path / "run.nc"

    def crash(self, path, *args, **kwargs):
        Path(path).write_bytes(b"CDF half written")   # a partial file, then the disk fills up
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", crash)
    with pytest.raises(OSError, match="No space left"):
        write_dataset(result, target)
    assert not target.exists()
    assert list(tmp_path.iterdir()) == []            # the temporary file is removed too


def test_failed_write_keeps_the_previous_file(result, tmp_path, monkeypatch):
    target = tmp_path / "run.nc"
    write_dataset(result, target)
    before = target.read_bytes()
    monkeypatch.setattr(xr.Dataset, "to_netcdf",
                        lambda self, path, *a, **k: (_ for _ in ()).throw(OSError(5, "I/O error")))
    with pytest.raises(OSError):
        write_dataset(result, target)
    assert target.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["run.nc"]


# -- the command line ---------------------------------------------------------------------

def test_cli_run_writes_default_name_and_summary(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    status = main(["run", str(CHAIN), "--set", "solver.rtol=1e-6", "--scale", "a_to_b=2"])
    out = capsys.readouterr()
    assert status == 0
    path = tmp_path / "runner_chain.nc"
    assert f"wrote {path}" in out.out
    assert "steps" in out.out and "wall time" in out.out
    assert out.err == ""                             # no progress bar when not on a terminal
    ds = open_result(path)
    np.testing.assert_allclose(ds.rate_coefficient.sel(reaction="a_to_b"), 2e-4)
    assert ds.attrs["scenario_overrides"] == '{"solver.rtol": "1e-06", "scale.a_to_b": "2.0"}'


def test_cli_run_quiet_and_output_option(tmp_path, capsys):
    out_path = tmp_path / "sub" / "x.nc"
    assert main(["run", str(CHAIN), "-o", str(out_path), "--quiet"]) == 0
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err == ""
    assert out_path.is_file()


@pytest.mark.parametrize("argv,message", [
    (["run", "no-such-scenario"], "no shipped scenario named 'no-such-scenario'"),
    (["run", str(CHAIN), "--scale", "a_to_b"], "--scale 'a_to_b': expected KEY=VALUE"),
    (["run", str(CHAIN), "--scale", "a_to_b=fast"], "FACTOR must be a number"),
    (["run", str(CHAIN), "--scale", "nope=2"], "--scale nope=2: unknown reaction id"),
    (["run", str(CHAIN), "--set", 'run.duration="-1 d"'], '--set run.duration="-1 d": must be > 0'),
])
def test_cli_input_errors_exit_2_with_message(argv, message, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("boxchem run: ") and message in err
    assert "Traceback" not in err
    assert list(tmp_path.iterdir()) == []


def test_cli_integration_failure_writes_partial_and_exits_1(tmp_path, capsys):
    out_path = tmp_path / "blowup.nc"
    assert main(["run", str(DATA / "runner_blowup.toml"), "-o", str(out_path)]) == 1
    err = capsys.readouterr().err
    assert "integration failed: step size fell below the minimum" in err
    assert "largest error in A" in err
    assert not out_path.exists()
    partial = open_result(tmp_path / "blowup.partial.nc")
    assert partial.attrs["integration_status"] == "failed"
    assert partial.sizes["time"] == 3
