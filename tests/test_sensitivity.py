"""Local sensitivities: the tangent-linear run and batched finite differences (its check).

* closed form: the first-order chain A -> B -> C (tests/conftest_sensitivity.py)
  to 1e-6 in S, by both methods;
* finite-difference agreement on polar-spring: the ten largest coefficients
  of O3 on 1 October against brute-force central differences of separate
  single runs (``boxchem.run(scale=...)``) at tighter tolerances and another
  step, within 2 %.  CI runs the last day before 1 October (30 Sep -> 1 Oct);
  ``python benchmarks/bench_sensitivity.py`` runs the season from 1 August;
* facts of the trade (in sunlit polar spring the dimer cycle's rate-limiting
  steps and ClO + BrO lead the ranking);
* a failed member spoils only its own parameter.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import xarray as xr

import boxchem
from boxchem.analysis.sampling import finite_difference_table
from boxchem.analysis.sensitivity import (SensitivityError, local_sensitivities, ranking,
                                          sensitivities_from_members)
from boxchem.diagnostics.metrics import MetricError, parse_metrics
from conftest_sensitivity import A0, HOURS, K1, K2, chain_b, chain_db, write_chain


@pytest.fixture(scope="module", params=["tangent", "differences"])
def chain_sensitivities(tmp_path_factory, request):
    path = write_chain(tmp_path_factory.mktemp("chain"))
    metrics = ["B at end", "A at end", "C at start+5h", "loss AB by conversion over start..end"]
    # differences: step 5e-4: truncation ~h^2/6 ~ 4e-8 relative, integrator noise ~rtol/h ~ 2e-7
    return local_sensitivities(path, metrics, step=5e-4, species=["B"], initial=["A"],
                               method=request.param)


def test_closed_form_chain_sensitivities(chain_sensitivities):
    r = chain_sensitivities
    t = HOURS * 3600.0
    db1, db2 = chain_db(t)
    b = chain_b(t)
    S = r["sensitivity"]
    # B(t): d ln B / d ln k = k dB/dk / B from the closed form
    assert float(S.sel(metric="B at end", parameter="scale.a_to_b")) == pytest.approx(K1 * db1 / b, abs=1e-6)
    assert float(S.sel(metric="B at end", parameter="scale.b_to_c")) == pytest.approx(K2 * db2 / b, abs=1e-6)
    # A(t) = A0 exp(-k1 t): S_k1 = -k1 t exactly, S_k2 = 0
    assert float(S.sel(metric="A at end", parameter="scale.a_to_b")) == pytest.approx(-K1 * t, abs=1e-6)
    assert float(S.sel(metric="A at end", parameter="scale.b_to_c")) == pytest.approx(0.0, abs=1e-6)
    # C = A0 - A - B at 5 h
    t5 = 5 * 3600.0
    c5 = A0 - A0 * np.exp(-K1 * t5) - chain_b(t5)
    d1, d2 = chain_db(t5)
    assert float(S.sel(metric="C at start+5h", parameter="scale.a_to_b")) == \
        pytest.approx(K1 * (A0 * t5 * np.exp(-K1 * t5) - d1) / c5, abs=1e-6)
    assert float(S.sel(metric="C at start+5h", parameter="scale.b_to_c")) == \
        pytest.approx(-K2 * d2 / c5, abs=1e-6)


def test_closed_form_loss_metric_and_time_resolved(chain_sensitivities):
    r = chain_sensitivities
    # loss of AB by B -> C = trapezoid sum of k2 B over the hourly outputs (the metric's
    # definition); its log-derivatives from the closed-form B and dB/dk
    t = np.arange(HOURS + 1) * 3600.0
    trap = lambda y: np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(t))
    b = chain_b(t)
    db1, db2 = chain_db(t)
    S = r["sensitivity"].sel(metric="loss AB by conversion over start..end")
    assert float(S.sel(parameter="scale.a_to_b")) == pytest.approx(K1 * trap(db1) / trap(b), abs=1e-6)
    assert float(S.sel(parameter="scale.b_to_c")) == pytest.approx(1 + K2 * trap(db2) / trap(b), abs=1e-6)
    # time-resolved d ln B(t) / d ln k at every output time after the start
    series = r["species_sensitivity"].sel(sensitivity_species="B").transpose("parameter", "time").values
    np.testing.assert_allclose(series[0, 1:], K1 * db1[1:] / b[1:], atol=1e-6)
    np.testing.assert_allclose(series[1, 1:], K2 * db2[1:] / b[1:], atol=1e-6)
    assert np.isnan(series[0, 0])        # B = 0 at the start: ln B undefined, not 0
    if r.attrs["sensitivity_method"] == "differences":
        assert r.attrs["finite_difference_scheme"] == "central" and r.attrs["members"] == 7
    else:
        assert r.attrs["members"] == 1
    # first-order kinetics: every amount is proportional to A0, so d ln m / d ln A0 = 1
    np.testing.assert_allclose(r["sensitivity"].sel(parameter="initial.A").values, 1.0, atol=1e-6)


def test_forward_differences_are_first_order(tmp_path):
    # forward differences err by ~h/2 x curvature: at h = 0.05 the error on S_k1 of A(t)
    # (ln A = -k1 t is exponential in ln k1) is S (e^h - 1)/h - S = -3.6 x 0.0254
    path = write_chain(tmp_path, rtol=1e-9)
    r = local_sensitivities(path, "A at end", step=0.05, scheme="forward", species=(),
                            method="differences")
    t = HOURS * 3600.0
    expected = -K1 * t * (np.exp(0.05) - 1) / 0.05
    assert float(r["sensitivity"].sel(metric="A at end", parameter="scale.a_to_b")) == pytest.approx(expected, rel=1e-5)
    assert r.attrs["members"] == 3


def test_a_failed_member_spoils_only_its_parameter(tmp_path):
    path = write_chain(tmp_path, rtol=1e-8)
    table, labels, plan = finite_difference_table(["scale.a_to_b", "scale.b_to_c"], step=1e-3)
    # member 3 (b_to_c +h) gets an impossible temperature: its setup fails, the rest run
    table["environment.temperature_offset"] = [0.0, 0.0, 0.0, -500.0, 0.0]
    table["member_label"] = labels
    members = boxchem.ensemble(path, table)
    assert list(members["member_status"].values) == [1, 1, 1, 2, 1]
    metrics = parse_metrics("B at end")
    r = sensitivities_from_members(members, metrics, plan, step=1e-3, scheme="central")
    t = HOURS * 3600.0
    db1, _ = chain_db(t)
    S = r["sensitivity"].sel(metric="B at end")
    assert float(S.sel(parameter="scale.a_to_b")) == pytest.approx(K1 * db1 / chain_b(t), abs=1e-5)
    assert np.isnan(float(S.sel(parameter="scale.b_to_c")))
    assert list(r["parameter_failed"].values) == [0, 1] and r.attrs["failed_members"] == 1


def test_bad_inputs_are_clear_errors(tmp_path):
    path = write_chain(tmp_path)
    with pytest.raises(MetricError, match="unknown species 'D'"):
        local_sensitivities(path, "D at end")
    with pytest.raises(MetricError, match="outside the run"):
        local_sensitivities(path, "B at 2026-01-02")
    with pytest.raises(SensitivityError, match="unknown reaction.*'a_tob'.*did you mean 'a_to_b'"):
        local_sensitivities(path, "B at end", reactions=["a_tob"])
    with pytest.raises(SensitivityError, match="non-zero initial mole fraction"):
        local_sensitivities(path, "B at end", initial=["B"])
    with pytest.raises(SensitivityError, match="method: expected one of auto, tangent, differences"):
        local_sensitivities(path, "B at end", method="adjoint")


# ---------------------------------------------------------------------------
# polar-spring: finite differences against separate single runs; facts of the trade
# ---------------------------------------------------------------------------
OCTOBER_1 = "O3 at 2026-10-01"
LAST_DAY = {"run.start": "2026-09-30T00:00:00Z", "run.duration": "1 d"}


@pytest.fixture(scope="module")
def polar_spring_sensitivities():
    scenario = boxchem.load_scenario("polar-spring").with_overrides(**LAST_DAY)
    return scenario, local_sensitivities(
        scenario, [f"o3 = {OCTOBER_1}", "loss = loss Ox over start..end"], species=())


def test_ten_largest_agree_with_separate_single_runs(polar_spring_sensitivities):
    scenario, r = polar_spring_sensitivities
    # the default (auto) takes the tangent here: it differentiates polar-spring's state
    # feedback (surfaces following the composition, the NAT/ice phase equilibrium)
    assert r.attrs["sensitivity_method"] == "tangent"
    assert r.attrs["method_choice"].startswith("auto: tangent (it differentiates")
    assert "state-dependent surfaces" in r.attrs["tangent_feedback"] and \
        "phase equilibrium" in r.attrs["tangent_feedback"] and r.attrs["not_differentiated"] == "none"
    # brute force: separate boxchem.run calls with scale=, tighter tolerances and another
    # step (h = 0.02), so that the integrator's error and the step's truncation both count
    tight = scenario.with_overrides(**{"solver.rtol": 1e-6, "solver.atol": "1e-2 cm-3"})
    h = 0.02
    for row in ranking(r, "o3", 10):
        rid = row["parameter"].split(".", 1)[1]
        o3 = [float(boxchem.run(tight, scale={rid: np.exp(s * h)})
                    .mole_fraction.sel(species="O3").sel(time="2026-10-01T00:00:00"))
              for s in (1.0, -1.0)]
        brute = (np.log(o3[0]) - np.log(o3[1])) / (2 * h)
        assert row["sensitivity"] == pytest.approx(brute, rel=0.02), rid


def test_sunlit_polar_spring_ranking_is_led_by_the_dimer_cycle_and_clo_bro(polar_spring_sensitivities):
    """Recalled from memory of the WMO/UNEP Scientific Assessment of Ozone Depletion (2018,
    ch. 4, polar ozone) and Solomon (1999), Rev. Geophys. 37, 275: in sunlit polar spring the
    ClO-dimer cycle (rate-limited by ClO + ClO + M and Cl2O2 photolysis) and the ClO + BrO
    cycle destroy most of the ozone, so the loss is most sensitive to these steps."""
    _, r = polar_spring_sensitivities
    top = [row["parameter"] for row in ranking(r, "loss", 4)]
    for rid in ("clo_clo_m", "j_cl2o2", "clo_bro_b"):
        assert f"scale.{rid}" in top, (rid, top)
    S = r["sensitivity"].sel(metric="loss")
    # each makes the loss faster (and O3 lower); the ice reactions (no ice area) do nothing
    for rid in ("clo_clo_m", "j_cl2o2", "clo_bro_b"):
        assert float(S.sel(parameter=f"scale.{rid}")) > 0.1
        assert float(r["sensitivity"].sel(metric="o3", parameter=f"scale.{rid}")) < 0
    # (zero up to the solver's noise: the + and - members may sit in different lock-step
    # groups, which take different steps; common practice, no source)
    assert abs(float(S.sel(parameter="scale.het_clono2_hcl_ice"))) < 1e-6
