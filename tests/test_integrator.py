"""The Rosenbrock integrator and the time loop against closed forms and published references."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from boxchem.errors import IntegrationError
from boxchem.mechanism import parse_mechanism
from boxchem.mechanism.ratelaws import RateEvaluator
from boxchem.solver import (RODAS3, ROS3, CompiledKinetics, RateCoefficientModel,
                            integrate_box)
from boxchem.solver.rosenbrock import rosenbrock_step

DATA = Path(__file__).resolve().parent / "data" / "mech"
ROOT = Path(__file__).resolve().parents[1]


def _constant_rates(text: str):
    """Kinetics and a constant k(t) for a mechanism of constant-law reactions."""
    mech = parse_mechanism(text)
    kin = CompiledKinetics(mech)
    k = RateEvaluator(mech).thermal(250.0, 1.0)
    fixed = kin.fixed_number_densities(1.0)
    return kin, (lambda t: (k, fixed))


CHAIN = """
[species]
A  lumped
B  lumped
C  lumped
[reactions]
a_b   A -> B   constant  k=1e-3  ref="invented test value"
b_c   B -> C   constant  k=2.5e-4  ref="invented test value"
"""


# -- the methods' coefficients -------------------------------------------------
@pytest.mark.parametrize("method", [ROS3, RODAS3])
def test_methods_converge_with_their_stated_orders(method):
    # y' = cos(t) y, y(0) = 1 has y = exp(sin t) (closed form, common practice).
    # Fixed steps: the global error must fall as h^3 (main) and h^2 (embedded);
    # a mistyped coefficient breaks an order condition and lowers the observed order.
    def run(n, embedded):
        y, t, h = np.ones(1), 0.0, 2.0 / n
        for _ in range(n):
            f = np.cos(t) * y
            y_new, err, _ = rosenbrock_step(lambda tt, yy: np.cos(tt) * yy, np.array([[np.cos(t)]]),
                                            f, -np.sin(t) * y, t, y, h, method)
            y = y_new - err if embedded else y_new
            t += h
        return abs(y[0] - np.exp(np.sin(2.0)))

    main = np.log2(run(40, False) / run(80, False))
    low = np.log2(run(40, True) / run(80, True))
    assert 2.8 < main < 3.4
    assert 1.8 < low < 2.3


# -- closed forms --------------------------------------------------------------
def test_first_order_decay_matches_exponential():
    # A(t) = A0 exp(-k t): first-order kinetics (e.g. Atkins' Physical Chemistry, ch. on rate laws).
    kin, coef = _constant_rates(CHAIN)
    t = np.linspace(0.0, 5000.0, 11)
    res = integrate_box(kin, coef, [1e12, 0.0, 0.0], t, rtol=1e-7, atol=1e-2)
    a = res.y[:, kin.variable_species.index("A")]
    np.testing.assert_allclose(a, 1e12 * np.exp(-1e-3 * t), rtol=2e-6)
    # an order-3 method at rtol 1e-7 needs (k h)^3 ~ 1e-7, k h ~ 5e-3: ~1000 steps over k t = 5
    # at most (estimate, common practice)
    assert res.success and res.steps < 1000


def test_consecutive_first_order_reactions_match_bateman_solution():
    # A -> B -> C: B(t) = A0 k1/(k2 - k1) (exp(-k1 t) - exp(-k2 t))
    # (Bateman 1910, Proc. Camb. Phil. Soc. 15, 423; consecutive reactions in Atkins' Physical Chemistry).
    kin, coef = _constant_rates(CHAIN)
    k1, k2, a0 = 1e-3, 2.5e-4, 1e12
    t = np.linspace(0.0, 20000.0, 41)
    res = integrate_box(kin, coef, [a0, 0.0, 0.0], t, rtol=1e-7, atol=1e-2)
    b_exact = a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))
    c_exact = a0 - a0 * np.exp(-k1 * t) - b_exact
    b = res.y[:, kin.variable_species.index("B")]
    c = res.y[:, kin.variable_species.index("C")]
    np.testing.assert_allclose(b, b_exact, rtol=1e-5, atol=1e-6 * a0)
    np.testing.assert_allclose(c, c_exact, rtol=1e-5, atol=1e-6 * a0)
    # mass conservation of the closed chain (common practice, no source)
    np.testing.assert_allclose(res.y.sum(axis=1), a0, rtol=1e-12)


# -- the classic stiff problem ---------------------------------------------------
def test_robertson_problem_matches_published_reference_with_bounded_work():
    kin, coef = _constant_rates((DATA / "robertson.mech").read_text())
    res = integrate_box(kin, coef, [1.0, 0.0, 0.0], [0.0, 40.0], rtol=1e-6, atol=1e-12)
    a, b, c = res.y[-1]
    # Hairer & Wanner (1996), Solving ODEs II, section IV.10, reference solution at t = 40
    # (y1 = 0.7158270687, y2 = 9.185534764e-6, y3 = 0.2841637457; recalled from memory).
    assert a == pytest.approx(0.7158270687, rel=1e-5, abs=0)
    assert b == pytest.approx(9.185534764e-6, rel=1e-4, abs=0)
    assert c == pytest.approx(0.2841637457, rel=1e-5, abs=0)
    # An explicit method would need ~1e5+ steps here (stiffness ratio ~1e4 / step limit
    # ~1e-3 s); these bounds fail as soon as the stiff handling is lost.
    assert res.steps < 600, res.counters()
    assert res.rhs_evaluations < 4 * 600 and res.lu_decompositions < 700


def test_robertson_problem_long_time_reference():
    kin, coef = _constant_rates((DATA / "robertson.mech").read_text())
    res = integrate_box(kin, coef, [1.0, 0.0, 0.0], [0.0, 1e11], rtol=1e-5, atol=1e-20)
    # Test Set for IVP Solvers (Mazzia & Magherini, Univ. of Bari), problem ROBER, reference
    # at t = 1e11: y1 = 2.083340149701255e-08, y2 = 8.333360770334713e-14,
    # y3 = 0.9999999791665050 (recalled from memory).
    a, b, c = res.y[-1]
    assert a == pytest.approx(2.083340149701255e-08, rel=1e-3, abs=0)
    assert b == pytest.approx(8.333360770334713e-14, rel=1e-3, abs=0)
    assert c == pytest.approx(0.9999999791665050, rel=1e-9, abs=0)
    assert res.steps < 2000, res.counters()


# -- non-negativity, outputs, breakpoints ----------------------------------------
def test_fast_titration_stays_non_negative():
    # A + B -> C with A0 > B0: B is used up within ~1e-3 s; it must never go negative.
    kin, coef = _constant_rates("""
[species]
A  lumped
B  lumped
C  lumped
[reactions]
ab  A + B -> C   constant  k=1e-6  ref="invented test value"
""")
    t = np.concatenate([np.linspace(0.0, 0.005, 11), np.linspace(0.01, 100.0, 50)])
    res = integrate_box(kin, coef, [2e9, 1e9, 0.0], t)
    assert np.all(res.y >= 0.0)
    b = res.y[:, kin.variable_species.index("B")]
    # closed form for A + B -> C: B = B0 (A0 - B0) / (A0 exp((A0 - B0) k t) - B0) (common practice)
    early = t <= 0.005
    exact = 1e9 * 1e9 / (2e9 * np.exp(1e9 * 1e-6 * t[early]) - 1e9)
    np.testing.assert_allclose(b[early], exact, rtol=1e-3)
    assert b[-1] < 1.0


def test_output_times_are_solution_values_and_do_not_reset_steps():
    kin, coef = _constant_rates(CHAIN)
    few = integrate_box(kin, coef, [1e12, 0, 0], [0.0, 20000.0], atol=1e-2)
    t_many = np.sort(np.concatenate([[0.0, 20000.0], np.random.default_rng(0).uniform(1, 19999, 300)]))
    many = integrate_box(kin, coef, [1e12, 0, 0], t_many, atol=1e-2)
    # values at arbitrary output times: the closed form (see the Bateman test above)
    np.testing.assert_allclose(many.y[:, 0], 1e12 * np.exp(-1e-3 * t_many), rtol=1e-3)
    # stopping on 300 outputs costs about one extra step each, not a restart of the step history
    assert many.steps <= few.steps + 301 + 20
    np.testing.assert_allclose(many.y[-1], few.y[-1], rtol=1e-3)


def test_time_dependent_rate_coefficient_matches_closed_form():
    # A -> B with k(t) = k0 (1 + sin(w t)): A = A0 exp(-k0 (t + (1 - cos(w t)) / w))
    # (separable first-order ODE, closed form; common practice, no source).  Checks the
    # linear-in-time k within steps and the df/dt term of the Rosenbrock stages.
    kin, _ = _constant_rates(CHAIN)
    k0, w = 1e-4, 2 * np.pi / 3600.0
    fixed = kin.fixed_number_densities(1.0)

    def coef(t):
        return np.array([k0 * (1 + np.sin(w * t)), 0.0]), fixed

    t = np.linspace(0.0, 4 * 3600.0, 17)
    exact = 1e12 * np.exp(-k0 * (t + (1 - np.cos(w * t)) / w))
    loose = integrate_box(kin, coef, [1e12, 0, 0], t, rtol=1e-4, atol=1e-2)
    tight = integrate_box(kin, coef, [1e12, 0, 0], t, rtol=1e-7, atol=1e-2)
    np.testing.assert_allclose(loose.y[:, 0], exact, rtol=1e-3)
    np.testing.assert_allclose(tight.y[:, 0], exact, rtol=2e-6)


def test_progress_is_reported_at_each_output_time_and_max_step_holds():
    kin, coef = _constant_rates(CHAIN)
    seen = []
    t = np.linspace(0.0, 10000.0, 6)
    res = integrate_box(kin, coef, [1e12, 0, 0], t, progress=seen.append, max_step=50.0)
    assert seen == list(t[1:])
    assert res.steps >= 10000.0 / 50.0  # no step longer than max_step


def test_steps_end_on_breakpoints_where_k_jumps():
    # k switches on at t_b = 1234.5 s (sunrise-like): A = A0 for t < t_b,
    # A0 exp(-k (t - t_b)) after (closed form, common practice).
    kin, _ = _constant_rates(CHAIN)
    t_b, kon = 1234.5, 1e-2
    fixed = kin.fixed_number_densities(1.0)

    def coef(t):
        return np.array([kon if t > t_b else 0.0, 0.0]), fixed

    t = np.linspace(0.0, 3000.0, 7)
    res = integrate_box(kin, coef, [1e12, 0, 0], t, breakpoints_s=[t_b], rtol=1e-6)
    exact = 1e12 * np.exp(-kon * np.clip(t - t_b, 0, None))
    np.testing.assert_allclose(res.y[:, 0], exact, rtol=1e-4, atol=1e3)


def test_jump_near_an_inexact_breakpoint_is_crossed_at_tight_tolerance():
    # The horizon search locates sunrise only to +-1 s.  Here k of A -> B switches on
    # 0.4 s after the given breakpoint and B -> C is very fast (B is stiff and starts at 0,
    # like O1D at sunrise).  The loop must cross the jump even at a tight tolerance, with
    # the switch displaced by at most the window w: |error of A| <= k_on w A (closed form
    # A = A0 exp(-k_on (t - t_on)); common practice, no source).
    kin, _ = _constant_rates(CHAIN)
    t_b, t_on, k_on = 500.0, 500.4, 1e-3
    fixed = kin.fixed_number_densities(1.0)

    def coef(t):
        return np.array([k_on if t > t_on else 0.0, 1e6]), fixed

    t = np.array([0.0, 400.0, 600.0, 1000.0])
    res = integrate_box(kin, coef, [1e12, 0.0, 0.0], t, breakpoints_s=[t_b], rtol=1e-7, atol=1e-2,
                        breakpoint_width_s=1.0)
    assert res.success
    exact = 1e12 * np.exp(-k_on * np.clip(t - t_on, 0.0, None))
    np.testing.assert_allclose(res.y[:, 0], exact, rtol=k_on * 1.0 + 1e-7)
    assert res.steps < 2000, res.counters()


def test_failure_names_time_step_species_and_keeps_partial_results():
    # The rate coefficient of A -> B turns non-finite after t = 55 s (a broken input, e.g. a
    # temperature series with a hole): the loop must stop there, name A, and keep what it had.
    kin, _ = _constant_rates(CHAIN)
    fixed = kin.fixed_number_densities(1.0)

    def coef(t):
        return np.array([1e-3 if t <= 55.0 else np.nan, 2.5e-4]), fixed

    t = np.arange(0.0, 201.0, 10.0)
    with pytest.raises(IntegrationError) as info:
        integrate_box(kin, coef, [1e12, 0.0, 0.0], t)
    err = info.value
    assert err.worst_species == "A"
    assert 54.0 < float(err.time) <= 55.0
    assert err.step_size is not None and err.step_size < 1e-6
    assert "A" in str(err) and "step size" in str(err) and "non-finite" in str(err)
    part = err.partial_result
    assert part.status == -1 and list(part.times) == [0.0, 10.0, 20.0, 30.0, 40.0, 50.0]
    # the partial values are the solution up to the failure (first-order decay, closed form)
    np.testing.assert_allclose(part.y[:, 0], 1e12 * np.exp(-1e-3 * part.times), rtol=1e-4)
    # without raising, the same partial result comes back
    res = integrate_box(kin, coef, [1e12, 0.0, 0.0], t, raise_on_failure=False)
    assert not res.success and "minimum" in res.message and len(res.times) == 6


def test_bad_arguments_name_the_argument():
    kin, coef = _constant_rates(CHAIN)
    with pytest.raises(ValueError, match="output_times_s"):
        integrate_box(kin, coef, [1, 0, 0], [0.0, 0.0])
    with pytest.raises(ValueError, match="y0"):
        integrate_box(kin, coef, [1, 0], [0.0, 1.0])
    with pytest.raises(ValueError, match="rtol"):
        integrate_box(kin, coef, [1, 0, 0], [0.0, 1.0], rtol=0)


# -- the shipped mechanism under the real sun -----------------------------------
def _polar_setup(scale=None, temperature=195.0, pressure=6000.0):
    from boxchem.environment.history import Environment
    from boxchem.mechanism import load_mechanism
    from boxchem.photolysis.rates import PhotolysisRates

    mech = load_mechanism(str(ROOT / "mechanisms" / "stratosphere.mech"))
    kin = CompiledKinetics(mech)
    # invented demo conditions: 70 S, 60 hPa, 195 K, late August
    env = Environment("2026-08-20T00:00:00Z", temperature=temperature, latitude=-70.0, longitude=0.0,
                      ozone_column=250.0, pressure=pressure, altitude=18500.0,
                      psc_area=2e-8, sulfate_area=5e-9)
    phot = PhotolysisRates(mech, altitude_m=18500.0, method="parametric")
    coef = RateCoefficientModel(mech, None, phot, env, scale=scale, kinetics=kin)
    air = float(env.at(0.0).air_density)
    mixing = {"O3": 2.6e-6, "H2O": 4e-6, "CH4": 1.3e-6, "N2O": 120e-9, "HNO3": 3e-9, "NO2": 20e-12,
              "HCl": 0.6e-9, "ClONO2": 0.2e-9, "ClO": 0.3e-9, "Cl2O2": 0.9e-9, "CFCl3": 30e-12,
              "CH3Cl": 50e-12, "BrO": 10e-12, "BrONO2": 3e-12, "HBr": 1e-12, "CH3Br": 1e-12, "CO": 15e-9}
    y0 = np.array([mixing.get(s, 0.0) * air for s in kin.variable_species])
    return mech, kin, env, coef, y0


@pytest.mark.skipif(not (ROOT / "mechanisms" / "stratosphere.mech").exists(), reason="no shipped mechanism")
def test_multi_day_polar_run_conserves_cl_br_n_atoms():
    # Balanced chemistry conserves each element (common practice, no source).  N moves into
    # the fixed N2 through O1D + N2O -> N2 + O2 and N2O photolysis; both are switched off
    # here so that the N atoms stay among the integrated species.
    mech, kin, env, coef, y0 = _polar_setup(scale={"o1d_n2o_b": 0.0, "j_n2o": 0.0})
    t = np.arange(0.0, 3 * 86400.0 + 1, 3600.0)
    res = integrate_box(kin, coef, y0, t, breakpoints_s=env.horizon_crossings(0.0, t[-1]))
    assert res.success
    for element in ("Cl", "Br", "N"):
        w = np.array([mech.species_by_name(s).atoms(element) for s in kin.variable_species], float)
        total = res.y @ w
        assert np.max(np.abs(total / total[0] - 1)) < 1e-6, element
    assert np.all(res.y >= 0)


@pytest.mark.skipif(not (ROOT / "mechanisms" / "stratosphere.mech").exists(), reason="no shipped mechanism")
def test_atom_mole_fractions_conserved_while_the_air_warms_and_expands():
    # Balanced chemistry conserves each element, and an expanding closed parcel keeps
    # mixing ratios (common practice, no source): Cl, Br, N totals divided by [M] stay
    # constant through a 10 K warming with a falling pressure (invented demo ramp).
    from boxchem.environment.history import TimeSeries
    day3 = 3 * 86400.0
    mech, kin, env, coef, y0 = _polar_setup(
        scale={"o1d_n2o_b": 0.0, "j_n2o": 0.0},
        temperature=TimeSeries([0.0, day3], [190.0, 200.0], "temperature"),
        pressure=TimeSeries([0.0, day3 / 2, day3], [6000.0, 5800.0, 5900.0], "pressure"))
    t = np.arange(0.0, day3 + 1, 3600.0)
    res = integrate_box(kin, coef, y0, t, breakpoints_s=env.horizon_crossings(0.0, t[-1]))
    assert res.success
    air = coef.air_density(t)
    assert abs(air[-1] / air[0] - 1) > 0.05   # the air really changed (5900/200 vs 6000/190)
    for element in ("Cl", "Br", "N"):
        w = np.array([mech.species_by_name(s).atoms(element) for s in kin.variable_species], float)
        x = (res.y @ w) / air
        assert np.max(np.abs(x / x[0] - 1)) < 1e-6, element


@pytest.mark.skipif(not (ROOT / "mechanisms" / "stratosphere.mech").exists(), reason="no shipped mechanism")
def test_rate_coefficient_model_caches_thermal_k_and_applies_scale():
    mech, kin, env, coef, y0 = _polar_setup()
    k_night, fixed = coef(0.0)
    for t in np.linspace(0, 86400, 50):
        coef(t)
    assert coef.thermal_evaluations == 1  # constant T and [M]: computed once
    air = float(env.at(0.0).air_density)
    assert fixed[kin.fixed_species.index("M")] == pytest.approx(air, rel=1e-14, abs=0)
    assert fixed[kin.fixed_species.index("O2")] == pytest.approx(0.2095 * air, rel=1e-14, abs=0)
    ev = RateEvaluator(mech)
    np.testing.assert_allclose(coef(0.0)[0][ev.thermal_index],
                               ev.thermal(195.0, air)[ev.thermal_index], rtol=1e-14)
    scaled = RateCoefficientModel(mech, ev, coef.photolysis_rates, env, scale={"clo_clo_m": 1.5},
                                  kinetics=kin)
    i = kin.reaction_ids.index("clo_clo_m")
    assert scaled(0.0)[0][i] == pytest.approx(1.5 * k_night[i], rel=1e-14, abs=0)
    with pytest.raises(Exception, match="scale.clo_clo_n: .*did you mean 'clo_clo_m'"):
        RateCoefficientModel(mech, ev, coef.photolysis_rates, env, scale={"clo_clo_n": 2.0})


@pytest.mark.skipif(not (ROOT / "mechanisms" / "stratosphere.mech").exists(), reason="no shipped mechanism")
def test_rate_coefficient_model_follows_drifting_temperature_and_the_sun():
    from boxchem.environment.history import Environment, PscThresholdRule, TimeSeries
    from boxchem.mechanism import load_mechanism
    from boxchem.photolysis.rates import PhotolysisRates

    mech = load_mechanism(str(ROOT / "mechanisms" / "stratosphere.mech"))
    # invented demo conditions: a warming from 190 K to 201 K over 10 days, PSC below 195 K
    env = Environment("2026-09-01T00:00:00Z", latitude=-70.0, longitude=0.0, ozone_column=250.0,
                      temperature=TimeSeries([0.0, 864000.0], [190.0, 201.0], "temperature"),
                      pressure=TimeSeries([0.0, 864000.0], [6000.0, 5500.0], "pressure"),
                      altitude=18500.0, psc_area=PscThresholdRule(2e-8), sulfate_area=5e-9)
    phot = PhotolysisRates(mech, altitude_m=18500.0, method="parametric")
    ev = RateEvaluator(mech)
    model = RateCoefficientModel(mech, ev, phot, env)
    times = np.linspace(0.0, 864000.0, 2001)
    worst = 0.0
    for t in times:
        k, _ = model(t)
        s = env.at(t)
        exact = (ev.thermal(s.temperature, s.air_density) + ev.surface(s.temperature, s.psc_area, s.sulfate_area)
                 + phot(s.solar_zenith_angle, s.ozone_column, s.temperature, s.distance_factor))
        worst = max(worst, np.max(np.abs(k - exact) / np.maximum(np.abs(exact), 1e-300)))
        if s.solar_zenith_angle >= s.horizon_zenith_angle:
            assert np.all(k[ev.photolysis_index] == 0.0)  # J exactly zero below the horizon
    # bilinear interpolation of ln k between exact grid nodes: error bound in coefficients.py
    assert worst < 2e-5
    # exact evaluations only at the grid nodes the air passes (about one per cell crossed
    # in T and in ln[M], two per cell along the path), not at every call
    from boxchem.solver.coefficients import THERMAL_GRID_K, THERMAL_GRID_LOG_AIR
    air_change = abs(np.log(float(env.at(864000.0).air_density) / float(env.at(0.0).air_density)))
    cells = 11.0 / THERMAL_GRID_K + air_change / THERMAL_GRID_LOG_AIR + 1
    assert model.thermal_evaluations <= 2 * cells + 2
    # k(t) is a function of t alone: the same time gives the same k after other calls
    k_first = model(123456.0)[0]
    model(800000.0)
    np.testing.assert_array_equal(model(123456.0)[0], k_first)


def test_rosenbrock_step_on_a_batch_equals_per_member_steps():
    # Ensembles later run as one batch: the batched step must reproduce each member's step.
    from boxchem.solver.rosenbrock import rosenbrock_step

    kin, _ = _constant_rates((DATA / "robertson.mech").read_text())
    rng = np.random.default_rng(7)
    members = 4
    y = np.abs(rng.normal(size=(members, 3))) * [1.0, 1e-5, 0.1]
    k = RateEvaluator(parse_mechanism((DATA / "robertson.mech").read_text())).thermal(250.0, 1.0)
    k = k * rng.uniform(0.5, 2.0, size=(members, k.size))      # perturbed rate sets
    fixed = np.broadcast_to(kin.fixed_number_densities(1.0), (members, kin.n_fixed))
    fun = (lambda tt, yy: kin.rhs(yy, k, fixed))
    f0 = kin.rhs(y, k, fixed)
    jac = kin.jacobian(y, k, fixed)
    y_b, e_b, _ = rosenbrock_step(fun, jac.copy(), f0, None, 0.0, y, 0.1, RODAS3)
    for m in range(members):
        y_m, e_m, _ = rosenbrock_step(lambda tt, yy: kin.rhs(yy, k[m], fixed[m]), jac[m].copy(),
                                      f0[m], None, 0.0, y[m], 0.1, RODAS3)
        np.testing.assert_allclose(y_b[m], y_m, rtol=1e-12, atol=1e-18)
        np.testing.assert_allclose(e_b[m], e_m, rtol=1e-9, atol=1e-18)


# -- the air expanding and compressed ----------------------------------------------
TRACER = """
[species]
X   lumped           # inert tracer: in no reaction
A   lumped
B   lumped
M   fixed
O2  fixed  0.2095
[reactions]
a_b   A + O2 -> B + O2   constant  k=1e-22  ref="invented test value"
"""


def _paths():
    from boxchem.solver.compiled import _numba
    return [False] + ([True] if _numba is not None else [])


@pytest.mark.parametrize("compiled", _paths())
@pytest.mark.parametrize("series", ["warming", "pressure"])
def test_inert_tracer_keeps_its_mole_fraction_when_the_air_changes(series, compiled):
    # A closed air parcel that expands or is compressed keeps the mixing ratio of an
    # unreactive species (ideal gas, common practice, no source): X/[M] must stay at its
    # start value to 1e-9 through a warming at constant pressure and a pressure series
    # with knots inside the output intervals (invented demo values).
    from boxchem.environment.history import Environment, TimeSeries
    day2 = 2 * 86400.0
    if series == "warming":
        kw = dict(temperature=TimeSeries([0.0, day2], [188.0, 198.0], "temperature"), pressure=5500.0)
    else:
        kw = dict(temperature=195.0, pressure=TimeSeries(
            [0.0, 30000.0, 100000.0, day2], [5500.0, 6500.0, 4000.0, 5000.0], "pressure"))
    env = Environment("2026-06-01T00:00:00Z", latitude=-80.0, longitude=0.0, ozone_column=270.0,
                      altitude=19000.0, **kw)
    mech = parse_mechanism(TRACER)
    kin = CompiledKinetics(mech)
    coef = RateCoefficientModel(mech, None, None, env, kinetics=kin)
    t = np.arange(0.0, day2 + 1, 3600.0)
    air = coef.air_density(t)
    x0 = np.array([2e-9, 1e-6, 0.0])
    y0 = x0 * air[0]
    # a breakpoint (k one-sided there) must not break the telescoping of the air factors
    res = integrate_box(kin, coef, y0, t, breakpoints_s=[50000.5], compiled=compiled)
    assert res.success and res.settings.get("compiled", False) == compiled
    x = res.y[:, kin.variable_species.index("X")] / air
    assert abs(air.max() / air.min() - 1) > 0.05          # the air really changed
    np.testing.assert_allclose(x, 2e-9, rtol=1e-9, atol=0)
    # A -> B: the total A + B also follows the air
    np.testing.assert_allclose((res.y[:, 1] + res.y[:, 2]) / air, 1e-6, rtol=1e-9, atol=0)
    assert res.y[-1, 2] > 0                                 # and the reaction did run


@pytest.mark.parametrize("method", [ROS3, RODAS3])
def test_stability_function_is_the_step_on_the_linear_test_equation(method):
    # R(z) must equal one step on y' = lambda y (its definition, Hairer & Wanner 1996, IV.7)
    # and approach exp(z) to O(z^4) for these order-3 methods; L-stability: R(-inf) = 0.
    from boxchem.solver.rosenbrock import stability_function
    for z in (1e-3, 0.02, -0.5, -40.0):
        h = 10.0
        lam = z / h
        y, _, _ = rosenbrock_step(lambda tt, yy: lam * yy, np.array([[lam]]), np.array([lam]),
                                  np.zeros(1), 0.0, np.ones(1), h, method)
        assert stability_function(z, method) == pytest.approx(y[0], rel=1e-14, abs=0)
    small = [abs(stability_function(z, method) - np.exp(z)) for z in (0.02, 0.01)]
    assert 12 < small[0] / small[1] < 20       # error ~ z^4: halving z divides it by ~16
    assert abs(stability_function(-1e12, method)) < 1e-9


# -- the compiled loop against the numpy loop -------------------------------------------
@pytest.mark.skipif(not (ROOT / "mechanisms" / "stratosphere.mech").exists(), reason="no shipped mechanism")
@pytest.mark.skipif(len(_paths()) < 2, reason="numba not installed")
def test_compiled_and_numpy_paths_agree_on_a_polar_day():
    # the same method, tolerances and k(t) (up to the interval tables' interpolation):
    # both solutions must agree within the requested accuracy (a few rtol; common practice)
    from boxchem.environment.history import TimeSeries
    mech, kin, env, coef, y0 = _polar_setup(
        temperature=TimeSeries([0.0, 86400.0], [193.0, 197.0], "temperature"))
    t = np.arange(0.0, 86400.0 + 1, 3600.0)
    bp = env.horizon_crossings(0.0, t[-1])
    assert bp.size == 2          # one sunrise and one sunset: J switches on and off
    fast = integrate_box(kin, coef, y0, t, breakpoints_s=bp, rtol=1e-4, atol=1e2, compiled=True)
    slow = integrate_box(kin, coef, y0, t, breakpoints_s=bp, rtol=1e-4, atol=1e2, compiled=False)
    assert fast.success and slow.success
    scale = np.maximum(np.abs(slow.y).max(axis=0), 1e6)        # 1e6 cm-3: ~1e-11 mol/mol
    assert np.max(np.abs(fast.y - slow.y) / scale) < 2e-3
    i = kin.variable_species.index("O3")
    assert np.max(np.abs(fast.y[:, i] / slow.y[:, i] - 1)) < 1e-4
    # output k: exact in both, except the sulfate gammas that read the box's own HCl, ClONO2
    # and H2O (issue 11): the compiled loop's from its state at the output time, the numpy
    # loop's from the composition it last recorded, which may differ from its state by the
    # record tolerance (coefficients.SURFACE_REFRESH_TOLERANCE, 1 %; ClONO2 20 %, entering
    # through F_HCl; measured up to 1.5 % in k).  So: the compiled k against the exact k of
    # the numpy solution's own states, which agree as closely as the two solutions do
    state = [i for i, r in enumerate(mech.reactions) if r.parameters.get("gamma_from")]
    other = np.setdiff1d(np.arange(kin.n_reactions), state)
    np.testing.assert_allclose(fast.k[:, other], slow.k[:, other], rtol=1e-12)
    at = env.at(t)
    p = np.asarray(at.pressure, dtype=float)
    air = np.asarray(at.air_density, dtype=float)
    pp = {s: slow.y[:, kin.variable_species.index(s)] / air * p for s in ("H2O", "HCl", "ClONO2")}
    exact = coef.evaluator.surface(at.temperature, at.psc_area, at.sulfate_area, at.ice_area,
                                   partial_pressures=pp) * coef.multiplier
    np.testing.assert_allclose(fast.k[:, state], exact[:, state], rtol=2e-3)
    np.testing.assert_allclose(fast.k[:, state], slow.k[:, state], rtol=3e-2)
    # comparable work: the compiled loop does the same steps, not fewer checks
    assert 0.7 < fast.steps / slow.steps < 1.4


@pytest.mark.skipif(not (ROOT / "mechanisms" / "stratosphere.mech").exists(), reason="no shipped mechanism")
def test_interval_tables_reproduce_k_of_t():
    # k(t) of the compiled loop (polynomials in time for T/[M]-dependent k, ln J linear in
    # SZA on a fine grid) against the exact model over a polar day with a temperature ramp;
    # bound from the measured error (DEVELOPERS.md "Solver"), counted where k > 1e-6 of
    # its peak (J falls to zero at the horizon)
    from boxchem.environment.history import TimeSeries
    mech, kin, env, coef, y0 = _polar_setup(
        temperature=TimeSeries([0.0, 86400.0], [193.0, 197.0], "temperature"))
    bp = env.horizon_crossings(0.0, 86400.0)
    edges = np.concatenate(([0.0], bp, [86400.0]))
    got, want = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        ta = a + 1.0 if a in bp else a
        tb = b - 1.0 if b in bp else b
        table = coef.interval_table(a, b, ta, tb)
        for x in np.linspace(0.0, 1.0, 41):
            got.append(table(a + x * (b - a))[0])
            want.append(coef(ta + x * (tb - ta))[0])
        np.testing.assert_allclose(table(a)[1], coef(ta)[1], rtol=1e-12)   # fixed, at the ends
    got, want = np.array(got), np.array(want)
    significant = want > 1e-6 * want.max(axis=0)
    err = np.abs(got - want)[significant] / want[significant]
    assert err.max() < 5e-3
    assert np.all(got[~significant] <= 2e-6 * want.max(axis=0)[np.nonzero(~significant)[1]] + 1e-300)


def test_scenarios_and_solver_share_one_default_tolerance_and_method():
    # one defensible default (reasoning in solver/timeloop.py): a scenario without [solver]
    # keys must integrate exactly as integrate_box's defaults do
    from boxchem import scenario
    from boxchem.solver import DEFAULT_ATOL, DEFAULT_RTOL
    assert scenario.DEFAULT_ATOL_CM3 == DEFAULT_ATOL and scenario.DEFAULT_RTOL == DEFAULT_RTOL
    assert scenario.DEFAULT_SOLVER_METHOD.upper() == RODAS3.name
