"""Local solar time in budget, jvalues and summaries; the smaller command-line items of issue 12."""
from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from boxchem.cli import main
from boxchem.diagnostics.solartime import format_time, local_shift
from boxchem.progress import ProgressBar
from conftest_diagnostics import make_result


def test_local_shift_and_wording():
    # local mean solar time = UTC + longitude / 15 h (common practice, no source)
    assert local_shift(166.7) == np.timedelta64(int(round(166.7 / 15 * 3600e9)), "ns")
    assert format_time(np.datetime64("2026-09-15T00:00"), 166.7) == \
        "2026-09-15 00:00 UTC (11:06 local solar time)"
    assert format_time(np.datetime64("2026-09-15T20:00"), 166.7) == \
        "2026-09-15 20:00 UTC (2026-09-16 07:06 local solar time)"
    assert format_time(np.datetime64("2026-09-15T20:00"), None) == "2026-09-15 20:00 UTC"


def test_budget_local_days_cover_the_same_loss(tmp_path, capsys):
    ds = make_result(days=3.0)
    ds["longitude"] = ("time", np.full(ds.sizes["time"], 90.0))    # local = UTC + 6 h
    path = tmp_path / "run.nc"
    ds.to_netcdf(path)
    totals = {}
    for clock in ("utc", "local"):
        assert main(["budget", str(path), "--period", "daily", "--clock", clock, "--format", "csv"]) == 0
        rows = [r for r in csv.DictReader(io.StringIO(capsys.readouterr().out))
                if r["section"] == "cycle_daily" and r["term"] == "total"]
        totals[clock] = rows
    # 3 UTC days; the run starts at 06:00 local: a partial first local day (18 h), two full,
    # a partial last (6 h)
    assert [float(r["covered_hours"]) for r in totals["utc"]] == [24.0, 24.0, 24.0]
    assert [float(r["covered_hours"]) for r in totals["local"]] == [18.0, 24.0, 24.0, 6.0]
    # the days partition the run: their losses add up to the run's (identity)
    for clock in totals:
        assert sum(float(r["percent_of_initial_o3"]) for r in totals[clock]) == pytest.approx(
            sum(float(r["percent_of_initial_o3"]) for r in totals["utc"]), rel=1e-5)  # CSV keeps 7 digits


@pytest.mark.slow
def test_jvalues_day_in_local_solar_time_centres_noon(capsys):
    # McMurdo (166.7 E): the UTC day cuts the sunlit period in two; the local day does not.
    assert main(["jvalues", "polar-spring", "--day", "2026-09-15", "--clock", "local", "--format", "csv",
                 "--step", "5min"]) == 0
    rows = [r for r in csv.DictReader(io.StringIO(capsys.readouterr().out)) if r["id"] == "j_no2"]
    sza = np.array([float(r["sza"]) for r in rows])
    local = [r["local_solar_time"] for r in rows]
    assert local[0].endswith("T00:00:00") and local[-1].endswith("T00:00:00")
    noon = local[int(np.argmin(sza))][11:16]
    minutes = int(noon[:2]) * 60 + int(noon[3:])
    # the sun culminates at local mean noon within the equation of time (at most about 16 min;
    # recalled from memory) and the 5 min step
    assert abs(minutes - 720) <= 21
    j = np.array([float(r["j"]) for r in rows])
    assert j[0] == 0.0 and j[-1] == 0.0 and j.max() > 0     # night at both ends of the local day


def test_jvalues_ozone_column_needs_a_unit(capsys):
    assert main(["jvalues", "stratosphere", "--ozone-column", "300"]) == 2
    err = capsys.readouterr().err
    assert "--ozone-column" in err and "no unit" in err and "300 DU" in err


def test_empty_mechanism_fails_check(tmp_path, capsys):
    for text in ("", "# only a comment\n\n"):
        path = tmp_path / "empty.mech"
        path.write_text(text)
        assert main(["check", str(path)]) == 2
        err = capsys.readouterr().err
        assert "empty.mech:1" in err and "no species and no reactions" in err


def test_heartbeat_when_not_a_terminal():
    import time
    buf = io.StringIO()                                  # not a terminal
    bar = ProgressBar(2 * 86400.0, stream=buf, heartbeat_s=0.05)
    bar(43200.0)
    time.sleep(0.3)
    bar.close()
    lines = buf.getvalue().splitlines()
    assert lines and lines[0].startswith("boxchem: still running: day 0.50 of 2.00")
    quiet = io.StringIO()
    bar = ProgressBar(86400.0, stream=quiet, quiet=True, heartbeat_s=0.05)
    time.sleep(0.15)
    bar.close()
    assert quiet.getvalue() == ""


def test_demo_takes_a_scenario_name(tmp_path, capsys):
    assert main(["demo", str(tmp_path / "d"), "--scenario", "no-such-scenario", "--quiet"]) == 2
    assert "no-such-scenario" in capsys.readouterr().err


def test_compile_command_and_cold_cache_detection(tmp_path, monkeypatch, capsys):
    from boxchem.warmup import cold_start_note, kernels_cached
    assert main(["compile"]) == 0
    out = capsys.readouterr().out
    assert "compiled and cached" in out or "numpy path" in out
    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path))          # an empty cache: a fresh install
    monkeypatch.delenv("BOXCHEM_JIT", raising=False)
    from boxchem.solver.compiled import jit_available
    if jit_available():
        assert not kernels_cached() and "boxchem compile" in cold_start_note()
    (tmp_path / "x.nbi").write_bytes(b"")
    assert kernels_cached() and cold_start_note() == ""
