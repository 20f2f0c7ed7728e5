"""Monte Carlo uncertainty on the ensemble engine, with the closed-form chain A -> B -> C.

ln A(t) = ln A0 - k1 t, so ln(-ln(A/A0)) = ln k1 + ln t: the sampled spread of
ln k1 can be read back from the model output itself (closed form; Bateman 1910,
see tests/conftest_sensitivity.py).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import boxchem
from boxchem.analysis.sampling import monte_carlo_table, standard_normal_sample, uncertainty_table
from boxchem.analysis.uncertainty import (UncertaintyError, change_against_uncertainty,
                                          monte_carlo, summarize)
from boxchem.diagnostics.metrics import parse_metrics
from conftest_sensitivity import A0, HOURS, K1, K2, chain_b, chain_db, write_chain

METRICS = ["B at end", "A at end"]


def _f(f298, g, T):
    """JPL 19-5 convention f(T) = f298 exp|g (1/T - 1/298)| (recalled from memory)."""
    return f298 * np.exp(abs(g * (1.0 / T - 1.0 / 298.0)))


@pytest.mark.parametrize("temperature", [220.0, 280.0])
def test_sampled_ln_k_read_back_from_the_model_has_std_ln_f_of_the_run_temperature(tmp_path, temperature):
    path = write_chain(tmp_path, temperature=f"{temperature} K", rtol=1e-7)
    n = 300
    mc = monte_carlo(path, METRICS, members=n, seed=11, sampling="random", species=())
    assert mc.attrs["mc_temperature_K"] == pytest.approx(temperature)
    use = mc["member_label"].values != "nominal"
    a_end = mc["metric_value"].sel(metric="A at end").values[use]
    ln_k1 = np.log(-np.log(a_end / A0) / (HOURS * 3600.0))
    expected = np.log(_f(1.2, 100.0, temperature))           # a_to_b: f298 = 1.2, g = 100
    # sampling error of a standard deviation: sd / sqrt(2 (n - 1)) (normal theory)
    assert abs(ln_k1.std(ddof=1) - expected) < 3.5 * expected / np.sqrt(2 * (n - 1))
    assert abs(ln_k1.mean() - np.log(K1)) < 3.5 * expected / np.sqrt(n)


def test_seeded_monte_carlo_is_reproducible(tmp_path):
    path = write_chain(tmp_path, rtol=1e-7)
    a = monte_carlo(path, METRICS, members=12, seed=5, species=())
    b = monte_carlo(path, METRICS, members=12, seed=5, species=())
    c = monte_carlo(path, METRICS, members=12, seed=6, species=())
    np.testing.assert_array_equal(a["metric_value"].values, b["metric_value"].values)
    np.testing.assert_array_equal(a["member_table"].values, b["member_table"].values)
    assert not np.allclose(a["metric_value"].values[1:], c["metric_value"].values[1:])
    assert a.attrs["mc_seed"] == 5 and a.attrs["mc_sampling"] == "lhs"


def test_summary_quantiles_and_contributions_of_the_chain(tmp_path):
    path = write_chain(tmp_path, rtol=1e-7)
    mc = monte_carlo(path, ["B at end"], members=200, seed=2, species=("B",))
    t = HOURS * 3600.0
    v = mc["metric_value"].sel(metric="B at end").values[1:]
    q = mc["metric_quantile"].sel(metric="B at end").values
    np.testing.assert_allclose(q, np.quantile(v, [0.05, 0.5, 0.95]), rtol=1e-12)
    assert float(mc["metric_nominal"].sel(metric="B at end")) == pytest.approx(chain_b(t), rel=1e-5)
    # contributions: to first order ln B varies by S_i sigma_i z_i, so the shares of
    # variance are (S_i sigma_i)^2 / sum (first-order variance decomposition; common
    # practice, no source); SRRC^2 on ranks should match them within sampling error
    db1, db2 = chain_db(t)
    s = np.array([K1 * db1, K2 * db2]) / chain_b(t)
    sigma = np.log([_f(1.2, 100.0, 220.0), _f(1.5, 0.0, 220.0)])
    share = (s * sigma) ** 2 / np.sum((s * sigma) ** 2)
    # (a share too small to tell from sampling noise is left out of the regression: NaN)
    np.testing.assert_allclose(np.nan_to_num(mc["contribution"].sel(metric="B at end").values),
                               share, atol=0.05)
    assert float(mc["contribution_r2"].sel(metric="B at end")) > 0.95
    # and the 1-sigma spread of ln B is sqrt(sum (S_i sigma_i)^2) to first order
    assert float(mc["metric_log_std"].sel(metric="B at end")) == \
        pytest.approx(np.sqrt(np.sum((s * sigma) ** 2)), rel=0.12)
    band = mc["band_B"].values
    assert band.shape == (3, HOURS + 1) and np.all(band[0] <= band[1]) and np.all(band[1] <= band[2])
    assert "band_cycle_loss" in mc


def test_a_failed_member_does_not_stop_the_analysis(tmp_path):
    path = write_chain(tmp_path, rtol=1e-7)
    mech = boxchem.load_scenario(path).mechanism
    table = uncertainty_table(mech, 220.0)
    z = np.vstack([np.zeros((1, 2)), standard_normal_sample(30, 2, seed=1, method="random")])
    frame = monte_carlo_table(table, z)
    frame["member_label"] = ["nominal"] + [f"sample {i}" for i in range(1, 31)]
    offsets = np.zeros(31)
    offsets[4] = -500.0                     # an impossible temperature: this member's setup fails
    frame["environment.temperature_offset"] = offsets
    ds = boxchem.ensemble(path, frame)
    assert int((ds["member_status"].values == 2).sum()) == 1
    ds = ds.assign_coords(parameter=list(table.ids))
    ds["z"] = (("member", "parameter"), z)
    out = summarize(ds, parse_metrics(METRICS), species=("B",))
    assert out.attrs["mc_members_used"] == 29 and out.attrs["mc_members_failed"] == 1
    assert np.all(np.isfinite(out["metric_quantile"].values))
    assert np.all(np.isfinite(out["band_B"].values))


def test_change_beside_the_spread(tmp_path):
    path = write_chain(tmp_path, rtol=1e-7)
    mc = monte_carlo(path, ["b = B at end"], members=60, seed=3, species=())
    changed = boxchem.run(boxchem.load_scenario(path), scale={"b_to_c": 1.3})
    row, = change_against_uncertainty(mc, changed)
    t = HOURS * 3600.0
    assert row["change_percent"] == pytest.approx(100 * (chain_b(t, k2=1.3 * K2) / chain_b(t) - 1), rel=1e-4)
    sigma = float(mc["metric_log_std"].sel(metric="b"))
    assert row["spread_percent"] == pytest.approx(100 * (np.exp(sigma) - 1))
    assert row["ratio"] == pytest.approx(abs(np.log(1 + row["change_percent"] / 100)) / sigma)
    with pytest.raises(UncertaintyError, match="not a Monte Carlo result"):
        change_against_uncertainty(changed, changed)
