"""Forward (tangent-linear) sensitivities of the time loop (solver/tangent.py)."""
from __future__ import annotations

import numpy as np
import pytest

from boxchem.environment.history import Environment, TimeSeries
from boxchem.mechanism import parse_mechanism
from boxchem.solver import CompiledKinetics, RateCoefficientModel, integrate_batch
from boxchem.solver.tangent import TangentParameters

CHAIN = """
[species]
A  lumped
B  lumped
C  lumped
M  fixed
[reactions]
a_b   A -> B   constant  k=1e-3  ref="invented test value"
b_c   B -> C   constant  k=2.5e-4  ref="invented test value"
"""

PAIR = """
[species]
A  lumped
B  lumped
M  fixed
[reactions]
a_a   A + A -> B   constant  k=1e-15  ref="invented test value"
"""

WARMING = """
[species]
A  lumped
B  lumped
M  fixed
[reactions]
a_b   A -> B   arrhenius  A=2e-3 E/R=600  ref="invented test value"
"""


def _model(text, temperature=200.0):
    mech = parse_mechanism(text)
    kin = CompiledKinetics(mech)
    env = Environment("2026-06-01T00:00:00Z", latitude=-80.0, longitude=0.0, ozone_column=270.0,
                      altitude=19000.0, temperature=temperature, pressure=5500.0)
    return kin, RateCoefficientModel(mech, None, None, env, kinetics=kin)


def test_chain_sensitivities_follow_the_bateman_solution():
    # A -> B -> C: A = A0 e^{-k1 t}, B = A0 k1/(k2 - k1) (e^{-k1 t} - e^{-k2 t}) (Bateman 1910,
    # Proc. Camb. Phil. Soc. 15, 423); their derivatives in ln k1, ln k2 and ln A0 are the
    # textbook differentiation of that solution (common practice, no source)
    kin, coef = _model(CHAIN)
    t = np.linspace(0.0, 20000.0, 41)
    a0, k1, k2 = 1e12, 1e-3, 2.5e-4
    tp = TangentParameters.from_names(kin, reactions=["a_b", "b_c"], initial=["A"])
    res = integrate_batch(kin, coef, np.array([[a0, 0.0, 0.0]]), t, rtol=1e-9, atol=1e-3, tangent=tp)
    assert res.status[0] == 0 and res.sensitivity.shape == (t.size, 3, 3)
    S = res.sensitivity / a0
    e1, e2 = np.exp(-k1 * t), np.exp(-k2 * t)
    dA1 = -k1 * t * e1
    dB1 = k1 * (k2 / (k2 - k1) ** 2 * (e1 - e2) - k1 / (k2 - k1) * t * e1)
    dB2 = k2 * k1 * (-(e1 - e2) / (k2 - k1) ** 2 + t * e2 / (k2 - k1))
    np.testing.assert_allclose(S[:, 0, 0], dA1, rtol=0, atol=1e-6)
    np.testing.assert_allclose(S[:, 0, 1], dB1, rtol=0, atol=1e-6)
    np.testing.assert_allclose(S[:, 0, 2], -dA1 - dB1, rtol=0, atol=1e-6)
    np.testing.assert_allclose(S[:, 1, 0], 0.0, atol=1e-12)
    np.testing.assert_allclose(S[:, 1, 1], dB2, rtol=0, atol=1e-6)
    # the system is linear in y0: d y / d ln A0 = y (to rounding)
    np.testing.assert_allclose(S[:, 2, :] * a0, res.y[0], rtol=1e-12, atol=1e-3)
    # the normalised B sensitivity where B is large, relative 1e-6
    i = slice(5, None)
    np.testing.assert_allclose(S[i, 0, 1] * a0 / res.y[0, i, 1],
                               dB1[i] / (k1 / (k2 - k1) * (e1[i] - e2[i])), rtol=1e-6)


def test_second_order_loss_needs_the_second_derivative_term():
    # 2 A -> B: A = A0 / (1 + 2 k A0 t), so dA/d ln k = -2 k t A^2 (common practice, no source).
    # The S stages then need H K^y (d(J S)/dy): without it the error would be O(h), visible here
    kin, coef = _model(PAIR)
    t = np.linspace(0.0, 5000.0, 21)
    a0, k = 1e12, 1e-15
    tp = TangentParameters.from_names(kin, reactions=["a_a"], initial=["A"])
    res = integrate_batch(kin, coef, np.array([[a0, 0.0]]), t, rtol=1e-9, atol=1e-3, tangent=tp)
    a = a0 / (1.0 + 2.0 * k * a0 * t)
    np.testing.assert_allclose(res.y[0, :, 0], a, rtol=1e-7)
    np.testing.assert_allclose(res.sensitivity[:, 0, 0] / a0, -2.0 * k * t * a ** 2 / a0,
                               rtol=0, atol=1e-6)
    # d A / d ln A0 = A0 dA/dA0 = A^2 / A0
    np.testing.assert_allclose(res.sensitivity[:, 1, 0], a ** 2 / a0, rtol=1e-6)


def test_time_dependent_rate_coefficient():
    # A -> B with k(T(t)) as T warms 190 -> 240 K at constant pressure: the mixing ratio
    # x = A/[M] = x0 exp(-f int k dt), so dA / d ln f = A ln(x / x0) exactly, whatever k(t) the
    # tables give (the expansion of the air is not a parameter) (common practice, no source)
    kin, coef = _model(WARMING, temperature=TimeSeries([0.0, 40000.0], [190.0, 240.0], "temperature"))
    t = np.linspace(0.0, 40000.0, 21)
    tp = TangentParameters.from_names(kin, reactions=["a_b"])
    res = integrate_batch(kin, coef, np.array([[1e12, 0.0]]), t, rtol=1e-9, atol=1e-3, tangent=tp)
    a = res.y[0, :, 0]
    air = res.fixed[:, kin.fixed_species.index("M")]
    assert a[-1] < 0.2 * a[0] and air[-1] < 0.85 * air[0]
    np.testing.assert_allclose(res.sensitivity[:, 0, 0] / 1e12,
                               a * np.log(a / air / (a[0] / air[0])) / 1e12, rtol=0, atol=1e-6)


def test_unknown_parameter_is_a_clear_error():
    kin, coef = _model(CHAIN)
    with pytest.raises(ValueError, match=r"unknown reaction 'a_c'.*did you mean 'b_c'.*valid: a_b, b_c"):
        TangentParameters.from_names(kin, reactions=["a_c"])
    with pytest.raises(ValueError, match="unknown integrated species 'M'"):
        TangentParameters.from_names(kin, initial=["M"])
    tp = TangentParameters.from_names(kin, reactions=["a_b"])
    with pytest.raises(ValueError, match="batch of one member"):
        integrate_batch(kin, coef, np.ones((2, 3)), [0.0, 1.0], tangent=tp)
