"""Member files (sweeps, ensembles) through every result command and the accessor.

The files follow the member-file contract (DEVELOPERS.md, "Member files"):
built here by concatenating synthetic single runs along ``member`` with
:func:`boxchem.diagnostics.members.members_dataset`.  Checks are identities
(a member selected from the file equals the run it came from; the median of
three members is the middle one), common practice, no source.
"""
from __future__ import annotations

import csv
import io

import numpy as np
import pytest
import xarray as xr

import boxchem.diagnostics  # noqa: F401  (registers ds.boxchem)
from boxchem.cli import main
from boxchem.diagnostics.members import (STATUS_FAILED, STATUS_SUCCESS, from_sweep_layout, members_dataset,
                                         select_member, summarize_members)
from boxchem.diagnostics.result import ResultError, open_result
from conftest_diagnostics import make_result

FACTORS = (0.8, 1.0, 1.3)


def _runs():
    return [make_result(days=2.0, rate_scale={"j_dimer": f}) for f in FACTORS]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("members")
    runs = _runs()
    table = {"scale.j_dimer": list(FACTORS), "run.note": ["a", "b", "c"]}
    labels = [f"j_dimer x{f}" for f in FACTORS]
    full = members_dataset(runs, table, labels=labels, variables=None)
    default = members_dataset(runs, table, labels=labels)          # the contract's default selection
    failed = members_dataset([runs[0], None, runs[2]], table, labels=labels, variables=None,
                             messages=["", "step size below 1e-12 s at 2026-09-01T06:00", ""])
    out = {"dir": d, "base": d / "base.nc", "full": d / "full.nc", "default": d / "default.nc",
           "failed": d / "failed.nc"}
    runs[1].to_netcdf(out["base"])
    full.to_netcdf(out["full"])
    default.to_netcdf(out["default"])
    failed.to_netcdf(out["failed"])
    return out


def test_layout_follows_the_contract(files):
    ds = open_result(files["default"])
    assert ds.sizes["member"] == 3 and ds["member"].values.tolist() == [0, 1, 2]
    assert ds["member_table"].dims == ("member", "factor") and ds["factor"].values.tolist() == ["scale.j_dimer"]
    assert ds["member_table_text"].values[:, 0].tolist() == ["a", "b", "c"]
    assert ds["member_status"].dtype == np.int8 and ds["member_status"].attrs["flag_meanings"] == "pending success failed"
    assert ds.attrs["boxchem_result_kind"] == "members"
    assert "reaction_rate" not in ds and ds["mole_fraction"].dims == ("member", "time", "species")
    assert ds["stoichiometry"].dims == ("species", "reaction")      # matrices once, not per member


def test_selected_member_equals_its_run(files):
    ds = open_result(files["full"])
    for key in (2, "2", "j_dimer x1.3"):
        one = select_member(ds, key)
        run = _runs()[2]
        np.testing.assert_array_equal(one["reaction_rate"].values, run["reaction_rate"].values)
        assert one.attrs["member_settings"] == "scale.j_dimer=1.3, run.note=c"
    with pytest.raises(ResultError, match="no member 'x'; give an index 0..2 or a label"):
        select_member(ds, "x")
    with pytest.raises(ResultError, match="out of range"):
        select_member(ds, 7)


def test_failed_member_is_refused_with_its_message(files):
    ds = open_result(files["failed"])
    assert ds["member_status"].values.tolist() == [STATUS_SUCCESS, STATUS_FAILED, STATUS_SUCCESS]
    assert np.isnan(ds["mole_fraction"].isel(member=1)).all()
    with pytest.raises(ResultError, match="member 1 .* failed: step size below"):
        select_member(ds, 1)


def test_accessor_works_on_the_member_dimension(files):
    ds = open_result(files["full"])
    acc = ds.boxchem.accumulated_loss()
    assert acc["loss_percent"].dims == ("member", "time", "term")
    for i in range(3):   # vectorised over members = per member (identity)
        one = select_member(ds, i).boxchem.accumulated_loss()
        np.testing.assert_allclose(acc["loss_percent"].isel(member=i).values, one["loss_percent"].values, rtol=1e-12)
    daily = ds.boxchem.daily_loss()
    assert daily["loss_percent"].dims == ("member", "day", "term")
    s = ds.boxchem.across_members("cycle_rate")
    np.testing.assert_allclose(s["median"].values, ds["cycle_rate"].isel(member=1).values, rtol=1e-12)
    assert (s["p05"] <= s["median"]).all() and (s["median"] <= s["p95"]).all()


def test_summary_skips_failed_members():
    runs = _runs()
    ds = members_dataset([runs[0], None, runs[2]], {"scale.j_dimer": list(FACTORS)}, variables=None)
    s = summarize_members(ds["cycle_rate"])
    # median of two members is their mean (numpy's linear quantile; common practice)
    expected = 0.5 * (runs[0]["cycle_rate"] + runs[2]["cycle_rate"])
    np.testing.assert_allclose(s["median"].values, expected.values, rtol=1e-12)


def test_budget_across_members_and_for_one(files, capsys):
    assert main(["budget", str(files["full"]), "--format", "csv"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    dimer = [r for r in rows if r["section"] == "cycle" and r["term"] == "clo_dimer"][0]
    # the dimer cycle rate is 2 J[Cl2O2], so its mean scales with the factor: median = factor 1.0 member
    base = [r for r in rows if r["section"] == "cycle" and r["term"] == "clo_dimer"]
    assert main(["budget", str(files["base"]), "--format", "csv"]) == 0
    single = [r for r in csv.DictReader(io.StringIO(capsys.readouterr().out))
              if r["section"] == "cycle" and r["term"] == "clo_dimer"][0]
    assert float(dimer["value"]) == pytest.approx(float(single["value"]), rel=1e-9)
    assert float(base[0]["value_p95"]) > float(dimer["value"]) > float(base[0]["value_p05"])
    assert main(["budget", str(files["full"]), "--member", "j_dimer x1.3"]) == 0
    assert "member 2 (j_dimer x1.3)" in capsys.readouterr().out


def test_default_member_file_without_reaction_rate(files, capsys):
    assert main(["budget", str(files["default"])]) == 0
    out = capsys.readouterr().out
    assert "no reaction_rate in this result" in out and "save=[..., 'reaction_rate']" in out
    assert "clo_dimer" in out and "unattributed" not in out.split("note:")[-1].split("\n", 1)[1]
    ds = open_result(files["default"])
    with pytest.raises(ResultError, match="reaction_rate.*not have; a member file holds only"):
        ds.boxchem.production_loss("Ox")


@pytest.mark.parametrize("argv", [
    ["summary", "{default}"], ["summary", "{full}", "--member", "0"],
    ["plot", "{default}", "-o", "{dir}/p1"], ["plot", "{full}", "--member", "1", "-o", "{dir}/p2"],
    ["compare", "{base}", "{full}"], ["compare", "{base}", "{default}", "--other-member", "2"],
    ["budget", "{failed}", "--period", "all"],
])
def test_every_command_reads_member_files(files, capsys, argv):
    argv = [a.format(**files) for a in argv]
    assert main(argv) == 0
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err


@pytest.mark.parametrize("argv, message", [
    (["budget", "{failed}", "--member", "1"], "failed: step size"),
    (["budget", "{base}", "--member", "1"], "is a single run, not a member file"),
    (["compare", "{full}", "{base}"], "choose the reference member with --base-member"),
    (["compare", "{base}", "{full}", "--plot", "{dir}/c.png"], "needs --other-member"),
    (["summary", "{full}", "--member", "nine"], "no member 'nine'"),
])
def test_member_errors_exit_2(files, capsys, argv, message):
    argv = [a.format(**files) for a in argv]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_compare_member_by_member_finds_the_changed_reaction(files, capsys):
    assert main(["compare", str(files["base"]), str(files["full"]), "--format", "csv"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    changed = [r for r in rows if r["section"] == "changed_reaction"]
    assert [r["term"] for r in changed] == ["j_dimer"]        # k at equal T differs (synthetic files)
    dimer = [r for r in rows if r["section"] == "reaction_rate" and r["term"] == "j_dimer"][0]
    # rate change of j_dimer: -20 % and +30 % for the two changed members (median of 2: +5 %)
    assert float(dimer["change_percent"]) == pytest.approx(5.0, rel=1e-6)


def test_todays_sweep_layout_reads_as_members():
    a, b = make_result(days=1.0), make_result(days=1.0, o3_scale=0.5)
    sweep = xr.concat([a, b], dim="location_latitude").assign_coords(
        location_latitude=("location_latitude", [-60.0, -70.0], {"sweep_key": "location.latitude"}))
    sweep["member_status"] = ("location_latitude", np.array(["ok", "failed"], dtype=object))
    sweep["member_error"] = ("location_latitude", np.array(["", "boom"], dtype=object))
    ds = from_sweep_layout(sweep)
    assert ds.sizes["member"] == 2 and ds["member_table"].values[:, 0].tolist() == [-60.0, -70.0]
    assert ds["member_status"].values.tolist() == [STATUS_SUCCESS, STATUS_FAILED]
    assert ds["member_label"].values.tolist() == ["location.latitude=-60.0", "location.latitude=-70.0"]
    assert ds["stoichiometry"].dims == ("species", "reaction")


def test_compare_sets_the_change_beside_the_spread(files, capsys):
    other = files["dir"] / "other.nc"
    make_result(days=2.0, rate_scale={"j_dimer": 1.3}).to_netcdf(other)
    assert main(["compare", str(files["base"]), str(other), "--spread", str(files["full"]),
                 "--format", "csv"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    dimer = [r for r in rows if r["section"] == "accumulated_loss" and r["term"] == "clo_dimer"][-1]
    members = open_result(files["full"])
    acc = members.boxchem.accumulated_loss()["loss_percent"].sel(term="clo_dimer").isel(time=-1).values
    # half the 5-95 % range of the three members (numpy's linear quantiles; identity)
    expected = 0.5 * (np.quantile(acc, 0.95) - np.quantile(acc, 0.05))
    assert float(dimer["spread_points"]) == pytest.approx(expected, rel=1e-5)
    assert main(["compare", str(files["base"]), str(other), "--spread", str(files["base"])]) == 2
    assert "not a member file" in capsys.readouterr().err
