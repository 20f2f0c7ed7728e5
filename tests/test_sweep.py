"""Sweeps: combination and failure logic with an injected member function, and the CLI."""
from __future__ import annotations

import numpy as np
import pytest

from boxchem.analysis.sweep import SweepError, parse_vary, run_sweep
from conftest_diagnostics import make_result


def fake_member(scenario, assignment):
    """Module-level (picklable) stand-in for a run: O3 scaled by the varied values."""
    lat = assignment.get("location.latitude", -70.0)
    if lat == -90.0:
        raise RuntimeError("integrator failed (injected)")
    ds = make_result(days=0.5, step_minutes=60.0, start=str(assignment.get("run.start", "2026-09-01")))
    factor = abs(lat) / 70.0 * assignment.get("scale.clo_clo_m", 1.0)
    return ds.assign(number_density=ds["number_density"] * factor)


def test_parse_vary():
    assert parse_vary(["location.latitude=-60, -70,-80", "run.start=2026-08-15,2026-09-01"])["location.latitude"] \
        == [-60, -70, -80]
    for bad in ("latitude=-60", "location.latitude", "location.latitude="):
        with pytest.raises(SweepError, match="--vary"):
            parse_vary([bad])


@pytest.mark.parametrize("workers", [1, 2])
def test_every_combination_with_one_failing_member(workers):
    vary = {"location.latitude": [-60.0, -70.0, -90.0], "scale.clo_clo_m": [0.8, 1.2]}
    ds = run_sweep("synthetic", vary, workers=workers, member_fn=fake_member, quiet=True)
    assert ds["number_density"].dims[:2] == ("location_latitude", "scale_clo_clo_m")
    assert ds["location_latitude"].attrs["sweep_key"] == "location.latitude"
    status = ds["member_status"]
    assert status.sel(location_latitude=-90.0).values.tolist() == ["failed", "failed"]
    assert (status.sel(location_latitude=[-60.0, -70.0]) == "ok").all()
    assert "integrator failed (injected)" in str(ds["member_error"].sel(location_latitude=-90.0, scale_clo_clo_m=0.8).values)
    assert ds.attrs["sweep_failed"] == 2 and ds.attrs["sweep_members"] == 6
    assert np.isnan(ds["number_density"].sel(location_latitude=-90.0)).all()
    # every member sits at its own place: O3 scales with |lat|/70 * factor (the fake's rule)
    base = make_result(days=0.5, step_minutes=60.0)["number_density"].sel(species="O3")
    got = ds["number_density"].sel(species="O3", location_latitude=-60.0, scale_clo_clo_m=1.2)
    np.testing.assert_allclose(got.values, base.values * 60 / 70 * 1.2, rtol=1e-12)


def test_different_start_dates_use_elapsed_time():
    ds = run_sweep("synthetic", {"run.start": ["2026-08-15", "2026-09-01"]}, workers=1,
                   member_fn=fake_member, quiet=True)
    assert "elapsed_time" in ds.dims and "time" not in ds.dims
    assert ds["start_time"].values.astype("datetime64[D]").tolist() == \
        [np.datetime64("2026-08-15"), np.datetime64("2026-09-01")]


def test_all_members_failing_is_an_error():
    with pytest.raises(SweepError, match="every member"):
        run_sweep("synthetic", {"location.latitude": [-90.0]}, workers=1, member_fn=fake_member, quiet=True)


def test_unknown_key_rejected_before_running():
    with pytest.raises(SweepError, match="unknown key 'location.latitdue'"):
        run_sweep("stratosphere-box", {"location.latitdue": [1.0]}, workers=1, quiet=True)


@pytest.mark.slow
def test_real_sweep_of_shipped_scenario(tmp_path, capsys):
    """Two short runs of the shipped scenario in two processes, through the CLI."""
    from boxchem.cli import main
    import xarray as xr
    out = tmp_path / "sweep.nc"
    # an invalid value is refused before any member runs (exit 2), naming the --vary item
    rc = main(["sweep", "stratosphere-box", "--vary", "location.latitude=-70,-95", "-o", str(out)])
    assert rc == 2 and "--vary location.latitude=-95" in capsys.readouterr().err and not out.exists()
    rc = main(["sweep", "stratosphere-box", "--vary", "run.duration=6 h",
               "--vary", "environment.temperature_offset=-2,2", "--vary", "location.latitude=-70",
               "-o", str(out), "--workers", "2"])
    assert rc == 0
    printed = capsys.readouterr().out
    assert "2 members, 2 succeeded" in printed and "environment.temperature_offset=2" in printed
    ds = xr.load_dataset(out)
    assert ds["member_status"].values.ravel().tolist() == ["ok", "ok"]
    # today's layout is read as a member file by the result commands
    assert main(["budget", str(out), "--member", "1"]) == 0
    assert "member 1" in capsys.readouterr().out
    t = ds["temperature"].sel(location_latitude=-70.0).isel(run_duration=0)
    # the offset is added to the scenario's temperature: members differ by exactly 4 K
    np.testing.assert_allclose((t.sel(environment_temperature_offset=2.0)
                                - t.sel(environment_temperature_offset=-2.0)).values, 4.0, rtol=1e-9)
