"""The sensitivity and uncertainty commands, used as a user would, on the closed-form chain."""
from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from boxchem.cli import main
from conftest_sensitivity import CHAIN_MECH, HOURS, K1, K2, chain_b, chain_db, write_chain


def test_sensitivity_command_writes_ranking_plot_and_netcdf(tmp_path, capsys):
    path = write_chain(tmp_path, rtol=1e-9)
    out = tmp_path / "s.nc"
    status = main(["sensitivity", str(path), "--metric", "B at end", "--species", "B", "-q",
                   "-o", str(out), "--csv", str(tmp_path / "rank.csv")])
    assert status == 0
    text = capsys.readouterr().out
    first = [line for line in text.splitlines() if line.strip().startswith("1 ")][0]
    assert "b_to_c" in first                       # |S_k2| = 0.75 > |S_k1| = 0.11 (closed form)
    r = xr.load_dataset(out)
    t = HOURS * 3600.0
    _, db2 = chain_db(t)
    # the default (tangent-linear run) at rtol 1e-9: to 1e-6 of the closed form
    assert float(r["sensitivity"].sel(metric="B at end", parameter="scale.b_to_c")) == \
        pytest.approx(K2 * db2 / chain_b(t), abs=1e-6)
    assert "species_sensitivity" in r and r.attrs["sensitivity_method"] == "tangent"
    assert "one tangent-linear run (2 parameters" in text and "method: auto: tangent" in text
    # the check: central differences; the default step h = 0.05 errs by ~h^2/6 x the third
    # log-derivative: within 1e-3 of S
    assert main(["sensitivity", str(path), "--metric", "B at end", "-q", "--no-plot", "--method",
                 "differences", "-o", str(tmp_path / "d.nc")]) == 0
    d = xr.load_dataset(tmp_path / "d.nc")
    assert float(d["sensitivity"].sel(metric="B at end", parameter="scale.b_to_c")) == \
        pytest.approx(K2 * db2 / chain_b(t), abs=1e-3)
    assert d.attrs["finite_difference_step_ln"] == 0.05
    assert (tmp_path / "s-tornado.png").stat().st_size > 10_000
    assert (tmp_path / "rank.csv").read_text().startswith("metric,rank,parameter")


def test_sensitivity_command_with_global_indices(tmp_path, capsys):
    path = write_chain(tmp_path, rtol=1e-8)
    out = tmp_path / "g.nc"
    assert main(["sensitivity", str(path), "--metric", "A at end", "--no-plot", "-q", "-o", str(out),
                 "--global", "sobol", "--global-top", "2", "--global-samples", "64"]) == 0
    r = xr.load_dataset(out)
    # A(t) = A0 exp(-k1 t) depends on k1 alone: S1 = ST = 1 for a_to_b, 0 for b_to_c
    # (definition of the Sobol indices; closed form of the chain)
    st = dict(zip(r["global_parameter"].values, r["global_ST"].values))
    s1 = dict(zip(r["global_parameter"].values, r["global_S1"].values))
    assert st["a_to_b"] == pytest.approx(1.0, abs=0.15) and s1["a_to_b"] == pytest.approx(1.0, abs=0.15)
    assert abs(st["b_to_c"]) < 1e-3
    assert "global indices (sobol" in capsys.readouterr().out


def test_uncertainty_command_and_the_change_beside_the_spread(tmp_path, capsys):
    path = write_chain(tmp_path, rtol=1e-7)
    changed = tmp_path / "faster.mech"
    changed.write_text(CHAIN_MECH.replace("A=3.0e-5", "A=3.9e-5"))      # k2 x 1.3
    out = tmp_path / "mc.nc"
    status = main(["uncertainty", str(path), "--members", "40", "--metric", "B at end",
                   "--species", "B", "-q", "-o", str(out), "--changed", str(changed)])
    assert status == 0
    text = capsys.readouterr().out
    t = HOURS * 3600.0
    expected = 100 * (chain_b(t, k2=1.3 * K2) / chain_b(t) - 1)
    line = [s for s in text.splitlines() if s.strip().startswith("B at end:")][0]
    assert f"{expected:+.1f} %" in line and "evaluation 1-sigma spread" in line
    mc = xr.load_dataset(out)
    assert mc.sizes["member"] == 41 and str(mc["member_label"].values[0]) == "nominal"
    for name in ("bands-B", "histogram", "contributions"):
        assert (tmp_path / f"mc-{name}.png").stat().st_size > 10_000
    # reuse the baseline file: the same change, no new Monte Carlo
    assert main(["uncertainty", "--baseline", str(out), "--changed-scale", "b_to_c=1.3", "-q"]) == 0
    again = [s for s in capsys.readouterr().out.splitlines() if s.strip().startswith("B at end:")][0]
    assert f"{expected:+.1f} %" in again


@pytest.mark.parametrize("argv, expected", [
    (["sensitivity", "{path}", "--metric", "D at end"], "unknown species 'D'"),
    (["sensitivity", "{path}", "--metric", "B at 2027-01-01"], "outside the run"),
    (["sensitivity", "{path}", "--metric", "B at end", "--reactions", "a_tob"],
     "unknown reaction(s) 'a_tob' (did you mean 'a_to_b'?)"),
    (["sensitivity", "{path}", "--metric", "B at end", "--method", "tangent", "--step", "0.01"],
     "add --method differences"),
    (["uncertainty", "{path}", "--metric", "B at end", "--members", "1"], "at least 2 members"),
    (["uncertainty", "{path}", "--metric", "B at end", "--changed", "nowhere.mech"], "no such file"),
    (["uncertainty", "--baseline", "missing.nc"], "no such file"),
    (["uncertainty", "{path}"], "give SCENARIO and --metric"),
])
def test_bad_input_exits_2_with_a_message(tmp_path, capsys, argv, expected):
    path = write_chain(tmp_path)
    status = main([a.format(path=path) for a in argv] + ["-q", "-o", str(tmp_path / "x.nc")])
    assert status == 2
    assert expected in capsys.readouterr().err
