"""The lock-step batch kernel (integrate_batch(step_policy="lock-step")) and the step policies."""
from __future__ import annotations

import numpy as np
import pytest

from boxchem.solver import integrate_batch
from boxchem.solver.timeloop import LOCKSTEP_MIN_MEMBERS

from test_batch_solver import _chain  # noqa: E402  (tests/ is on sys.path under pytest)

N_MEMBERS = 6


@pytest.fixture(scope="module")
def polar():
    """Two sunlit days of the shipped polar-spring scenario; surfaces at the start composition
    (integrate_batch without on_accept, as the solver benchmarks run it)."""
    from boxchem.runner import prepare
    from boxchem.scenario import load_scenario
    return prepare(load_scenario("polar-spring").with_overrides(
        **{"run.duration": "2 d", "run.start": "2026-09-10T00:00:00Z"}))


@pytest.fixture(scope="module")
def multipliers(polar):
    rng = np.random.default_rng(20261202)
    return np.log(rng.lognormal(0.0, 0.3, size=(N_MEMBERS, polar.kinetics.n_reactions)))


def _run(setup, lm, **kw):
    sc = setup.scenario
    y0 = np.tile(setup.y0, (lm.shape[0], 1))
    return integrate_batch(setup.kinetics, setup.coefficients, y0, setup.output_times_s,
                           log_multiplier=lm, breakpoints_s=setup.breakpoints_s, rtol=sc.rtol,
                           atol=sc.atol, **kw)


def _species(setup, name):
    return list(setup.kinetics.variable_species).index(name)


@pytest.fixture(scope="module")
def lockstep(polar, multipliers):
    return _run(polar, multipliers, step_policy="lock-step")


@pytest.fixture(scope="module")
def singles(polar, multipliers):
    return [_run(polar, multipliers[m:m + 1], step_policy="per-member") for m in range(N_MEMBERS)]


def test_lockstep_members_follow_the_bateman_solution():
    # A -> B -> C with k1 f1, k2 f2 (Bateman 1910, Proc. Camb. Phil. Soc. 15, 423): each member
    # of a lock-step batch sees its own factors, on the common steps
    kin, coef = _chain()
    t = np.linspace(0.0, 20000.0, 41)
    factors = np.array([[1.0, 1.0], [2.0, 1.0], [1.0, 0.5], [0.0, 1.0]])
    with np.errstate(divide="ignore"):
        lm = np.log(factors)
    res = integrate_batch(kin, coef, np.tile([1e12, 0.0, 0.0], (4, 1)), t, log_multiplier=lm,
                          rtol=1e-7, atol=1e-2, step_policy="lock-step")
    assert np.all(res.status == 0)
    assert res.settings["step_control"].startswith("lock-step")
    assert np.all(res.steps == res.steps[0])            # one step sequence for the batch
    for m, (f1, f2) in enumerate(factors):
        k1, k2, a0 = 1e-3 * f1, 2.5e-4 * f2, 1e12
        np.testing.assert_allclose(res.y[m, :, 0], a0 * np.exp(-k1 * t), rtol=1e-5, atol=1e-9 * a0)
        np.testing.assert_allclose(res.y[m, :, 1],
                                   a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t)),
                                   rtol=1e-5, atol=1e-6 * a0)
    np.testing.assert_array_equal(res.y[3, :, 0], 1e12)   # f = 0 on A -> B: nothing moves


def test_lockstep_members_match_their_single_runs_within_the_stated_bound(polar, lockstep, singles):
    # the guarantee (DEVELOPERS.md, "Solver", lock-step policy): at every output time O3 within
    # 1e-3 relative and ClO within 1e-2 of its peak of the single run of the same multipliers
    # (the accuracy bar at default tolerances; common practice, no source)
    assert np.all(lockstep.status == 0)
    assert np.all(lockstep.steps == lockstep.steps[0])
    o3, clo = _species(polar, "O3"), _species(polar, "ClO")
    for m, single in enumerate(singles):
        ys, yl = single.y[0], lockstep.y[m]
        assert np.max(np.abs(yl[:, o3] - ys[:, o3]) / ys[:, o3]) < 1e-3
        assert np.max(np.abs(yl[:, clo] - ys[:, clo])) < 1e-2 * np.max(ys[:, clo])
        # ... and the sunlit chemistry really moved ClO (the bound is not vacuous)
        assert np.max(ys[:, clo]) > 10 * np.min(ys[:, clo])
    # the members differ from each other far more than from their single runs
    spread = np.max(np.abs(lockstep.y[0, :, o3] - lockstep.y[1, :, o3]) / lockstep.y[1, :, o3])
    err = np.max(np.abs(lockstep.y[0, :, o3] - singles[0].y[0, :, o3]) / singles[0].y[0, :, o3])
    assert spread > 100 * err


def test_lockstep_result_does_not_depend_on_member_order(polar, multipliers, lockstep):
    # the common step depends on the set of members only (a max of their norms)
    order = np.array([3, 0, 5, 1, 4, 2])
    shuffled = _run(polar, multipliers[order], step_policy="lock-step")
    np.testing.assert_allclose(shuffled.y, lockstep.y[order], rtol=1e-12, atol=0.0)


def test_lockstep_is_identical_when_grouped_the_same(polar, multipliers, singles):
    # groups of 3: the same numbers as the two halves run as batches of their own (1e-12),
    # and within the bound of the single runs whatever the grouping
    grouped = _run(polar, multipliers, step_policy="lock-step", lockstep_group=3)
    first = _run(polar, multipliers[:3], step_policy="lock-step")
    second = _run(polar, multipliers[3:], step_policy="lock-step")
    np.testing.assert_allclose(grouped.y[:3], first.y, rtol=1e-12, atol=0.0)
    np.testing.assert_allclose(grouped.y[3:], second.y, rtol=1e-12, atol=0.0)
    assert grouped.steps[0] == first.steps[0] and grouped.steps[3] == second.steps[0]
    o3 = _species(polar, "O3")
    for m, single in enumerate(singles):
        assert np.max(np.abs(grouped.y[m, :, o3] - single.y[0, :, o3]) / single.y[0, :, o3]) < 1e-3


def test_a_failing_member_leaves_the_batch_and_the_others_finish_as_without_it(polar, multipliers):
    # ln f = 700 on every reaction: rates overflow to inf at the first step (step-size underflow
    # with non-finite values); the other members must not be dragged down with it
    bad = np.vstack([multipliers[:2], np.full((1, multipliers.shape[1]), 700.0), multipliers[2:4]])
    res = _run(polar, bad, step_policy="lock-step")
    without = _run(polar, np.vstack([multipliers[:2], multipliers[2:4]]), step_policy="lock-step")
    assert list(res.status) == [0, 0, 2, 0, 0]
    assert res.failure_time_s[2] == 0.0 and "non-finite" in res.message[2]
    assert np.all(np.isnan(res.y[2, 1:])) and res.outputs_reached[2] == 1
    np.testing.assert_array_equal(res.y[[0, 1, 3, 4]], without.y)
    assert np.all(res.steps[[0, 1, 3, 4]] == without.steps)


def test_dense_fallback_members_give_the_same_solution(polar, multipliers, lockstep):
    # lu="dense": every member's W goes through the per-member dense pivoting LU of the
    # lock-step kernel; same solution as the vectorised sparse LU to well within tolerance
    dense = _run(polar, multipliers[:3], step_policy="lock-step", lu="dense")
    sparse = _run(polar, multipliers[:3], step_policy="lock-step")
    assert np.all(dense.status == 0)
    o3, clo = _species(polar, "O3"), _species(polar, "ClO")
    assert np.max(np.abs(dense.y[:, :, o3] - sparse.y[:, :, o3]) / sparse.y[:, :, o3]) < 1e-6
    assert np.max(np.abs(dense.y[:, :, clo] - sparse.y[:, :, clo])) < 1e-4 * np.max(sparse.y[:, :, clo])


def test_auto_policy_and_argument_errors(polar, multipliers):
    one = _run(polar, multipliers[:1], step_policy="auto")
    assert one.settings["step_control"] == "per member"
    many = np.tile(multipliers, (2, 1))[:LOCKSTEP_MIN_MEMBERS]
    assert _run(polar, many).settings["step_control"].startswith("lock-step")
    with pytest.raises(ValueError, match="step_policy: expected one of auto, per-member, lock-step"):
        _run(polar, multipliers[:1], step_policy="together")
    with pytest.raises(ValueError, match="lockstep_group: expected at least 1"):
        _run(polar, multipliers[:2], step_policy="lock-step", lockstep_group=0)


def test_engine_runs_lockstep_batches_the_same_on_every_back_end(monkeypatch, tmp_path):
    # state-dependent surfaces batch per member (statesurfaces); same table and batch size: same numbers in-process and on 2 local workers (1e-12),
    # and within the stated bound of the per-member policy
    import boxchem
    rng = np.random.default_rng(7)
    from boxchem.scenario import load_scenario
    scn = load_scenario("polar-spring").with_overrides(
        **{"run.duration": "1 d", "run.start": "2026-09-10T00:00:00Z"})
    ids = scn.mechanism.reaction_ids
    factors = rng.lognormal(0.0, 0.3, size=(8, len(ids)))
    members = {f"scale.{rid}": factors[:, j] for j, rid in enumerate(ids)}
    lock = boxchem.ensemble(scn, members, save="mole_fraction", batch_size=4, step_policy="lock-step")
    workers = boxchem.ensemble(scn, members, save="mole_fraction", batch_size=4, workers=2,
                               output=tmp_path / "w.nc", step_policy="lock-step")
    per = boxchem.ensemble(scn, members, save="mole_fraction", batch_size=4, step_policy="per-member")
    assert lock.attrs["boxchem_step_policy"].startswith("lock-step")
    assert per.attrs["boxchem_step_policy"].startswith("per-member")
    assert np.all(lock["member_status"].values == 1) and np.all(workers["member_status"].values == 1)
    x_lock = lock["mole_fraction"].values
    np.testing.assert_allclose(workers["mole_fraction"].values, x_lock, rtol=1e-12, atol=0.0)
    o3 = lock["mole_fraction"].sel(species="O3").values
    o3_per = per["mole_fraction"].sel(species="O3").values
    assert np.max(np.abs(o3 - o3_per) / o3_per) < 1e-3
    assert np.max(np.abs(o3 - o3_per)) > 0.0         # really a different step sequence
    workers.close()
    with pytest.raises(boxchem.BoxchemError, match="step_policy: expected one of"):
        boxchem.ensemble(scn, members, step_policy="together")


def test_ensemble_command_takes_the_step_policy(tmp_path, capsys):
    # the runner_chain test scenario (no state feedback): 8 members batch in lock step with
    # --step-policy lock-step, and the file says so; a wrong value is refused by name
    from pathlib import Path

    from boxchem.cli import main
    from boxchem.io import memberfile as mf
    chain = Path(__file__).parent / "data" / "runner_chain.toml"
    table = tmp_path / "m.csv"
    table.write_text("scale.a_to_b\n" + "\n".join(str(0.5 + 0.25 * i) for i in range(8)) + "\n")
    out = tmp_path / "m.nc"
    rc = main(["ensemble", str(chain), "--members", str(table), "-o", str(out), "--step-policy",
               "lock-step", "-q"])
    assert rc == 0
    ds = mf.open_member_file(out, load=True)
    assert ds.attrs["boxchem_step_policy"].startswith("lock-step")
    assert ds["member_status"].values.tolist() == [1] * 8
    with pytest.raises(SystemExit):
        main(["ensemble", str(chain), "--members", str(table), "--step-policy", "together"])
    assert "invalid choice: 'together'" in capsys.readouterr().err
