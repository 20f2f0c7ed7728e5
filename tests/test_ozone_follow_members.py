"""The ozone column following the box, per member in batches (photolysis/ozonefollow.py).

The reference is the earlier one-member treatment (``ozone_feedback="observe"``:
each J table built at the column observed from the box's O3 at the window start;
tests/test_photolysis_in_runs.py checks its rule against the documented formula).
The batched treatment (shared table at the scenario's column, per-member ln J
offsets at each feedback window) must stay within the solver tolerance of it
(common practice, no source), and a member's numbers must not depend on the
members it is batched with.
"""
from __future__ import annotations

import numpy as np
import pytest

import boxchem
from boxchem.runner import integrate, prepare
from boxchem.scenario import load_scenario
from boxchem.units import DOBSON_UNIT_CM2

# ten days of chlorine-activated polar spring: O3 falls by about 24 %, the column by ~80 DU
FOLLOW = {"photolysis.ozone_column_follows_box": True, "run.duration": "10 d",
          "run.start": "2026-09-10T00:00:00Z"}
SAVE = "mole_fraction,rate_coefficient,ozone_column,air_number_density"
MEMBERS = {"scale.clo_clo_m": [1.0, 1.3, 0.7], "initial.O3": [2.5e-6, 2.0e-6, 3.0e-6]}


@pytest.fixture(scope="module")
def scenario():
    return load_scenario("polar-spring").with_overrides(**FOLLOW)


@pytest.fixture(scope="module")
def paths(scenario):
    """(earlier one-member path, batched path) of the scenario as a single run."""
    return (integrate(prepare(scenario), ozone_feedback="observe"), integrate(prepare(scenario)))


def test_batched_column_is_within_tolerance_of_the_one_member_path(paths, scenario):
    old, new = paths
    species = list(old.species)
    o3 = species.index("O3")
    assert 1 - old.y[-1, o3] / old.y[0, o3] > 0.15          # the feedback has something to act on
    # O3 within 1e-5 relative at every output (solver rtol 1e-4; measured 9.7e-7)
    np.testing.assert_allclose(new.y[:, o3], old.y[:, o3], rtol=1e-5)
    clo = species.index("ClO")
    assert np.max(np.abs(new.y[:, clo] - old.y[:, clo])) < 2e-3 * np.max(old.y[:, clo])
    # J(O3 -> O1D) at the sunlit outputs from the box's own column (measured 2.4e-6)
    j = list(scenario.mechanism.reaction_ids).index("j_o3_o1d")
    lit = old.k[:, j] > 0
    assert lit.sum() > 10
    np.testing.assert_allclose(new.k[lit, j], old.k[lit, j], rtol=1e-4)


def test_the_followed_column_changes_j_as_beer_lambert_says(paths, scenario):
    """Against the same run with the scenario's column: J(O1D) of the batched path is
    larger by the factor the shared table gives at the lower column (a wrong or doubled
    offset would miss it by far more than 1 %)."""
    _, new = paths
    setup = prepare(scenario)
    j = list(scenario.mechanism.reaction_ids).index("j_o3_o1d")
    o3 = list(new.species).index("O3")
    state = setup.environment.at(new.times)
    air = np.asarray(state.air_density, dtype=float)
    x = new.y[:, o3] / air
    # the documented rule: column - (x0 - x) [M] H / (1 DU), H = 10 km (common practice, no source)
    column = np.asarray(state.ozone_column, dtype=float) - (x[0] - x) * air * 1e6 / DOBSON_UNIT_CM2
    assert column[-1] < np.asarray(state.ozone_column)[-1] - 40
    base = setup.photolysis.photolysis        # J at any column, without the follower
    sza = np.asarray(state.solar_zenith_angle, dtype=float)
    lit = new.k[:, j] > 0
    expected = base(sza[lit], column[lit], np.asarray(state.temperature, dtype=float)[lit],
                    np.asarray(state.distance_factor, dtype=float)[lit])[:, j]
    np.testing.assert_allclose(new.k[lit, j], expected * setup.coefficients.multiplier[j], rtol=1e-9)
    at_scenario_column = base(sza[lit], np.asarray(state.ozone_column, dtype=float)[lit],
                              np.asarray(state.temperature, dtype=float)[lit],
                              np.asarray(state.distance_factor, dtype=float)[lit])[:, j]
    assert np.max(new.k[lit, j] / (at_scenario_column * setup.coefficients.multiplier[j])) > 1.5


def test_a_member_batched_equals_it_run_alone(scenario):
    batch = boxchem.ensemble(scenario, MEMBERS, step_policy="per-member", save=SAVE)
    for m in range(3):
        alone = boxchem.ensemble(scenario, {k: [v[m]] for k, v in MEMBERS.items()},
                                 step_policy="per-member", save=SAVE)
        for name in ("mole_fraction", "rate_coefficient", "ozone_column"):
            np.testing.assert_array_equal(batch[name].values[m], alone[name].values[0])
    # each member its own column: lower initial O3 and faster dimer -> less ozone left above
    final = batch["ozone_column"].values[:, -1]
    assert len(set(final.round(6))) == 3
    # and the member's column is the single run's (boxchem.run, same values)
    one = boxchem.run(scenario.with_overrides(scale={"clo_clo_m": 1.3}, **{"initial.O3": "2.0 ppmv"}))
    np.testing.assert_allclose(batch["ozone_column"].values[1], one["ozone_column"].values, rtol=1e-9)


def test_lock_step_members_stay_within_tolerance_of_single_runs(scenario):
    table = {"scale.clo_clo_m": list(np.linspace(0.7, 1.3, 8))}
    batch = boxchem.ensemble(scenario, table, step_policy="lock-step", save=SAVE)
    one = boxchem.run(scenario.with_overrides(scale={"clo_clo_m": 0.7}))
    o3 = list(one.species.values).index("O3")
    np.testing.assert_allclose(batch["mole_fraction"].values[0, :, o3],
                               one["mole_fraction"].values[:, o3], rtol=1e-4)
