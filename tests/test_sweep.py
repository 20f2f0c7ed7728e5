"""Sweeps: a grid of --vary values becomes a member table for the ensemble engine."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from boxchem.analysis.sweep import SweepError, grid, parse_vary, run_sweep, sweep_table

CHAIN = Path(__file__).parent / "data" / "runner_chain.toml"


def test_parse_vary():
    assert parse_vary(["location.latitude=-60, -70,-80", "run.start=2026-08-15,2026-09-01"])["location.latitude"] \
        == [-60, -70, -80]
    for bad in ("latitude=-60", "location.latitude", "location.latitude="):
        with pytest.raises(SweepError, match="--vary"):
            parse_vary([bad])


def test_grid_table_is_every_combination_last_key_fastest():
    table = sweep_table({"location.latitude": [-60, -70, -90], "scale.clo_clo_m": [0.8, 1.2]})
    assert len(table) == 6
    assert table.numeric[:, table.factors.index("scale.clo_clo_m")].tolist() == [0.8, 1.2] * 3
    assert table.numeric[:, table.factors.index("location.latitude")].tolist() == \
        [-60, -60, -70, -70, -90, -90]
    assert table.labels[3] == "location.latitude=-70 scale.clo_clo_m=1.2"
    assert table.origin_of(4, "location.latitude") == "--vary location.latitude=-90"
    assert table.attrs == {"sweep_keys": "location.latitude scale.clo_clo_m", "sweep_shape": "3 2"}


def test_different_start_dates_use_elapsed_time():
    ds = run_sweep(CHAIN, {"run.start": ["2026-08-15T00:00:00Z", "2026-09-01T00:00:00Z"]}, quiet=True)
    assert ds["time"].dtype.kind == "m"            # time since each member's start
    assert ds["member_start_time"].values.astype("datetime64[D]").tolist() == \
        [np.datetime64("2026-08-15"), np.datetime64("2026-09-01")]
    # constant rates: the same chain whatever the date (its sunrise/sunset breakpoints differ,
    # so the steps do: equal within the scenario's rtol 1e-8)
    np.testing.assert_allclose(ds["mole_fraction"].isel(member=0).values,
                               ds["mole_fraction"].isel(member=1).values, rtol=1e-7, atol=1e-22)


def test_all_members_failing_is_an_error():
    with pytest.raises(SweepError, match="every member"):
        run_sweep(CHAIN, {"location.latitude": [-95.0]}, quiet=True)


def test_unknown_key_rejected_before_running():
    with pytest.raises(SweepError, match="location.latitdue.*unknown column - did you mean 'location.latitude'"):
        run_sweep(CHAIN, {"location.latitdue": [1.0]}, quiet=True)


@pytest.mark.slow
def test_real_sweep_of_shipped_scenario(tmp_path, capsys):
    """Short runs of the shipped scenario in two worker processes, through the CLI."""
    from boxchem.cli import main
    from boxchem.io.memberfile import open_member_file
    out = tmp_path / "sweep.nc"
    # an invalid value is refused before any member runs (exit 2), naming the --vary item
    rc = main(["sweep", "stratosphere-box", "--vary", "location.latitude=-70,-95", "-o", str(out)])
    assert rc == 2 and "--vary location.latitude=-95" in capsys.readouterr().err and not out.exists()
    rc = main(["sweep", "stratosphere-box", "--vary", "run.duration=6 h",
               "--vary", "environment.temperature_offset=-2,2", "--vary", "location.latitude=-70",
               "-o", str(out), "--workers", "2", "--quiet"])
    assert rc == 0
    ds = grid(open_member_file(out, load=True))
    assert ds["member_status"].values.ravel().tolist() == [1, 1]
    # the member file is read by the result commands
    assert main(["budget", str(out), "--member", "1"]) == 0
    assert "member 1" in capsys.readouterr().out
    t = ds["temperature"].sel(location_latitude=-70.0).isel(run_duration=0)
    # the offset is added to the scenario's temperature: members differ by exactly 4 K
    np.testing.assert_allclose((t.sel(environment_temperature_offset=2.0)
                                - t.sel(environment_temperature_offset=-2.0)).values, 4.0, rtol=1e-9)
