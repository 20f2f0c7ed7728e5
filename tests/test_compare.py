"""compare, budget and plot commands on synthetic result files: tables, plots, exit codes."""
from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from boxchem.cli import main
from boxchem.diagnostics.comparison import compare_results
from conftest_diagnostics import make_result


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("results")
    base, other = d / "base.nc", d / "other.nc"
    make_result(days=2.0).to_netcdf(base)
    # OTHER: 10 % less O3 and Cl2O2 photolysis 1.3 times faster
    make_result(days=2.0, o3_scale=0.9, rate_scale={"j_dimer": 1.3}).to_netcdf(other)
    junk = d / "junk.nc"
    junk.write_text("not netcdf")
    plain = d / "plain.nc"
    make_result(days=1.0)[["temperature"]].to_netcdf(plain)
    return {"base": base, "other": other, "junk": junk, "plain": plain, "dir": d}


def test_compare_rows_against_the_known_perturbation(files):
    import xarray as xr
    base, other = xr.load_dataset(files["base"]), xr.load_dataset(files["other"])
    rows = compare_results(base, other, times=["start", "end"], top=3)
    o3 = [r for r in rows if r["section"] == "species" and r["term"] == "O3"]
    np.testing.assert_allclose([r["change_percent"] for r in o3], -10.0, rtol=1e-9)  # o3_scale = 0.9
    rates = [r for r in rows if r["section"] == "reaction_rate"]
    assert [r["term"] for r in rates] == ["j_dimer"]  # the only reaction rate that differs
    np.testing.assert_allclose(rates[0]["change_percent"], 30.0, rtol=1e-9)
    dimer_end = [r for r in rows if r["section"] == "accumulated_loss" and r["term"] == "clo_dimer"][-1]
    # cycle rate 2 J[Cl2O2] is 1.3 times larger; the percent is relative to 0.9 times the initial O3
    np.testing.assert_allclose(dimer_end["other"], dimer_end["base"] * 1.3 / 0.9, rtol=1e-9)


def test_compare_cli_table_csv_and_plot(files, capsys, tmp_path):
    png = tmp_path / "cmp.png"
    assert main(["compare", str(files["base"]), str(files["other"]), "--plot", str(png)]) == 0
    text = capsys.readouterr().out
    assert "Reactions whose net effect changed most" in text and "j_dimer" in text
    assert png.stat().st_size > 10_000
    assert main(["compare", str(files["base"]), str(files["other"]), "--format", "csv",
                 "--times", "2026-09-01T12:00"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert {r["section"] for r in rows} == {"changed_reaction", "species", "accumulated_loss", "reaction_rate"}
    assert all(r["time"] == "2026-09-01T12:00" for r in rows if r["section"] == "species")


def test_budget_cli(files, capsys):
    assert main(["budget", str(files["base"]), "--family", "Ox", "--period", "all", "--top", "3"]) == 0
    out = capsys.readouterr().out
    assert "Largest loss terms of Ox" in out and "unattributed" in out and "Daily loss by cycle" in out
    assert main(["budget", str(files["base"]), "--format", "csv"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    cyc = {r["term"]: float(r["value"]) for r in rows if r["section"] == "cycle"}
    # closure in the table: cycles + unattributed = total (identity, common practice)
    np.testing.assert_allclose(sum(v for k, v in cyc.items() if k != "total"), cyc["total"], rtol=1e-5)
    assert main(["budget", str(files["base"]), "--species", "ClO"]) == 0


@pytest.mark.parametrize("argv, message", [
    (["budget", "{dir}/missing.nc"], "no such file"),
    (["budget", "{junk}"], "not a netCDF file"),
    (["budget", "{plain}"], "not a boxchem result"),
    (["budget", "{base}", "--family", "Oy"], "unknown family"),
    (["budget", "{base}", "--species", "XY"], "unknown species"),
    (["compare", "{base}", "{other}", "--times", "2030-01-01"], "outside the run"),
    (["compare", "{base}", "{other}", "--plot", "{dir}/x.gif"], ".png or .pdf"),
    (["plot", "{base}", "--species", "Foo"], "unknown species Foo"),
])
def test_cli_errors_exit_2_without_traceback(files, capsys, argv, message):
    argv = [a.format(**files) for a in argv]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_plot_cli(files, tmp_path, capsys):
    assert main(["plot", str(files["base"]), "-o", str(tmp_path)]) == 0
    written = capsys.readouterr().out.split()
    assert len(written) == 5 and all(tmp_path.joinpath(p).stat().st_size > 10_000 for p in written)


@pytest.mark.parametrize("command", ["budget", "compare", "plot", "sweep"])
def test_help_has_an_example(command, capsys):
    with pytest.raises(SystemExit) as exc:
        main([command, "--help"])
    assert exc.value.code == 0
    assert "example" in capsys.readouterr().out
