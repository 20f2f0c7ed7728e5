"""Per-member state-dependent surfaces in the batch time loop (solver/statesurfaces.py).

Members of one batch carry their own NAT / ice areas and liquid sulfate gammas, computed
from their own composition; a member in a batch equals the same member run alone; the
per-member treatment agrees with the earlier per-window table rebuild; ensembles of
state-dependent scenarios batch.
"""
from __future__ import annotations

import numpy as np
import pytest

from boxchem import runner
from boxchem.environment.psc import NatEquilibriumRule
from boxchem.scenario import load_scenario
from boxchem.solver import timeloop
from boxchem.solver.timeloop import integrate_batch

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")


def _setup(days):
    return runner.prepare(load_scenario("polar-spring").with_overrides(**{"run.duration": f"{days:g} d"}))


@pytest.fixture(scope="module")
def short():
    """4 days of polar-spring (NAT present at 190 K with 2 ppbv HNO3; still dark)."""
    return _setup(4)


def _members(setup, hno3_ppbv, h2o_ppmv, hcl_ppbv, seed=7):
    kin, sp = setup.kinetics, setup.kinetics.variable_species
    n = len(hno3_ppbv)
    air = float(setup.environment.at(0.0).air_density)
    y0 = np.tile(setup.y0, (n, 1))
    y0[:, sp.index("HNO3")] = np.asarray(hno3_ppbv) * 1e-9 * air
    y0[:, sp.index("H2O")] = np.asarray(h2o_ppmv) * 1e-6 * air
    y0[:, sp.index("HCl")] = np.asarray(hcl_ppbv) * 1e-9 * air
    lm = np.random.default_rng(seed).normal(0.0, 0.2, (n, kin.n_reactions))
    return y0, lm


def _batch(setup, y0, lm, **kw):
    return integrate_batch(setup.kinetics, setup.coefficients, y0, setup.output_times_s,
                           log_multiplier=lm, breakpoints_s=setup.breakpoints_s,
                           **runner.solver_options(setup.scenario), **kw)


def test_a_member_in_a_batch_equals_the_member_alone(short):
    # guarantee: bit-identical.  Each member keeps its own step control in the kernel, and
    # its surface offsets are elementwise numpy expressions of its own state only
    y0, lm = _members(short, [2.0, 9.0, 0.1, 15.0], [4.5, 6.0, 3.0, 5.0], [1.4, 0.3, 1.4, 1.0])
    batch = _batch(short, y0, lm)
    assert np.all(batch.status == 0)
    assert batch.settings["state_surfaces"] == "member"
    for i in range(y0.shape[0]):
        alone = _batch(short, y0[i:i + 1], lm[i:i + 1])
        np.testing.assert_array_equal(alone.y[0], batch.y[i])
        np.testing.assert_array_equal(alone.member_k(0), batch.member_k(i))
    # and members differ (the test would be empty if every member saw the same k)
    assert not np.allclose(batch.y[0], batch.y[1])


def test_surface_k_follows_the_members_own_composition(short):
    """NAT area from each member's own HNO3 and H2O; liquid gammas from its own HCl."""
    y0, _ = _members(short, [10.0, 0.05], [4.5, 4.5], [1.4, 0.05])
    lm = np.zeros((2, short.kinetics.n_reactions))
    batch = _batch(short, y0, lm)
    ids = [r.id for r in short.mechanism.reactions]
    sp = short.kinetics.variable_species
    nat_col, sulfate_col = ids.index("het_clono2_hcl_psc"), ids.index("het_clono2_hcl_sa")
    rich, poor = batch.member_k(0), batch.member_k(1)
    # 10 ppbv HNO3 at 189-190 K and 55 hPa is NAT-supersaturated, 0.05 ppbv is not
    # (Hanson and Mauersberger 1988; T_NAT for 5 ppmv H2O and 10 ppbv HNO3 ~ 196 K, recalled)
    assert np.all(rich[1:, nat_col] > 0.0)
    assert poor[1, nat_col] == 0.0             # no area: k exactly 0
    # the k reported is gamma v S / 4 with the member's own area and gammas (RateEvaluator)
    state = short.environment.at(short.output_times_s)
    T, p, air = (np.asarray(v, dtype=float) for v in (state.temperature, state.pressure, state.air_density))
    for m, k in ((0, rich), (1, poor)):
        x = {s: batch.y[m][:, sp.index(s)] / air for s in ("HNO3", "H2O", "HCl", "ClONO2")}
        area = NatEquilibriumRule()(T, p, x)
        exact = short.coefficients.evaluator.surface(
            T, area, state.sulfate_area, 0.0,
            partial_pressures={s: x[s] * p for s in ("H2O", "HCl", "ClONO2")})
        np.testing.assert_allclose(k[:, nat_col], exact[:, nat_col], rtol=1e-12, atol=0)
        # zero exactly where this member's own HNO3 (it grows from ClONO2 + HCl) gives no NAT
        np.testing.assert_array_equal(k[:, nat_col] == 0.0, area == 0.0)
        np.testing.assert_array_equal(batch.surface_k.areas(batch.y[m])[0], area)
        np.testing.assert_allclose(k[:, sulfate_col], exact[:, sulfate_col], rtol=1e-12, atol=0)
    # HCl depleted 28x: a much smaller ClONO2 + HCl gamma on sulfate in the same batch at the
    # same T (Shi et al. 2001: first order in dissolved HCl, gamma ~ sqrt(k_HCl) when
    # reacto-diffusive, i.e. ~ 1/5 here)
    assert poor[1, sulfate_col] < 0.5 * rich[1, sulfate_col]


def test_per_member_surfaces_agree_with_the_per_window_rebuild():
    """Accuracy against the earlier treatment (table rebuilt every feedback window from the
    observed state): O3 within 1e-3 relative, ClO within 1e-2 of its peak (issue 8 bar)."""
    setup = _setup(24)            # sunlight returns (activation, ClO) from about day 15
    sp = setup.kinetics.variable_species
    new = runner.integrate(setup)
    old = runner.integrate(setup, surface_feedback="rebuild")
    assert new.settings["state_surfaces"] == "member" and old.settings["state_surfaces"] == "rebuild"
    o3, clo = sp.index("O3"), sp.index("ClO")
    assert np.max(np.abs(new.y[:, o3] / old.y[:, o3] - 1.0)) < 1e-3
    assert old.y[:, clo].max() > 1e9     # chlorine is active: the comparison means something
    assert np.max(np.abs(new.y[:, clo] - old.y[:, clo])) < 1e-2 * old.y[:, clo].max()
    # far fewer k(t) tables: the tables no longer depend on the state
    assert new.coefficient_evaluations < 0.2 * old.coefficient_evaluations
    # and the output NAT area is this box's own
    assert new.surface_areas is not None and np.max(new.surface_areas[0]) > 0.0


def test_tolerance_gating_is_close_to_exact_offsets(short):
    y0, lm = _members(short, [2.0, 9.0], [4.5, 6.0], [1.4, 0.3])
    gated = _batch(short, y0, lm)
    exact = _batch(short, y0, lm, surface_feedback="member_exact")
    sp = short.kinetics.variable_species
    for name in ("O3", "HCl", "HNO3"):
        i = sp.index(name)
        assert np.max(np.abs(gated.y[..., i] / exact.y[..., i] - 1.0)) < 1e-3, name
    clo = sp.index("ClO")
    assert np.max(np.abs(gated.y[..., clo] - exact.y[..., clo])) < 1e-2 * exact.y[..., clo].max()


def test_bad_surface_feedback_is_rejected(short):
    with pytest.raises(ValueError, match="surface_feedback: expected 'member', 'member_exact' or 'rebuild'"):
        _batch(short, short.y0[None, :], None, surface_feedback="exactly")
    with pytest.raises(ValueError, match="give on_accept=coefficients.observe_state"):
        _batch(short, short.y0[None, :], None, surface_feedback="rebuild")


def test_the_ensemble_command_batches_state_dependent_members(tmp_path, monkeypatch, capsys):
    from boxchem.cli import main
    calls = []
    real = timeloop.integrate_batch

    def counting(kinetics, coefficients, y0, *args, **kw):
        calls.append(np.shape(y0)[0])
        return real(kinetics, coefficients, y0, *args, **kw)

    monkeypatch.setattr(timeloop, "integrate_batch", counting)
    table = tmp_path / "members.csv"
    table.write_text("run.duration,scale.het_clono2_hcl_sa,initial.HNO3\n"
                     + "".join(f"1 d,{f},{h}e-9\n" for f, h in ((0.5, 2), (1.0, 9), (2.0, 0.5), (1.5, 4))))
    out = tmp_path / "e.nc"
    assert main(["ensemble", "polar-spring", "--members", str(table), "-o", str(out),
                 "--batch-size", "4", "-q"]) == 0
    assert calls == [4]          # one compiled batch of 4, not 4 single runs
    import xarray as xr
    with xr.open_dataset(out) as ds:
        assert list(ds["member_status"].values) == [1, 1, 1, 1]


def test_sts_members_carry_their_own_droplet_radius():
    """polar-spring-sts: each member's liquid gammas use the radius of its own STS droplets
    (StsEquilibriumRule.droplet_radius_cm from its own HNO3 and H2O), batched or alone."""
    setup = runner.prepare(load_scenario("polar-spring-sts").with_overrides(**{"run.duration": "3 d"}))
    sp = setup.kinetics.variable_species
    air0 = float(setup.environment.at(0.0).air_density)
    y0 = np.tile(setup.y0, (2, 1))
    y0[1, sp.index("HNO3")] = 8e-9 * air0           # more HNO3: larger droplets
    lm = np.zeros((2, setup.kinetics.n_reactions))
    batch = _batch(setup, y0, lm)
    alone = _batch(setup, y0[1:], lm[1:])
    np.testing.assert_array_equal(batch.y[1], alone.y[0])
    ids = [r.id for r in setup.mechanism.reactions]
    col = ids.index("het_clono2_h2o_sa")
    state = setup.environment.at(setup.output_times_s)
    T, p, air = (np.asarray(v, dtype=float) for v in (state.temperature, state.pressure, state.air_density))
    rule = setup.environment.sulfate_area
    radii = []
    for m in range(2):
        x = {s: batch.y[m][:, sp.index(s)] / air for s in ("HNO3", "H2O", "HCl", "ClONO2", "HNO3_PSC")}
        r = rule.droplet_radius_cm(T, p, x)
        radii.append(r)
        exact = setup.coefficients.evaluator.surface(
            T, 0.0, rule(T, p, x), 0.0, partial_pressures={s: x[s] * p for s in ("H2O", "HCl", "ClONO2")},
            droplet_radius_cm=r)
        np.testing.assert_allclose(batch.member_k(m)[1:, col], exact[1:, col], rtol=1e-9, atol=0)
    assert np.all(radii[1][1:] > radii[0][1:])       # the richer member's droplets are larger
