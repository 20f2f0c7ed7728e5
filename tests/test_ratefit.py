"""Rate-law fits (boxchem.analysis.ratefit): recovery, coverage, curve_fit agreement, evaluated data."""
import math

import numpy as np
import pytest
from scipy.optimize import curve_fit

from boxchem.analysis.ratefit import FitError, fit_rate_table, mechanism_override_text, mechanism_snippet
from boxchem.io.labdata import RateTable
from boxchem.mechanism import load_mechanism, parse_mechanism
from boxchem.mechanism.ratelaws import RateEvaluator


def _table(T, k, sigma=None, M=None, units="cm3 s-1", kind="k", bath="N2", common=0.0):
    T = np.asarray(T, dtype=float)
    return RateTable(source="synthetic.csv", kind=kind, temperature=T,
                     air_density=np.full(T.size, np.nan) if M is None else np.asarray(M, dtype=float),
                     value=np.asarray(k, dtype=float), sigma=None if sigma is None else np.asarray(sigma),
                     value_units=units, bath_gas=(bath,) * T.size, line=np.arange(2, T.size + 2),
                     common_rel_sigma=common)


def _arrhenius(T, A, E_R):
    # k = A exp(-(E/R)/T), written out here rather than taken from the code under test
    return A * np.exp(-E_R / np.asarray(T))


def _falloff(T, M, k0, n, kinf, m, Fc=0.6, Tref=300.0):
    # JPL termolecular form (Burkholder et al., 2019, JPL Publication 19-5, section 2), written out
    k0T = k0 * (T / Tref) ** -n
    kinfT = kinf * (T / Tref) ** -m
    x = k0T * M / kinfT
    return k0T * M / (1 + x) * Fc ** (1 / (1 + np.log10(x) ** 2))


T12 = np.linspace(200.0, 300.0, 12)


# ---------------------------------------------------------------- evaluated expressions

def test_arrhenius_fit_returns_the_evaluated_parameters_of_cl_o3():
    # Cl + O3: k = 2.3e-11 exp(-200/T), JPL 19-5 Table 1 (recalled from memory); exact points
    k = _arrhenius(T12, 2.3e-11, 200.0)
    fit = fit_rate_table(_table(T12, k, 0.05 * k), "arrhenius")
    assert fit.parameters["A"] == pytest.approx(2.3e-11, rel=1e-6)
    assert fit.parameters["E/R"] == pytest.approx(200.0, abs=1e-4)
    assert fit.result.chi2 < 1e-12


def test_falloff_fit_returns_the_evaluated_parameters_of_clo_clo_m():
    # ClO + ClO + M: k0 = 1.9e-32 (T/300)^-3.6, kinf = 3.7e-12 (T/300)^-1.6, Fc = 0.6,
    # JPL 19-5 Table 2 (recalled from memory); exact points on a (T, [M]) grid
    T = np.repeat([190.0, 210.0, 240.0, 270.0, 300.0], 6)
    M = np.tile(np.geomspace(1e17, 5e19, 6), 5)
    k = _falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6)
    fit = fit_rate_table(_table(T, k, 0.05 * k, M=M), "falloff")
    p = fit.parameters
    assert p["k0"] == pytest.approx(1.9e-32, rel=1e-5)
    assert p["n"] == pytest.approx(3.6, abs=1e-4)
    assert p["kinf"] == pytest.approx(3.7e-12, rel=1e-4)
    assert p["m"] == pytest.approx(1.6, abs=1e-3)
    # with Fc fitted too, the exact data give Fc = 0.6 back
    fit_fc = fit_rate_table(_table(T, k, 0.05 * k, M=M), "falloff", fc=None)
    assert fit_fc.parameters["Fc"] == pytest.approx(0.6, abs=1e-3)


def test_falloff_fit_of_termolecular_k_over_M():
    # the same evaluated points given as k/[M] in cm6 molecule-2 s-1 (JPL 19-5 Table 2, recalled)
    T = np.repeat([200.0, 250.0, 300.0], 5)
    M = np.tile(np.geomspace(1e17, 5e19, 5), 3)
    k = _falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6)
    fit = fit_rate_table(_table(T, k / M, 0.05 * k / M, M=M, units="cm6 s-1"), "falloff")
    assert fit.parameters["k0"] == pytest.approx(1.9e-32, rel=1e-5)


def test_equilibrium_fit_returns_the_evaluated_constant_of_the_clo_dimer():
    # K = 2.16e-27 exp(8537/T) cm3 molecule-1, JPL 19-5 Table 3 (recalled from memory)
    T = np.linspace(200.0, 300.0, 8)
    K = 2.16e-27 * np.exp(8537.0 / T)
    fit = fit_rate_table(_table(T, K, 0.1 * K, units="cm3", kind="K"), "equilibrium")
    assert fit.parameters["K"] == pytest.approx(2.16e-27, rel=1e-5)
    assert fit.parameters["B"] == pytest.approx(8537.0, abs=1e-2)


def test_modified_arrhenius_recovers_temperature_exponent():
    # O + O2 + M: k0 = 6.1e-34 (T/300)^-2.4 (recalled from memory, as in the mechanism docs)
    T = np.linspace(200.0, 320.0, 10)
    k = 6.1e-34 * (T / 300.0) ** -2.4
    fit = fit_rate_table(_table(T, k, 0.03 * k, units="cm6 s-1"), "modified-arrhenius")
    assert fit.parameters["n"] == pytest.approx(-2.4, abs=1e-4)
    assert fit.parameters["A"] == pytest.approx(6.1e-34, rel=1e-5)
    assert fit.parameters["E/R"] == pytest.approx(0.0, abs=0.05)


# ---------------------------------------------------------------- statistics

def test_coverage_of_one_and_two_sigma_intervals_over_many_seeds():
    # known relative errors, covariance not rescaled: the intervals are exact for this linear
    # model in (ln A, E/R), so coverage must be 68.3 % and 95.4 % (common practice, no source)
    rng = np.random.default_rng(7)
    n = 600
    rel = 0.08
    inside1 = np.zeros((n, 2), bool)
    inside2 = np.zeros((n, 2), bool)
    truth = np.array([math.log(2.3e-11), 200.0])
    k_true = _arrhenius(T12, 2.3e-11, 200.0)
    within_f = np.zeros(n, bool)
    for i in range(n):
        k = k_true * np.exp(rng.normal(0, rel, T12.size))
        fit = fit_rate_table(_table(T12, k, rel * k), "arrhenius", scale_covariance="never")
        se = np.sqrt(np.diag(fit.covariance))
        inside1[i] = np.abs(fit.values - truth) < se
        inside2[i] = np.abs(fit.values - truth) < 2 * se
        # f298 read as a lognormal geometric standard deviation: Pr(k/f <= k_true <= k f) = 68 %
        # (the uncertainty convention of the KIDA database, kida.obs.u-bordeaux1.fr/help-uncertainties)
        within_f[i] = abs(fit.ln_k(298.0) - math.log(2.3e-11 * math.exp(-200.0 / 298.0))) < math.log(fit.f298)
    # binomial 1-sigma of the rate over 600 seeds: 1.9 % (68 %), 0.85 % (95 %); allow ~3 sigma
    assert np.all(np.abs(inside1.mean(axis=0) - 0.683) < 0.06)
    assert np.all(np.abs(inside2.mean(axis=0) - 0.954) < 0.03)
    assert abs(within_f.mean() - 0.683) < 0.06


def test_coverage_of_falloff_intervals_and_of_the_band():
    # nonlinear model: the delta-method intervals are approximate; coverage still near 68 %
    rng = np.random.default_rng(11)
    T = np.repeat([200.0, 230.0, 260.0, 300.0], 6)
    M = np.tile(np.geomspace(3e16, 3e19, 6), 4)
    k_true = _falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6)
    truth = np.array([math.log(1.9e-32), 3.6, math.log(3.7e-12), 1.6])
    n, rel = 120, 0.06
    inside = np.zeros((n, 4), bool)
    band = np.zeros(n, bool)
    ln_true_298 = math.log(_falloff(298.0, 1e18, 1.9e-32, 3.6, 3.7e-12, 1.6))
    for i in range(n):
        k = k_true * np.exp(rng.normal(0, rel, T.size))
        fit = fit_rate_table(_table(T, k, rel * k, M=M), "falloff", scale_covariance="never")
        inside[i] = np.abs(fit.values - truth) < np.sqrt(np.diag(fit.covariance))
        band[i] = abs(fit.ln_k(298.0, 1e18) - ln_true_298) < fit.ln_k_sigma(298.0, 1e18)
    assert np.all(np.abs(inside.mean(axis=0) - 0.683) < 0.10)
    assert abs(band.mean() - 0.683) < 0.10


def test_default_scaling_never_narrows_and_is_conservative():
    rng = np.random.default_rng(3)
    k_true = _arrhenius(T12, 2.3e-11, 200.0)
    hits = []
    for _ in range(300):
        k = k_true * np.exp(rng.normal(0, 0.08, T12.size))
        fit = fit_rate_table(_table(T12, k, 0.08 * k), "arrhenius")
        assert fit.result.covariance_scale >= 1.0
        hits.append(abs(fit.values[1] - 200.0) < math.sqrt(fit.covariance[1, 1]))
    assert 0.66 < np.mean(hits) < 0.82


def test_agreement_with_scipy_curve_fit_weighted_and_unweighted():
    rng = np.random.default_rng(5)
    T = np.repeat([200.0, 230.0, 260.0, 300.0], 6)
    M = np.tile(np.geomspace(3e16, 3e19, 6), 4)
    rel = rng.uniform(0.03, 0.1, T.size)
    k = _falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6) * np.exp(rng.normal(0, rel))

    def model(X, lnk0, n, lnkinf, m):
        return np.log(_falloff(X[0], X[1], math.exp(lnk0), n, math.exp(lnkinf), m))

    p0 = [math.log(2e-32), 3.0, math.log(3e-12), 1.0]
    popt, pcov = curve_fit(model, (T, M), np.log(k), p0=p0, sigma=rel, absolute_sigma=True)
    fit = fit_rate_table(_table(T, k, rel * k, M=M), "falloff", scale_covariance="never")
    np.testing.assert_allclose(fit.values, popt, rtol=1e-5, atol=1e-6)
    np.testing.assert_allclose(fit.covariance, pcov, rtol=1e-3, atol=1e-12)

    # no uncertainty column <-> curve_fit's absolute_sigma=False with equal weights (Arrhenius)
    kA = _arrhenius(T12, 2.3e-11, 200.0) * np.exp(rng.normal(0, 0.05, T12.size))
    popt, pcov = curve_fit(lambda T, lnA, ER: lnA - ER / T, T12, np.log(kA), p0=[-24.0, 100.0])
    fit = fit_rate_table(_table(T12, kA), "arrhenius")
    np.testing.assert_allclose(fit.values, popt, rtol=1e-6)
    np.testing.assert_allclose(fit.covariance, pcov, rtol=1e-5)
    assert not fit.weighted and fit.notes and "scatter" in fit.notes[0]


def test_band_is_the_delta_method_of_the_covariance():
    # for ln k = ln A - (E/R)/T: var = C00 + C11/T^2 - 2 C01/T (common practice, no source)
    rng = np.random.default_rng(2)
    k = _arrhenius(T12, 2.3e-11, 200.0) * np.exp(rng.normal(0, 0.05, T12.size))
    fit = fit_rate_table(_table(T12, k, 0.05 * k), "arrhenius")
    C = fit.covariance
    T = np.array([190.0, 250.0, 330.0])
    expected = np.sqrt(C[0, 0] + C[1, 1] / T**2 - 2 * C[0, 1] / T)
    np.testing.assert_allclose(fit.ln_k_sigma(T), expected, rtol=1e-6)


def test_f298_and_g_follow_the_evaluation_convention():
    rng = np.random.default_rng(4)
    T = np.linspace(200.0, 260.0, 8)      # 298 K outside the data: extrapolated band
    k = _arrhenius(T, 2.3e-11, 200.0) * np.exp(rng.normal(0, 0.05, T.size))
    fit = fit_rate_table(_table(T, k, 0.05 * k), "arrhenius")
    assert fit.f298 == pytest.approx(math.exp(fit.ln_k_sigma(298.0)))
    # f(T) = f298 exp(|g (1/T - 1/298)|) covers the 1-sigma band at every measured T, tightly
    f = fit.uncertainty_factor(T)
    band = np.exp(fit.ln_k_sigma(T))
    assert np.all(f >= band * (1 - 1e-9))
    assert np.min(f / band) == pytest.approx(1.0, abs=1e-6) or fit.g == 0.0


def test_outlier_flagged_by_line():
    rng = np.random.default_rng(9)
    k = _arrhenius(T12, 2.3e-11, 200.0) * np.exp(rng.normal(0, 0.03, T12.size))
    k[5] *= 1.5        # a 13-sigma excursion
    fit = fit_rate_table(_table(T12, k, 0.03 * k), "arrhenius")
    assert list(np.flatnonzero(fit.outliers)) == [5]
    assert fit.table.line[fit.outliers][0] == 7
    # measured above the fit: positive residual (data minus fit)
    assert fit.standardised_residuals[5] > 3 and fit.residuals_ln[5] > 0
    assert fit.result.reduced_chi2 > 3 and fit.result.covariance_scale == fit.result.reduced_chi2


def test_common_uncertainty_widens_amplitudes_only():
    k = _arrhenius(T12, 2.3e-11, 200.0)
    plain = fit_rate_table(_table(T12, k, 0.05 * k), "arrhenius")
    shared = fit_rate_table(_table(T12, k, 0.05 * k, common=0.1), "arrhenius")
    assert shared.covariance[0, 0] == pytest.approx(plain.covariance[0, 0] + 0.01)
    assert shared.covariance[1, 1] == pytest.approx(plain.covariance[1, 1])
    # a shared 10 % scale moves ln k by 0.1 everywhere: added in quadrature to the band
    np.testing.assert_allclose(shared.ln_k_sigma(T12) ** 2, plain.ln_k_sigma(T12) ** 2 + 0.01, rtol=1e-6)


@pytest.mark.parametrize("law, T, message", [
    ("modified-arrhenius", [200, 200, 300, 300], "2 distinct temperature(s) cannot determine"),
    ("falloff", [200, 250, 300], "a falloff fit needs p or [M]"),
    ("falloff-one-T", [250, 250, 250, 250, 250], "need measurements at two or more temperatures"),
])
def test_underdetermined_or_incomplete_fits_are_errors(law, T, message):
    k = _arrhenius(np.asarray(T, float), 2.3e-11, 200.0)
    M = np.geomspace(1e17, 1e19, len(T)) if law == "falloff-one-T" else None
    with pytest.raises(FitError, match=message.replace("[", r"\[").replace("(", r"\(").replace(")", r"\)")):
        fit_rate_table(_table(T, k, 0.05 * k, M=M), law.replace("-one-T", ""))


def test_mixed_bath_gases_refused_for_falloff():
    T = np.array([200.0, 250.0, 300.0, 200.0, 250.0])
    M = np.full(5, 1e18)
    k = _falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6)
    tab = _table(T, k, 0.05 * k, M=M)
    tab = type(tab)(**{**tab.__dict__, "bath_gas": ("N2", "N2", "N2", "He", "He")})
    with pytest.raises(FitError, match="bath gases He, N2"):
        fit_rate_table(tab, "falloff")


# ---------------------------------------------------------------- ready to run

def test_snippet_parses_and_the_mechanism_evaluates_the_fitted_k(tmp_path):
    strat = load_mechanism("stratosphere")
    T = np.repeat([200.0, 230.0, 260.0, 300.0], 5)
    M = np.tile(np.geomspace(1e17, 3e19, 5), 4)
    k = _falloff(T, M, 2.0e-32, 3.8, 3.4e-12, 1.8)
    fit = fit_rate_table(_table(T, k, 0.05 * k, M=M), "falloff")
    text = mechanism_snippet(fit, strat, "clo_clo_m", base="stratosphere", base_dir=tmp_path)
    assert "[changed reactions]" in text and 'extends "stratosphere"' in text
    mech = parse_mechanism(text, base_dir=tmp_path)
    r = next(r for r in mech.reactions if r.id == "clo_clo_m")
    assert r.law == "falloff" and r.f298 == pytest.approx(fit.f298, abs=1e-3) and r.g == math.ceil(fit.g)
    assert "synthetic.csv" in r.ref and "chi2/dof" in r.ref
    # the shipped position is kept and k(250 K, 1e18) is the fitted value (to the 4 digits written)
    assert [x.id for x in mech.reactions] == [x.id for x in strat.reactions]
    i = [x.id for x in mech.reactions].index("clo_clo_m")
    k_mech = RateEvaluator(mech).thermal(250.0, 1e18)[i]
    assert k_mech == pytest.approx(_falloff(250.0, 1e18, 2.0e-32, 3.8, 3.4e-12, 1.8), rel=2e-3)


def test_snippet_refuses_a_unit_mismatch_and_a_wrong_reaction():
    strat = load_mechanism("stratosphere")
    k = _arrhenius(T12, 2.3e-11, 200.0)
    fit = fit_rate_table(_table(T12, k, 0.05 * k), "arrhenius")
    with pytest.raises(FitError, match="k in cm6 s-1"):
        mechanism_snippet(fit, strat, "clo_clo_m", base="stratosphere")
    with pytest.raises(FitError, match="did you mean 'cl_o3'"):
        mechanism_snippet(fit, strat, "cl_03", base="stratosphere")
    with pytest.raises(FitError, match="reverse"):
        mechanism_snippet(fit, strat, "cl2o2_m", base="stratosphere")


def test_override_text_is_the_one_spelling():
    assert mechanism_override_text("stratosphere", ["a  X -> Y  constant k=1"]) == \
        'extends "stratosphere"\n\n[changed reactions]\na  X -> Y  constant k=1\n'


def test_clean_data_rarely_flag_outliers():
    # Gaussian noise: |standardised residual| > 3 should be rare (0.3 % for a normal variable;
    # somewhat more for a studentised one with few degrees of freedom; common practice, no source)
    rng = np.random.default_rng(12)
    k_true = _arrhenius(T12, 2.3e-11, 200.0)
    flagged = 0
    for _ in range(200):
        k = k_true * np.exp(rng.normal(0, 0.05, T12.size))
        flagged += int(fit_rate_table(_table(T12, k, 0.05 * k), "arrhenius").outliers.sum())
    assert flagged / (200 * T12.size) < 0.01


def test_fixed_exponents_allow_a_falloff_fit_at_one_temperature():
    # JPL 19-5 Table 2 ClO + ClO + M (recalled from memory) at 250 K only, n and m fixed at theirs
    T = np.full(6, 250.0)
    M = np.geomspace(1e17, 3e19, 6)
    k = _falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6)
    fit = fit_rate_table(_table(T, k, 0.05 * k, M=M), "falloff", fixed={"n": 3.6, "m": 1.6})
    assert fit.names == ("ln_k0", "ln_kinf")
    assert fit.parameters["k0"] == pytest.approx(1.9e-32, rel=1e-5)
    assert fit.parameters["kinf"] == pytest.approx(3.7e-12, rel=1e-4)
    assert fit.parameters["n"] == 3.6 and "n, m fixed" in fit.summary()
    with pytest.raises(FitError, match="valid: k0, n, kinf, m"):
        fit_rate_table(_table(T, k, 0.05 * k, M=M), "falloff", fixed={"E/R": 1.0})
