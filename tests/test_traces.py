"""Kinetic-trace fits (boxchem.analysis.traces): k recovered from synthetic traces with noise."""
import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from boxchem.analysis.traces import (common_uncertainty, fit_first_order_decay, fit_pseudo_first_order,
                                     fit_second_order, fit_traces, rate_table_text,
                                     second_order_concentration)
from boxchem.errors import DataFileError
from boxchem.io.labdata import Trace, read_rate_table, read_trace


def _trace(t, signal, kind="second-order", signal_kind="absorbance", sigma=None, T=250.0, M=2.5e18,
           xs=5e-18, L=80.0, xs_rel=0.0, B=None, name="tr.csv"):
    return Trace(source=name, kind=kind, time=np.asarray(t), signal=np.asarray(signal),
                 signal_sigma=sigma, signal_kind=signal_kind, temperature=T, air_density=M,
                 bath_gas="N2", cross_section=xs, cross_section_rel_sigma=xs_rel, path_length=L,
                 co_reactant=B)


def test_closed_form_solves_the_rate_equation():
    # d[A]/dt = -2k[A]^2 - k1[A] integrated numerically (scipy solve_ivp, tight tolerances)
    k, k1, a0 = 8e-13, 25.0, 5e13
    t = np.linspace(0, 0.2, 50)
    sol = solve_ivp(lambda _, a: -2 * k * a**2 - k1 * a, (0, 0.2), [a0], t_eval=t, rtol=1e-11, atol=1.0)
    np.testing.assert_allclose(second_order_concentration(t, a0, k, k1), sol.y[0], rtol=1e-8)
    # 1/[A] = 1/[A]0 + 2kt without the first-order term (common practice, no source)
    np.testing.assert_allclose(1 / second_order_concentration(t, a0, k), 1 / a0 + 2 * k * t, rtol=1e-12)


def test_second_order_absorbance_trace_recovers_k():
    # Beer-Lambert: ln(I0/I) = sigma L [A]; [A] from 1/[A] = 1/[A]0 + 2kt (common practice, no source)
    rng = np.random.default_rng(1)
    k, a0, xs, L = 1.5e-13, 6e13, 5e-18, 80.0
    t = np.linspace(-0.02, 0.5, 300)
    conc = np.where(t > 0, a0 / (1 + 2 * k * a0 * np.clip(t, 0, None)), 0.0)
    noise = 2e-4
    pulls = []
    for seed in range(30):
        rng = np.random.default_rng(seed)
        y = xs * L * conc + rng.normal(0, noise, t.size)
        fit = fit_second_order(_trace(t, y, xs=xs, L=L, xs_rel=0.05))
        pulls.append((fit.k - k) / fit.k_sigma_fit)
        # the 5 % cross-section uncertainty adds in quadrature
        assert fit.k_sigma == pytest.approx(math.hypot(fit.k_sigma_fit, 0.05 * fit.k), rel=1e-9)
    pulls = np.array(pulls)
    assert abs(np.mean(pulls)) < 0.6 and 0.6 < np.std(pulls) < 1.5
    assert abs(fit.k / k - 1) < 0.02   # a factor-2 error in the 2k convention would fail this


def test_second_order_with_baseline_and_first_order_loss():
    # synthetic trace from a numerical integration, not from the closed form under test
    k, k1, a0, base = 2e-13, 40.0, 5e13, 3e-3
    t = np.linspace(0.0005, 0.3, 400)
    sol = solve_ivp(lambda _, a: -2 * k * a**2 - k1 * a, (0, 0.3), [a0], t_eval=t, rtol=1e-10, atol=1.0)
    rng = np.random.default_rng(3)
    y = sol.y[0] + base / (5e-18 * 80) + rng.normal(0, 2e11, t.size)
    tr = _trace(t, y, signal_kind="concentration", xs=None, L=None)
    fit = fit_second_order(tr, baseline=True, first_order_loss=True)
    assert abs(fit.k - k) < 3 * fit.k_sigma and abs(fit.k / k - 1) < 0.05
    k1_fit = fit.values[fit.names.index("k1")]
    assert abs(k1_fit - k1) < 0.25 * k1
    # ignoring the first-order loss biases k upwards: the fit without it is worse
    plain = fit_second_order(tr, baseline=True)
    assert plain.result.chi2 > 1.5 * fit.result.chi2


def test_pseudo_first_order_traces_give_k_from_the_slope():
    # S = S0 exp(-k' t) + b, k' = k[B] + k_d (common practice, no source)
    k, kd = 1.1e-11, 60.0
    fits = []
    for i, B in enumerate((1e13, 2.5e13, 5e13, 8e13)):
        kp = k * B + kd
        t = np.linspace(-0.5 / kp, 6 / kp, 200)
        rng = np.random.default_rng(i)
        y = np.where(t > 0, 1000 * np.exp(-kp * np.clip(t, 0, None)), 0.0) + 20 + rng.normal(0, 10, t.size)
        tr = _trace(t, y, kind="pseudo-first-order", signal_kind="signal", B=B, name=f"p{i}.txt")
        f = fit_first_order_decay(tr, baseline=True)
        assert abs(f.k - kp) < 4 * f.k_sigma
        fits.append(f)
    line = fit_pseudo_first_order(fits)
    assert abs(line.k - k) < 3 * line.k_sigma and abs(line.k / k - 1) < 0.03
    assert abs(line.intercept - kd) < 3 * line.intercept_sigma + 5


def test_traces_become_a_rate_table_that_fit_reads(tmp_path):
    rng = np.random.default_rng(8)
    traces = []
    for T, M in ((220.0, 2e18), (250.0, 8e18), (280.0, 3e19)):
        k = 1e-13 * (T / 250.0) ** -3 * (M / 8e18) ** 0.7
        t = np.linspace(0.0, 0.4, 200)
        y = 5e-18 * 80 * second_order_concentration(t, 6e13, k) + rng.normal(0, 2e-4, t.size)
        traces.append(_trace(t, y, T=T, M=M, xs_rel=0.05, name=f"tr{T:.0f}.csv"))
    fits, lines, rows = fit_traces(traces)
    assert len(rows) == 3 and not lines
    text = rate_table_text(rows, ["test"], common_uncertainty(traces))
    path = tmp_path / "k.csv"
    path.write_text(text)
    tab = read_rate_table(path)
    np.testing.assert_allclose(tab.value, [f.k for f in fits], rtol=1e-6)
    np.testing.assert_allclose(tab.sigma, [f.k_sigma_fit for f in fits], rtol=1e-3)
    np.testing.assert_allclose(tab.air_density, [2e18, 8e18, 3e19], rtol=1e-6)
    assert tab.common_rel_sigma == pytest.approx(0.05)


def test_mixed_kinds_refused():
    t = np.linspace(0, 1, 10)
    a = _trace(t, np.exp(-t))
    b = _trace(t, np.exp(-t), kind="pseudo-first-order", signal_kind="signal", B=1e13)
    with pytest.raises(Exception, match="mix kinds"):
        fit_traces([a, b])


def test_example_trace_files_read():
    # the shipped synthetic examples stay readable (they are the docs' walk-through)
    from pathlib import Path
    folder = Path(__file__).resolve().parents[1] / "examples" / "lab-fit" / "traces"
    files = sorted(folder.glob("*"))
    assert len(files) >= 6
    for f in files:
        tr = read_trace(f)
        assert tr.time.size > 100
    with pytest.raises(DataFileError):
        read_trace(folder / "missing.csv")
