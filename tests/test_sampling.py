"""Uncertainty factors, Monte Carlo samples and finite-difference stencils (no model runs)."""
import numpy as np
import pytest

from boxchem import load_mechanism
from boxchem.analysis.sampling import (DEFAULT_F298, SamplingError, finite_difference_table,
                                       monte_carlo_table, standard_normal_sample,
                                       uncertainty_factor, uncertainty_table)


def test_uncertainty_factor_follows_the_evaluation_convention():
    # f(T) = f298 exp(|g (1/T - 1/298)|): JPL 19-5 convention (recalled from memory);
    # hand calculation: 1.15 exp(100 (1/200 - 1/298)) = 1.15 x 1.178720 = 1.355528
    assert uncertainty_factor(1.15, 100.0, 200.0) == pytest.approx(1.355528, rel=1e-6)
    # symmetric about 298 K in 1/T, equal to f298 at 298 K
    assert uncertainty_factor(1.3, 200.0, 298.0) == pytest.approx(1.3, rel=1e-15)
    hot = 1.0 / (2.0 / 298.0 - 1.0 / 250.0)
    assert uncertainty_factor(1.3, 200.0, hot) == pytest.approx(uncertainty_factor(1.3, 200.0, 250.0))


def test_sampled_ln_k_has_std_ln_f_at_two_temperatures():
    """std of the sampled ln multiplier of one reaction = ln f(T) at each T, within the
    sampling error of a standard deviation, sd / sqrt(2 (n - 1)) (normal theory)."""
    mech = load_mechanism("stratosphere")
    n = 4000
    z = standard_normal_sample(n, len(mech.reactions), seed=7, method="random")
    j = list(mech.reaction_ids).index("clo_clo_a")     # f298 = 1.5, g = 300 in the mechanism
    for T in (195.0, 260.0):
        table = uncertainty_table(mech, T)
        ln_k = np.log(monte_carlo_table(table, z)["scale.clo_clo_a"].to_numpy())
        expected = np.log(1.5 * np.exp(300.0 * abs(1.0 / T - 1.0 / 298.0)))
        se = expected / np.sqrt(2.0 * (n - 1))
        assert abs(ln_k.std(ddof=1) - expected) < 3.5 * se
        assert abs(ln_k.mean()) < 3.5 * expected / np.sqrt(n)
    # f read as a two-sigma bound halves the spread
    table = uncertainty_table(mech, 195.0)
    half = np.log(monte_carlo_table(table, z, f_sigma=2.0)["scale.clo_clo_a"].to_numpy())
    assert half.std(ddof=1) == pytest.approx(0.5 * np.log(table.factor[j]), rel=0.06)


def test_samples_are_reproducible_with_a_seed():
    for method in ("lhs", "random"):
        a = standard_normal_sample(50, 6, seed=3, method=method)
        b = standard_normal_sample(50, 6, seed=3, method=method)
        c = standard_normal_sample(50, 6, seed=4, method=method)
        np.testing.assert_array_equal(a, b)
        assert not np.allclose(a, c)


def test_latin_hypercube_puts_one_point_in_each_stratum():
    # McKay, Beckman & Conover (1979): each of n equal-probability strata holds one point
    from scipy import stats
    z = standard_normal_sample(40, 5, seed=1, method="lhs")
    strata = np.floor(stats.norm.cdf(z) * 40).astype(int)
    for col in strata.T:
        assert sorted(col) == list(range(40))


def test_shipped_mechanism_uncertainties_and_defaults():
    mech = load_mechanism("stratosphere")
    table = uncertainty_table(mech, 298.0)
    kinds = dict(zip(table.ids, table.kind))
    # every shipped line carries its own f298 (surface and uptake lines included): none defaulted
    assert list(table.defaulted) == []
    assert {kinds[r.id] for r in mech.reactions if r.law in ("surface", "uptake")} == {"surface"}
    assert table.factor[list(table.ids).index("j_cl2o2")] == pytest.approx(1.3)
    assert table.factor[list(table.ids).index("clo_clo_m")] == pytest.approx(1.15)
    assert np.all(table.factor >= 1.0)


def test_finite_difference_stencil():
    frame, labels, plan = finite_difference_table(["scale.a", "initial.O3"], step=0.05,
                                                  initial={"initial.O3": 2e-6})
    assert labels == ["nominal", "scale.a+", "scale.a-", "initial.O3+", "initial.O3-"]
    assert plan == {"scale.a": (1, 2), "initial.O3": (3, 4)}
    np.testing.assert_allclose(frame["scale.a"], [1, np.exp(0.05), np.exp(-0.05), 1, 1])
    np.testing.assert_allclose(frame["initial.O3"], 2e-6 * np.array([1, 1, 1, np.exp(0.05), np.exp(-0.05)]))
    frame, labels, plan = finite_difference_table(["scale.a"], step=0.01, scheme="forward")
    assert plan == {"scale.a": (1, 0)} and len(frame) == 2
    with pytest.raises(SamplingError, match="'central' or 'forward'"):
        finite_difference_table(["scale.a"], step=0.01, scheme="backward")
    with pytest.raises(SamplingError, match="step must be in"):
        finite_difference_table(["scale.a"], step=2.0)
