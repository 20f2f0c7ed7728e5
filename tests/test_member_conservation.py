"""The conservation guard on every member of a member file (docs/guards.md, "Members").

The reference is the single-run guard (``boxchem.run`` writes it to the
result's attributes): a member's drifts must be the single run's drifts of
the same values (common practice, no source).  A real numerical error is a
member with a loose ``[solver].atol`` (clipping creates chlorine: 7 % in 30
days of polar-spring, tests/test_guards.py); a broken member is one whose
state the test corrupts inside the engine.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import boxchem
from boxchem.analysis.members import read_member_csv
from boxchem.cli import main
from boxchem.diagnostics.conservation import (CHECK_FAILED, CHECK_NOT_RUN, CHECK_PASSED,
                                              ConservationCheck, conservation_report,
                                              expected_fixed_fractions, member_summary)
from boxchem.diagnostics.result import open_result
from boxchem.exitcodes import INTEGRATION_FAILED, OK
from boxchem.scenario import load_scenario

DATA = Path(__file__).parent / "data"
CL_BOX = DATA / "chlorine_box.toml"
LOOSE = {"solver.atol": "1e8 cm-3", "solver.allow_loose_atol": True}
SEASON = {"run.duration": "30 d", "run.output_interval": "6 h"}
TABLE = ("member_label,solver.atol,solver.allow_loose_atol,scale.clo_clo_m\n"
         "shipped,1 cm-3,false,1.0\nfaster dimer,1 cm-3,false,1.2\nloose,1e8 cm-3,true,1.0\n")


@pytest.fixture(scope="module")
def season(tmp_path_factory):
    """30 days of polar-spring: two members at the shipped atol, one at a loose atol."""
    folder = tmp_path_factory.mktemp("season")
    (folder / "members.csv").write_text(TABLE)
    table = read_member_csv(folder / "members.csv")
    ds = boxchem.ensemble(load_scenario("polar-spring").with_overrides(**SEASON), table,
                          step_policy="per-member")
    singles = {"shipped": boxchem.run("polar-spring", **SEASON),
               "loose": boxchem.run("polar-spring", **SEASON, **LOOSE)}
    return folder, ds, singles


def test_member_drifts_are_the_single_run_guard(season):
    _, ds, singles = season
    elements = [str(e) for e in ds.conserved_element.values]
    assert elements == ["Br", "Cl"]
    for member, label in ((0, "shipped"), (2, "loose")):
        single = singles[label].attrs
        drift = json.loads(single["conservation_element_drift"])
        fixed = json.loads(single["conservation_fixed_drift"])
        # per-member steps: the member is the single run to rounding, and so are its drifts
        # (the loose member's 7 % exactly; the shipped member's 1e-14 rounding level to 1e-12)
        np.testing.assert_allclose(ds.member_element_drift.values[member],
                                   [drift[e] for e in elements], rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(ds.member_fixed_drift.values[member],
                                   [fixed[s] for s in ds.checked_fixed_species.values], rtol=1e-6, atol=1e-15)
        expected = CHECK_PASSED if single["conservation_check"] == "passed" else CHECK_FAILED
        assert int(ds.member_conservation.values[member]) == expected
    assert singles["loose"].attrs["conservation_check"] == "failed"
    assert list(ds.member_conservation.values) == [CHECK_PASSED, CHECK_PASSED, CHECK_FAILED]
    # without --strict the failing member is still a successful member, with its data
    assert list(ds.member_status.values) == [1, 1, 1]
    assert ds.member_element_drift.values[2, 1] > 0.01


def test_summary_names_the_failing_members(season):
    _, ds, _ = season
    text = member_summary(ds)
    assert text.startswith("1 of 3 members failed the conservation check: member 2 (loose) Cl total +7.")
    assert "Br" not in text and "shipped" not in text
    good = member_summary(ds.isel(member=[0, 1]))
    assert good.startswith("conservation: all 2 members that ran passed (Br, Cl checked")


def test_strict_ensemble_command_fails_only_that_member(season, capsys):
    folder, ds, _ = season
    out = folder / "strict.nc"
    args = ["ensemble", "polar-spring", "--members", str(folder / "members.csv"), "-o", str(out),
            "--set", 'run.duration="30 d"', "--set", 'run.output_interval="6 h"',
            "--step-policy", "per-member"]
    assert main(args + ["-q", "-o", str(folder / "plain.nc")]) == OK
    assert main(args + ["--strict"]) == INTEGRATION_FAILED
    err = capsys.readouterr().err
    assert "warning: 1 of 3 members failed the conservation check: member 2 (loose) Cl total" in err
    assert "failed member 2 (loose): conservation guard: Cl total +7." in err
    strict = open_result(out)
    assert list(strict.member_status.values) == [1, 1, 2]
    assert "(a failure under --strict)" in str(strict.member_message.values[2])
    # the check of the failed member is kept, the good members' data too
    np.testing.assert_allclose(strict.member_element_drift.values, ds.member_element_drift.values)
    assert np.isfinite(strict.mole_fraction.values[:2]).all()
    assert np.isnan(strict.mole_fraction.values[2]).all()


def test_a_member_broken_inside_the_engine_is_flagged_and_no_other(monkeypatch):
    """Chlorine added to one member after its integration (+1 % of its Cl total at the last
    output) is flagged with that drift; its neighbours in the batch are not."""
    from boxchem.analysis import batches
    original = batches._integrate

    def broken(group, y0, *args, **kwargs):
        result = original(group, y0, *args, **kwargs)
        j = group.setup.kinetics.variable_species.index("ClO")
        air = float(np.asarray(group.state.air_density)[-1])
        result.y[1, -1, j] += 0.01 * 2e-9 * air        # Cl total is 2 ppbv (the scenario)
        return result
    monkeypatch.setattr(batches, "_integrate", broken)
    ds = boxchem.ensemble(CL_BOX, {"scale.cl_o3": [1.0, 1.5, 0.5]}, strict=False)
    assert list(ds.member_conservation.values) == [CHECK_PASSED, CHECK_FAILED, CHECK_PASSED]
    assert ds.member_element_drift.sel(conserved_element="Cl").values[1] == pytest.approx(0.01, rel=1e-6)
    assert ds.member_element_drift.values[[0, 2]].max() < 1e-12
    # the single-run guard on the member's own saved mole fractions says the same
    mech = load_scenario(CL_BOX).mechanism
    report = conservation_report(ds.isel(member=1), mech)
    assert report.element_drift["Cl"] == pytest.approx(float(ds.member_element_drift.values[1, 0]),
                                                       rel=1e-12)


def test_vectorised_check_equals_the_report_row_by_row():
    """One call over a stack of members (a partial member with a NaN tail and a member that
    never ran included) gives each row's single-run report."""
    scenario = load_scenario("polar-spring")
    mech = scenario.mechanism
    check = ConservationCheck.for_mechanism(mech, expected_fixed_fractions(mech, scenario))
    rng = np.random.default_rng(1)
    n_t, n_v = 7, len(check.variable)
    x = rng.uniform(1e-12, 1e-9, (4, n_t, n_v))
    x[2, 4:] = np.nan                       # failed after four output times
    x[3] = np.nan                           # never ran
    xf = check.fixed_expected * (1 + rng.uniform(-2e-6, 2e-6, (4, n_t, len(check.fixed))))
    drift, initial, fixed = check.drifts(x, xf)
    for i in range(3):
        species = list(check.variable) + list(check.fixed)
        one = xr.Dataset({"mole_fraction": (("time", "species"),
                                            np.concatenate([x[i], xf[i]], axis=1))},
                         coords={"species": species})
        report = conservation_report(one, mech, dict(zip(check.fixed, check.fixed_expected)))
        assert report.element_drift == pytest.approx(dict(zip(check.elements, drift[i])), rel=1e-12)
        assert report.fixed_drift == pytest.approx(dict(zip(check.fixed, fixed[i])), rel=1e-12)
        # by hand for one element: max |T(t) - T(0)| / T(0) over the finite times
        a = check.atoms[:, 0]
        rows = x[i][np.all(np.isfinite(x[i]), axis=1)]
        total = rows @ a
        assert drift[i, 0] == pytest.approx(np.max(np.abs(total - total[0])) / total[0], rel=1e-12)
    assert np.isnan(drift[3]).all()
    from boxchem.diagnostics.conservation import member_checks
    flags = member_checks(check, x, xf)["member_conservation"]
    assert flags[3] == CHECK_NOT_RUN
    assert (flags[:3] == CHECK_FAILED).all()        # random states are far from conserving


def test_a_selected_member_carries_its_guard_like_a_run(season):
    from boxchem.diagnostics.members import select_member
    _, ds, singles = season
    one = select_member(ds, 2)
    assert one.attrs["conservation_check"] == "failed"
    assert one.attrs["conservation_message"] == singles["loose"].attrs["conservation_message"]
    assert select_member(ds, 0).attrs["conservation_check"] == "passed"
    assert one.attrs["conservation_bound"] == singles["loose"].attrs["conservation_bound"]


def test_worker_processes_store_the_same_check(tmp_path):
    """The check is computed in the worker that ran the batch; the file is the same as
    in-process (local worker processes)."""
    table = {"scale.cl_o3": [1.0, 1.5, 0.5, 2.0]}
    here = boxchem.ensemble(CL_BOX, table, step_policy="per-member")
    there = boxchem.ensemble(CL_BOX, table, step_policy="per-member", workers=2, batch_size=2,
                             output=tmp_path / "w.nc")
    np.testing.assert_array_equal(there.member_conservation.values, here.member_conservation.values)
    np.testing.assert_array_equal(there.member_element_drift.values, here.member_element_drift.values)
    assert there.attrs["conservation_elements_not_checked"] == "O"
    there.close()


def test_resume_refuses_another_strict_setting(tmp_path):
    from boxchem.errors import BoxchemError
    path = tmp_path / "m.nc"
    boxchem.ensemble(CL_BOX, {"scale.cl_o3": [1.0, 2.0]}, output=path).close()
    with pytest.raises(BoxchemError, match=r"--strict differs \(conservation_strict = no"):
        boxchem.ensemble(CL_BOX, {"scale.cl_o3": [1.0, 2.0]}, output=path, resume=True, strict=True)
    boxchem.ensemble(CL_BOX, {"scale.cl_o3": [1.0, 2.0]}, output=path, resume=True).close()
