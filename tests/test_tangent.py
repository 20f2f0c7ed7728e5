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

MIXED = """
[species]
A  lumped
B  lumped
C  lumped
M  fixed
[reactions]
a_b   A + B -> C   constant  k=1e-15  ref="invented test value"
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


def test_second_order_reaction_needs_the_second_derivative_term():
    # A + B -> C with A0 != B0, D = A0 - B0: A = D A0 / (A0 - B0 e^{-D k t}), hence
    # dA/d ln k = -k t D^2 A0 B0 e^{-D k t} / (A0 - B0 e^{-D k t})^2 (the textbook integrated
    # rate law of a mixed second-order reaction; its derivative: common practice, no source)
    kin, coef = _model(MIXED)
    t = np.linspace(0.0, 10000.0, 21)
    a0, b0, k = 1e12, 0.6e12, 1e-15
    e = np.exp(-(a0 - b0) * k * t)
    a = (a0 - b0) * a0 / (a0 - b0 * e)
    exact = -k * t * (a0 - b0) ** 2 * a0 * b0 * e / (a0 - b0 * e) ** 2
    tp = TangentParameters.from_names(kin, reactions=["a_b"], initial=["A", "B"])
    y0 = np.array([[a0, b0, 0.0]])
    res = integrate_batch(kin, coef, y0, t, rtol=1e-9, atol=1e-3, tangent=tp)
    np.testing.assert_allclose(res.y[0, :, 0] / a0, a / a0, rtol=0, atol=1e-8)
    np.testing.assert_allclose(res.sensitivity[:, 0, 0] / a0, exact / a0, rtol=0, atol=1e-6)
    # initial values: d A / d ln A0 and d A / d ln B0 of the same closed form (its derivative by
    # central differences in ln A0, ln B0, exact to ~1e-10 here)
    def closed(a_0, b_0):
        return (a_0 - b_0) * a_0 / (a_0 - b_0 * np.exp(-(a_0 - b_0) * k * t))
    eps = 1e-5
    da0 = (closed(a0 * np.exp(eps), b0) - closed(a0 * np.exp(-eps), b0)) / (2 * eps)
    db0 = (closed(a0, b0 * np.exp(eps)) - closed(a0, b0 * np.exp(-eps))) / (2 * eps)
    np.testing.assert_allclose(res.sensitivity[:, 1, 0] / a0, da0 / a0, rtol=0, atol=1e-6)
    np.testing.assert_allclose(res.sensitivity[:, 2, 0] / a0, db0 / a0, rtol=0, atol=1e-6)
    # order: with the H K^y term of the augmented stages the error of S follows that of y
    # (measured: 1.8e-6 against 8.0e-7 at rtol 1e-5); without it S would be O(h) (2.6e-3 here,
    # halving per doubling of the steps; DEVELOPERS.md "Forward sensitivities")
    loose = integrate_batch(kin, coef, y0, t, rtol=1e-5, atol=1e-3, tangent=tp)
    err_y = np.abs(loose.y[0, :, 0] - a).max()
    err_s = np.abs(loose.sensitivity[:, 0, 0] - exact).max()
    assert err_s < 5.0 * err_y


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


# ---------------------------------------------------------------------------
# a real scenario: the tangent-linear run against its check, batched central differences
# ---------------------------------------------------------------------------
def test_tangent_run_takes_the_plain_runs_steps_bit_for_bit():
    # the tangent rides on the one step loop (compiled._advance_member): y, the step sequence
    # and every work counter are those of the plain run, to the bit (solver contract; common
    # practice, no source).  Two sunlit days of polar-spring before 1 October: sunrise/sunset
    # breakpoints, surfaces, clipping and rejected steps all occur.  The tangent differentiates
    # the surfaces' exact per-window offsets, so its plain twin runs with those too
    from boxchem.runner import prepare
    from boxchem.scenario import load_scenario
    setup = prepare(load_scenario("polar-spring").with_overrides(
        **{"run.start": "2026-09-29T00:00:00Z", "run.duration": "2 d"}))
    kin, coef, sc = setup.kinetics, setup.coefficients, setup.scenario
    kw = dict(breakpoints_s=setup.breakpoints_s, rtol=sc.rtol, atol=sc.atol)
    tp = TangentParameters(reactions=tuple(range(0, kin.n_reactions, 20)), initial=(0,))
    plain = integrate_batch(kin, coef, setup.y0[None], setup.output_times_s, surface_feedback="member_exact", **kw)
    tangent = integrate_batch(kin, coef, setup.y0[None], setup.output_times_s, tangent=tp, **kw)
    assert plain.status[0] == 0 and tangent.status[0] == 0
    assert plain.rejected_steps[0] > 0
    np.testing.assert_array_equal(tangent.y, plain.y)
    for counter in ("steps", "rejected_steps", "rhs_evaluations", "jacobian_evaluations",
                    "lu_decompositions", "lu_fallbacks"):
        np.testing.assert_array_equal(getattr(tangent, counter), getattr(plain, counter))
    assert np.isfinite(tangent.sensitivity).all() and np.abs(tangent.sensitivity).max() > 0.0


def test_tangent_agrees_with_central_differences_on_sunlit_polar_spring():
    # the last sunlit day before 1 October of polar-spring (PSCs, spectral J, surfaces that follow
    # the composition); the ten largest coefficients of three kinds of metric, the
    # time-resolved O3 and ClO and an initial value, within 2 % (the criterion;
    # measured: 0.4 % at worst).  The tangent differentiates the feedback of the composition on
    # the surfaces and the phase equilibrium (solver/tangent_feedback.py); the season-long check
    # of that is in tests/test_tangent_feedback.py
    import boxchem
    from boxchem.analysis.sensitivity import local_sensitivities, ranking
    scenario = boxchem.load_scenario("polar-spring").with_overrides(
        **{"run.start": "2026-09-30T00:00:00Z", "run.duration": "1 d"})
    metrics = ["o3 = O3 at end", "dimer = loss Ox by clo_dimer over start..end",
               "clo = noon ClO over start..end"]
    tangent = local_sensitivities(scenario, metrics, species=["O3", "ClO"], initial=["O3"],
                                  method="tangent")
    assert tangent.attrs["sensitivity_method"] == "tangent" and tangent.attrs["state_dependent_k"]
    top = list(dict.fromkeys(row["parameter"].split(".", 1)[1] for m in ("o3", "dimer", "clo")
                             for row in ranking(tangent, m, 11)
                             if row["parameter"].startswith("scale.")))
    check = local_sensitivities(scenario, metrics, reactions=top, species=["O3", "ClO"],
                                initial=["O3"], method="differences", step=0.01)
    for m in ("o3", "dimer", "clo"):
        for row in [r for r in ranking(tangent, m, 11) if r["parameter"].startswith("scale.")][:10]:
            fd = float(check["sensitivity"].sel(metric=m, parameter=row["parameter"]))
            assert row["sensitivity"] == pytest.approx(fd, rel=0.02), (m, row["parameter"])
    a = float(tangent["sensitivity"].sel(metric="o3", parameter="initial.O3"))
    b = float(check["sensitivity"].sel(metric="o3", parameter="initial.O3"))
    assert a == pytest.approx(b, rel=0.02) and 0.5 < a < 1.5
    for p in ("scale.clo_clo_m", "scale.j_cl2o2", "initial.O3"):
        x = tangent["species_sensitivity"].sel(parameter=p).isel(time=slice(1, None))
        y = check["species_sensitivity"].sel(parameter=p).isel(time=slice(1, None))
        scale = float(np.abs(y).max())
        assert float(np.abs(x - y).max()) < 0.02 * scale, p
