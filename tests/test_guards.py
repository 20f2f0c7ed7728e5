"""Conservation guard, preflight checks, output checks and exit codes (issue 13 items 3, 4, 6).

Conservation: for a mechanism whose every reaction keeps the number of Cl
atoms, sum_i a_iCl x_i is an exact invariant of the kinetic ODE (common
practice, no source); the guard must see it kept in a normal run and see a
drift as small as 1 % in a result that breaks it.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import boxchem
from boxchem.cli import main
from boxchem.diagnostics.conservation import (ELEMENT_DRIFT_BOUND, conservation_report,
                                              conserved_elements)
from boxchem.errors import ScenarioError
from boxchem.exitcodes import INPUT_ERROR, INTEGRATION_FAILED, OK, OUTPUT_ERROR
from boxchem.io.outputcheck import OutputError, check_output_location, write_with_fallback
from boxchem.scenario import load_scenario

DATA = Path(__file__).parent / "data"
CL_BOX = DATA / "chlorine_box.toml"
CHAIN = DATA / "runner_chain.toml"


@pytest.fixture(scope="module")
def cl_run():
    return boxchem.run(CL_BOX)


# --- conservation guard ------------------------------------------------------------------

def test_conserved_elements_are_those_every_reaction_keeps(cl_run):
    mech = load_scenario(CL_BOX).mechanism
    elements, variable, a = conserved_elements(mech)
    # O is not conserved (O2 is a fixed reservoir: j_o3 makes O2); Cl is
    assert elements == ("Cl",)
    assert dict(zip(variable, a[:, 0]))["Cl2O2"] == 2.0


def test_normal_run_passes_with_rounding_level_drift(cl_run):
    assert cl_run.attrs["conservation_check"] == "passed"
    drift = json.loads(cl_run.attrs["conservation_element_drift"])
    assert drift["Cl"] < 1e-9
    # the invariant by hand: Cl + ClO + 2 Cl2O2 at the end equals the start (1 + 2*0.5 ppbv)
    x = cl_run.mole_fraction.sel(species=["Cl", "ClO", "Cl2O2"]).values
    total = x @ np.array([1.0, 1.0, 2.0])
    np.testing.assert_allclose(total, 2e-9, rtol=1e-9)


def test_guard_flags_a_one_percent_drift(cl_run):
    mech = load_scenario(CL_BOX).mechanism
    broken = cl_run.copy(deep=True)
    x = broken["mole_fraction"].values
    j = list(broken.species.values).index("ClO")
    x[-1, j] += 0.01 * 2e-9                   # +1 % of the Cl total at the last time
    broken["mole_fraction"].values[:] = x
    report = conservation_report(broken, mech)
    assert not report.passed
    assert report.element_drift["Cl"] == pytest.approx(0.01, rel=1e-6)
    assert "Cl total +1 %" in report.message()


def test_guard_checks_fixed_mixing_ratios(cl_run):
    mech = load_scenario(CL_BOX).mechanism
    broken = cl_run.copy(deep=True)
    j = list(broken.species.values).index("O2")
    broken["mole_fraction"].values[3, j] *= 1.001
    report = conservation_report(broken, mech, {"O2": 0.2095})
    assert report.fixed_drift["O2"] == pytest.approx(1e-3, rel=1e-6)
    assert not report.passed


def test_loose_atol_is_refused_before_the_run_and_its_drift_flagged_after():
    s = load_scenario("polar-spring")
    with pytest.raises(ScenarioError, match=r"solver\.atol='1e8 cm-3': atol = 1e\+08 cm-3 cannot resolve "
                                            r"the scenario's Br"):
        s.with_overrides(**{"solver.atol": "1e8 cm-3"})
    # accepted on request; the clipping of small negatives then creates chlorine (7 % in
    # 30 days with the sparse-LU time loop and the source-function J values; none yet after
    # 20 days since the brighter twilight J values), which the guard reports
    loose = s.with_overrides(**{"solver.atol": "1e8 cm-3", "solver.allow_loose_atol": True,
                                "run.duration": "30 d", "run.output_interval": "6 h"})
    ds = boxchem.run(loose)
    assert ds.attrs["conservation_check"] == "failed"
    assert json.loads(ds.attrs["conservation_element_drift"])["Cl"] > ELEMENT_DRIFT_BOUND


# --- preflight -----------------------------------------------------------------------------

@pytest.mark.parametrize("override, match", [
    ({"environment.temperature": "1e-300 K"}, r"environment\.temperature.*outside the accepted range"),
    ({"environment.pressure": "1e300 Pa"}, r"environment\.pressure.*outside the accepted range"),
    ({"run.output_interval": "1e-6 s", "run.duration": "3 h"}, r"output_interval.*1\.08e\+10 output times"),
    ({"solver.max_step": "1e-9 s"}, r"solver\.max_step.*solver steps"),
    ({"run.duration": "365000 d"}, r"run\.duration.*outside the supported range"),
])
def test_absurd_values_are_refused_with_the_key(override, match):
    with pytest.raises(ScenarioError, match=match):
        load_scenario("stratosphere-box").with_overrides(**override)


def test_initial_amount_above_the_air_is_refused():
    with pytest.raises(ScenarioError, match=r"initial\.ClO.*1e\+300 cm-3 is more than the air itself"):
        load_scenario("stratosphere-box").with_overrides(initial={"ClO": "1e300 cm-3"})


def test_long_run_limit_can_be_lifted():
    s = load_scenario("stratosphere-box").with_overrides(
        **{"solver.max_step": "1e-3 s", "run.allow_long_run": True})
    assert s.max_step_s == 1e-3


def test_scale_1e300_names_the_reaction_and_its_line():
    with pytest.raises(ScenarioError, match=r"clo_clo_m.*stratosphere\.mech:\d+.*exceeds 1e-08 cm3 s-1"):
        load_scenario("stratosphere-box").with_overrides(scale={"clo_clo_m": 1e300})


def test_infinite_rate_coefficient_is_refused_by_check_and_by_the_scenario(tmp_path, capsys):
    mech = tmp_path / "inf.mech"
    mech.write_text('extends "stratosphere"\n[reactions]\n'
                    'boom   O3 + Cl -> ClO + O2   arrhenius A=1e308 E/R=-1e5\n')
    assert main(["check", str(mech)]) == INPUT_ERROR
    assert f"{mech}:3:1: error: reaction 'boom': k = inf" in capsys.readouterr().err
    with pytest.raises(ScenarioError, match=r"reaction 'boom' \(.*inf\.mech:3\): k = inf"):
        load_scenario("stratosphere-box").with_overrides(**{"run.mechanism": str(mech)})


# --- output location, fallback, exit codes ---------------------------------------------------

def test_output_under_a_file_is_refused_before_the_run(tmp_path, monkeypatch, capsys):
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    import boxchem.runner
    monkeypatch.setattr(boxchem.runner, "run", lambda *a, **k: pytest.fail("integration started"))
    assert main(["run", str(CHAIN), "-q", "-o", str(blocker / "out.nc")]) == OUTPUT_ERROR
    assert "is not a folder" in capsys.readouterr().err


def test_full_disk_is_refused_before_the_run(tmp_path, monkeypatch):
    import shutil
    from collections import namedtuple
    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr(shutil, "disk_usage", lambda p: usage(10**6, 10**6 - 1000, 1000))
    with pytest.raises(OutputError, match=r"MiB free .* needs up to"):
        check_output_location(tmp_path / "out.nc", 10**6)


def test_write_failure_after_the_run_keeps_the_result(tmp_path, monkeypatch, capsys):
    import boxchem.io.netcdf as netcdf
    real = netcdf.write_dataset
    target = tmp_path / "out.nc"

    def failing(ds, path):
        if Path(path) == target:
            raise OSError(28, "No space left on device")
        return real(ds, path)
    monkeypatch.setattr(netcdf, "write_dataset", failing)
    monkeypatch.setenv("TMPDIR", str(tmp_path / "fallback"))
    (tmp_path / "fallback").mkdir()
    import tempfile
    monkeypatch.setattr(tempfile, "tempdir", None)
    assert main(["run", str(CHAIN), "-q", "-o", str(target), "--set", 'run.duration="2 h"']) == OUTPUT_ERROR
    err = capsys.readouterr().err
    assert "No space left on device" in err and "the result was written to" in err
    kept = list((tmp_path / "fallback").glob("out-*.nc"))
    assert len(kept) == 1
    from boxchem.io.netcdf import open_result
    assert open_result(kept[0]).sizes["time"] == 2


def test_exit_codes_are_distinct(tmp_path, capsys):
    assert main(["run", str(CHAIN), "-q", "-o", str(tmp_path / "a.nc"), "--set", 'run.duration="2 h"']) == OK
    assert main(["run", str(CHAIN), "-q", "--set", 'run.duration="-2 h"']) == INPUT_ERROR
    blow = DATA / "runner_blowup.toml"
    assert main(["run", str(blow), "-q", "-o", str(tmp_path / "b.nc")]) == INTEGRATION_FAILED
    assert len({OK, INTEGRATION_FAILED, INPUT_ERROR, OUTPUT_ERROR}) == 4


def test_strict_turns_a_conservation_failure_into_an_integration_failure(tmp_path, capsys):
    # 30 days: the loose atol creates chlorine only after about 20 days (see the test above)
    args = ["run", "polar-spring", "-q", "-o", str(tmp_path / "p.nc"), "--set", 'solver.atol="1e8 cm-3"',
            "--set", "solver.allow_loose_atol=true", "--set", 'run.duration="30 d"',
            "--set", 'run.output_interval="6 h"']
    assert main(args) == OK
    assert "warning: conservation guard: Cl total" in capsys.readouterr().err
    assert main(args + ["--strict"]) == INTEGRATION_FAILED
    assert (tmp_path / "p.partial.nc").is_file()
