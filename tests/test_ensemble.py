"""The ensemble engine: members against closed forms and single runs, grouping, batches, resume.

Fault handling (signals, killed workers, time limits) is in test_ensemble_faults.py, the
dask back-end in test_ensemble_dask.py.
"""
from __future__ import annotations

from pathlib import Path

import netCDF4
import numpy as np
import pytest
import xarray as xr

import boxchem
from boxchem.analysis.members import MemberTableError, read_member_csv
from boxchem.io import memberfile as mf

DATA = Path(__file__).parent / "data"
CHAIN = DATA / "runner_chain.toml"
BLOWUP = DATA / "runner_blowup.toml"
K1, K2, A0 = 1e-4, 5e-5, 1e9       # values of tests/data/runner_chain.mech / .toml


def seconds(ds):
    return (ds.time - ds.time[0]).values / np.timedelta64(1, "s")


def bateman(t, k1, k2, a0):
    """A -> B -> C, first order: Bateman (1910), Proc. Cambridge Philos. Soc. 15, 423."""
    a = a0 * np.exp(-k1 * t)
    b = a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))
    return a, b


CHAIN_MEMBERS = {"scale.a_to_b": [0.3, 1.0, 2.0, 4.0, 1.0],
                 "scale.b_to_c": [1.0, 1.0, 1.0, 3.0, 0.25],
                 "initial.A": ["1e9 cm-3", "2e9 cm-3", "5e8 cm-3", "1e9 cm-3", "3e9 cm-3"]}


@pytest.fixture(scope="module")
def chain_members(tmp_path_factory):
    out = tmp_path_factory.mktemp("ens") / "chain.nc"
    ds = boxchem.ensemble(CHAIN, CHAIN_MEMBERS, output=out, batch_size=2,
                          save=["number_density", "mole_fraction", "rate_coefficient", "cycle_rate",
                                "family_number_density", "air_number_density"])
    yield out, ds
    ds.close()


def test_every_member_follows_its_own_closed_form(chain_members):
    _, ds = chain_members
    assert ds.attrs["boxchem_result_kind"] == "members"
    assert ds["member_status"].values.tolist() == [1] * 5
    t = seconds(ds)
    for i in range(5):
        k1 = K1 * CHAIN_MEMBERS["scale.a_to_b"][i]
        k2 = K2 * CHAIN_MEMBERS["scale.b_to_c"][i]
        a0 = float(CHAIN_MEMBERS["initial.A"][i].split()[0])
        a, b = bateman(t, k1, k2, a0)
        nd = ds["number_density"].isel(member=i)
        # scenario tolerances rtol 1e-8, atol 1e-3 cm-3: 1e-5 relative above 1e-2 cm-3
        np.testing.assert_allclose(nd.sel(species="A").values, a, rtol=1e-5, atol=1e-2)
        np.testing.assert_allclose(nd.sel(species="B").values, b, rtol=1e-5, atol=1e-2)
        # k at the output times carries the member's factor
        np.testing.assert_allclose(ds["rate_coefficient"].isel(member=i).sel(reaction="a_to_b"), k1,
                                   rtol=1e-12)
        # the cycle destroys AB at the rate of b_to_c: k2 [B] (mechanism definition)
        np.testing.assert_allclose(ds["cycle_rate"].isel(member=i).sel(cycle="chain").values,
                                   k2 * nd.sel(species="B").values, rtol=1e-9)


def test_member_file_layout(chain_members):
    path, ds = chain_members
    with netCDF4.Dataset(path) as nc:
        assert nc.file_format.startswith("NETCDF3")      # fixed layout: in-place writes are safe
    assert ds["member"].values.tolist() == list(range(5))
    assert list(ds["factor"].values) == ["scale.a_to_b", "scale.b_to_c"]
    assert list(ds["text_factor"].values) == ["initial.A"]
    assert ds["member_table_text"].values[1, 0] == "2e9 cm-3"
    assert ds["member_status"].attrs["flag_meanings"] == "pending success failed"
    assert ds["mole_fraction"].dims == ("member", "time", "species")
    # one member looks like a single run holding fewer variables
    single = boxchem.run(CHAIN, scale={"a_to_b": 2.0}, initial={"A": "5e8 cm-3"})  # member 2
    member = ds.isel(member=2)
    for name in ("number_density", "mole_fraction", "family_number_density", "cycle_rate"):
        assert member[name].dims == single[name].dims
        assert member[name].attrs["units"] == single[name].attrs["units"]
        np.testing.assert_allclose(member[name].values, single[name].values, rtol=1e-9, atol=1e-30)
    np.testing.assert_array_equal(member["stoichiometry"].values, single["stoichiometry"].values)
    assert member.attrs["mechanism_sha256"] == single.attrs["mechanism_sha256"]
    assert list(member["species"].values) == list(single["species"].values)


def test_batching_does_not_change_the_numbers(chain_members):
    _, ds = chain_members
    for batch_size in (1, 5):
        other = boxchem.ensemble(CHAIN, CHAIN_MEMBERS, batch_size=batch_size, save=["number_density"])
        # per-member step control on shared tables: the same values whatever the batch
        # (bound stated in DEVELOPERS.md: identical to 1e-12 relative; measured bit-identical)
        np.testing.assert_allclose(other["number_density"].values, ds["number_density"].values,
                                   rtol=1e-12, atol=0)


def test_setup_groups_and_an_invalid_group(tmp_path):
    members = {"location.latitude": [-70.0, -95.0, -70.0, -60.0], "scale.a_to_b": [1.0, 1.0, 2.0, 1.0],
               "environment.temperature_offset": [0.0, 0.0, 0.0, 3.0]}
    ds = boxchem.ensemble(CHAIN, members, output=tmp_path / "g.nc")
    assert ds["member_status"].values.tolist() == [1, 2, 1, 1]
    assert ds.attrs["ensemble_setup_groups"] == 3
    message = str(ds["member_message"].values[1])
    assert "member 1, column location.latitude = -95.0" in message and "[-90, 90]" in message
    assert np.isnan(ds["mole_fraction"].isel(member=1)).all()
    # the offset reaches the member's temperature (scenario 200 K + 3 K)
    np.testing.assert_allclose(ds["temperature"].isel(member=3).values, 203.0, rtol=1e-12)
    np.testing.assert_allclose(ds["temperature"].isel(member=0).values, 200.0, rtol=1e-12)


def test_a_failing_member_is_recorded_and_the_others_complete():
    # dA/dt = k A^2 blows up at t = 1/(k f A0): 1e4 s for f = 1 (inside the 6 h run), 1e5 s for
    # f = 0.1 (after it).  Closed form A(t) = A0 / (1 - k f A0 t) (separation of variables;
    # common practice, no source).
    ds = boxchem.ensemble(BLOWUP, {"scale.a_a": [0.1, 1.0, 0.2]}, save=["number_density"])
    assert ds["member_status"].values.tolist() == [1, 2, 1]
    assert "step size fell below the minimum" in str(ds["member_message"].values[1])
    assert 9.0e3 < float(ds["member_failure_time"].values[1]) <= 1.0e4
    assert np.isnan(ds["member_failure_time"].values[0])
    assert np.isnan(ds["number_density"].isel(member=1)).all()
    t = seconds(ds)
    for i, f in ((0, 0.1), (2, 0.2)):
        np.testing.assert_allclose(ds["number_density"].isel(member=i).sel(species="A").values,
                                   1e9 / (1.0 - 1e-13 * f * 1e9 * t), rtol=1e-3)


def test_resume_runs_only_the_pending_members(tmp_path):
    out = tmp_path / "r.nc"
    full = boxchem.ensemble(CHAIN, CHAIN_MEMBERS, output=out, save=["number_density"])
    expected = full["number_density"].values.copy()
    full.close()
    with netCDF4.Dataset(out, "a") as nc:    # as if the run had stopped before members 1 and 3
        nc["member_status"][[1, 3]] = 0
        nc["number_density"][1] = np.nan
        nc["number_density"][3] = np.nan
    seen = []
    ds = boxchem.ensemble(CHAIN, CHAIN_MEMBERS, output=out, save=["number_density"], resume=True,
                          batch_size=1, progress=lambda done, total, failed: seen.append(done))
    assert seen == [4, 5]          # 3 were done; two members ran, one batch each
    assert ds["member_status"].values.tolist() == [1] * 5
    np.testing.assert_array_equal(ds["number_density"].values, expected)
    ds.close()
    with pytest.raises(boxchem.BoxchemError, match="made by another ensemble.*member table differs"):
        boxchem.ensemble(CHAIN, {**CHAIN_MEMBERS, "scale.a_to_b": [9.0] * 5}, output=out,
                         save=["number_density"], resume=True)


def test_csv_member_table_and_its_errors(tmp_path):
    good = tmp_path / "m.csv"
    good.write_text("# a comment line\nmember_label,scale.a_to_b,initial.A\nslow,0.5,1e-9\n"
                    "fast,2,\"2e9 cm-3\"\n")
    table = read_member_csv(good)
    assert list(table.labels) == ["slow", "fast"] and table.factors == ("scale.a_to_b",)
    ds = boxchem.ensemble(CHAIN, table)
    assert list(ds["member_label"].values) == ["slow", "fast"]
    assert ds["member_status"].values.tolist() == [1, 1]

    def error(text):
        path = tmp_path / "bad.csv"
        path.write_text(text)
        with pytest.raises(MemberTableError) as info:
            boxchem.ensemble(CHAIN, read_member_csv(path))
        return str(info.value)

    assert f"{tmp_path / 'bad.csv'}:1: column 2 (scale.a_to_bb): no reaction 'a_to_bb'" in \
        error("initial.A,scale.a_to_bb\n1e-9,1\n")
    assert "did you mean 'a_to_b'" in error("initial.A,scale.a_to_bb\n1e-9,1\n")
    assert "no species 'AA'" in error("initial.AA\n1e-9\n")
    assert ":3: column 1 (scale.a_to_b): got 'fast'; valid: a finite factor >= 0" in \
        error("scale.a_to_b\n1\nfast\n")
    assert ":3: column 1 (scale.a_to_b): got -1.0" in error("scale.a_to_b\n1\n-1\n")
    assert ":2: 1 values, the header has 2 columns" in error("scale.a_to_b,scale.b_to_c\n1\n")
    assert "unknown column - did you mean 'location.latitude'" in error("location.latitud\n1\n")
    assert "expected section.key" in error("latitude\n1\n")
    assert ":3: column 1 (initial.A): '2 ppbx' needs an amount unit" in \
        error('initial.A\n1e-9\n2 ppbx\n')
    path = tmp_path / "latin1.csv"
    path.write_bytes("scale.a_to_b\n1\n# caf\xe9\n".encode("latin-1"))
    with pytest.raises(MemberTableError, match=r"latin1.csv:3: not UTF-8"):
        read_member_csv(path)


def test_dict_and_dataframe_tables_agree():
    pd = pytest.importorskip("pandas")
    members = {"scale.a_to_b": [0.5, 2.0]}
    a = boxchem.ensemble(CHAIN, members, save="number_density")
    b = boxchem.ensemble(CHAIN, pd.DataFrame(members), save="number_density")
    np.testing.assert_array_equal(a["number_density"].values, b["number_density"].values)
    with pytest.raises(boxchem.BoxchemError, match="unknown variable 'mole_fractions' - did you mean"):
        boxchem.ensemble(CHAIN, members, save="mole_fractions")


def test_stale_temporaries_are_removed_and_live_ones_kept(tmp_path):
    out = tmp_path / "s.nc"
    dead = tmp_path / f".s.nc.{2**22 + 12345}.abc.tmp"     # beyond pid_max: no such process
    mine = tmp_path / f".s.nc.{__import__('os').getpid()}.xyz.tmp"
    dead.write_bytes(b"half a file")
    mine.write_bytes(b"being written")
    boxchem.ensemble(CHAIN, {"scale.a_to_b": [1.0]}, output=out).close()
    assert not dead.exists() and mine.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([mine.name, "s.nc"])


def test_sweep_is_a_grid_on_the_same_engine(tmp_path, capsys):
    from boxchem.analysis.sweep import grid, run_sweep
    from boxchem.cli import main
    out = tmp_path / "sweep.nc"
    # an invalid value is refused before any member runs (issue 12): exit 2, nothing written
    rc = main(["sweep", str(CHAIN), "--vary", "scale.a_to_b=0.5,2", "--vary",
               "location.latitude=-70,-95", "-o", str(out)])
    assert rc == 2 and "--vary location.latitude=-95" in capsys.readouterr().err and not out.exists()
    rc = main(["sweep", str(CHAIN), "--vary", "scale.a_to_b=0.5,2", "--vary",
               "location.latitude=-70,-75", "-o", str(out)])
    assert rc == 0
    printed = capsys.readouterr()
    assert "4 members: 4 succeeded, 0 failed, 0 pending" in printed.out
    ds = mf.open_member_file(out, load=True)
    assert ds.attrs["sweep_keys"] == "scale.a_to_b location.latitude"
    assert list(ds["member_label"].values)[:2] == ["scale.a_to_b=0.5 location.latitude=-70",
                                                   "scale.a_to_b=0.5 location.latitude=-75"]
    g = grid(ds)
    assert g["mole_fraction"].dims[:2] == ("scale_a_to_b", "location_latitude")
    assert g["member_status"].values.ravel().tolist() == [1, 1, 1, 1]
    # a sweep member is the single run of the same values, within the solver tolerance
    swept = run_sweep(CHAIN, {"scale.a_to_b": [2.0]}, quiet=True)
    single = boxchem.run(CHAIN, scale={"a_to_b": 2.0})
    np.testing.assert_allclose(swept["mole_fraction"].isel(member=0).values,
                               single["mole_fraction"].values, rtol=1e-9, atol=1e-30)


def test_ensemble_command_prints_what_it_produced(tmp_path, capsys):
    from boxchem.cli import main
    table = tmp_path / "t.csv"
    table.write_text("scale.a_to_b,initial.A\n0.5,1e-9\n2,2e-9\n")
    out = tmp_path / "e.nc"
    assert main(["ensemble", str(CHAIN), "--members", str(table), "-o", str(out),
                 "--save", "mole_fraction,cycle_rate"]) == 0
    captured = capsys.readouterr()
    assert f"{out}: 2 members: 2 succeeded, 0 failed, 0 pending" in captured.out
    assert "mole_fraction" in captured.out and "(member, time, species)" in captured.out
    # progress is reported on a pipe too (not only on a terminal): a final line
    assert "2/2 members" in captured.err and "members/s" in captured.err
    assert main(["ensemble", str(CHAIN), "--members", str(table), "-o", str(out), "--save",
                 "mole_fraction,cycle_rate", "--resume", "-q"]) == 0
    table.write_text("scale.a_to_bb\n1\n")
    assert main(["ensemble", str(CHAIN), "--members", str(table), "-o", str(out)]) == 2
    assert "t.csv:1: column 1 (scale.a_to_bb): no reaction 'a_to_bb'" in capsys.readouterr().err


def test_ensemble_and_sweep_commands_take_scenario_overrides(tmp_path, capsys):
    from boxchem.cli import main
    table = tmp_path / "t.csv"
    table.write_text("scale.a_to_b\n1\n2\n")
    out = tmp_path / "e.nc"
    assert main(["ensemble", str(CHAIN), "--members", str(table), "-o", str(out), "-q",
                 "--set", 'run.duration="6 h"', "--save", "number_density"]) == 0
    with xr.open_dataset(out) as ds:
        t = seconds(ds)
        assert t[-1] == 6 * 3600.0                 # the override reached every member
        a = ds.number_density.sel(species="A").values
    # member 2 doubles k1: A(t) = A0 exp(-2 k1 t) (Bateman 1910, closed form)
    np.testing.assert_allclose(a[1, -1], A0 * np.exp(-2 * K1 * t[-1]), rtol=1e-5)
    sweep_out = tmp_path / "s.nc"
    assert main(["sweep", str(CHAIN), "--vary", "scale.a_to_b=0.5,2", "-o", str(sweep_out), "-q",
                 "--set", 'run.duration="4 h"']) == 0
    with xr.open_dataset(sweep_out) as ds:
        assert seconds(ds)[-1] == 4 * 3600.0
    capsys.readouterr()
    assert main(["ensemble", str(CHAIN), "--members", str(table), "-o", str(out), "-q",
                 "--set", 'run.durat="6 h"']) == 2
    assert "--set run.durat=" in capsys.readouterr().err
