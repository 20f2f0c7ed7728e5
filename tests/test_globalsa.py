"""SALib through our wrapper on functions with analytic indices (no model runs)."""
import numpy as np
import pytest

from boxchem.analysis.globalsa import GlobalSensitivityError, indices

A, B = 7.0, 0.1


def ishigami(X):
    """Ishigami & Homma (1990), Proc. ISUMA '90, 398-403: sin x1 + a sin^2 x2 + b x3^4 sin x1."""
    return np.sin(X[:, 0]) + A * np.sin(X[:, 1]) ** 2 + B * X[:, 2] ** 4 * np.sin(X[:, 0])


def ishigami_indices():
    """Analytic first-order and total Sobol indices of the Ishigami function on [-pi, pi]^3
    (variance decomposition in Ishigami & Homma 1990; also Saltelli et al. 2008, "Global
    Sensitivity Analysis: The Primer", Wiley; formulas recalled from memory)."""
    pi = np.pi
    V = A ** 2 / 8 + B * pi ** 4 / 5 + B ** 2 * pi ** 8 / 18 + 0.5
    V1 = 0.5 * (1 + B * pi ** 4 / 5) ** 2
    V2 = A ** 2 / 8
    V13 = 8 * B ** 2 * pi ** 8 / 225
    return np.array([V1, V2, 0.0]) / V, np.array([V1 + V13, V2, V13]) / V


def test_sobol_indices_of_the_ishigami_function():
    r = indices("sobol", ["x1", "x2", "x3"], ishigami, bounds=[[-np.pi, np.pi]] * 3, n=4096, seed=1)
    s1, st = ishigami_indices()                 # 0.3139, 0.4424, 0 and 0.5576, 0.4424, 0.2437
    assert r["X"].shape == (4096 * 5, 3)        # N (D + 2) without second order
    np.testing.assert_allclose(r["S1"][0], s1, atol=0.03)
    np.testing.assert_allclose(r["ST"][0], st, atol=0.03)


def test_sobol_with_normal_inputs_of_a_linear_model():
    # y = sum c_i x_i with independent x_i ~ N(0, s_i): S1_i = ST_i = c_i^2 s_i^2 / sum
    # (variance of a linear combination; common practice, no source)
    c, s = np.array([1.0, 2.0, 0.5]), np.array([0.3, 0.1, 0.4])
    r = indices("sobol", ["a", "b", "c"], lambda X: X @ c, bounds=[[0.0, v] for v in s],
                dists=["norm"] * 3, n=2048, seed=2)
    expected = (c * s) ** 2 / np.sum((c * s) ** 2)
    np.testing.assert_allclose(r["S1"][0], expected, atol=0.03)
    np.testing.assert_allclose(r["ST"][0], expected, atol=0.03)


def test_morris_elementary_effects_of_a_linear_model_are_its_slopes():
    # every elementary effect of y = sum c_i x_i is c_i exactly (Morris 1991, Technometrics
    # 33, 161, definition of the elementary effect); SALib takes the step in unit-hypercube
    # coordinates, so mu* = |c_i| (b_i - a_i) and sigma = 0
    c = np.array([3.0, -1.0, 0.2])
    r = indices("morris", ["a", "b", "c"], lambda X: X @ c, bounds=[[-1.0, 1.0]] * 3, n=20, seed=3)
    np.testing.assert_allclose(r["mu_star"][0], 2.0 * np.abs(c), rtol=1e-10)
    np.testing.assert_allclose(r["sigma"][0], 0.0, atol=1e-10)


def test_several_outputs_and_bad_settings():
    r = indices("sobol", ["x1", "x2", "x3"], lambda X: np.stack([ishigami(X), X[:, 0]], axis=1),
                bounds=[[-np.pi, np.pi]] * 3, n=1024, seed=1)
    assert r["S1"].shape == (2, 3)
    np.testing.assert_allclose(r["ST"][1], [1.0, 0.0, 0.0], atol=0.05)   # y = x1 only
    with pytest.raises(GlobalSensitivityError, match="power of 2"):
        indices("sobol", ["a"], lambda X: X[:, 0], bounds=[[0, 1]], n=100)
    with pytest.raises(GlobalSensitivityError, match="not one of sobol, morris"):
        indices("fast", ["a"], lambda X: X[:, 0], bounds=[[0, 1]])
