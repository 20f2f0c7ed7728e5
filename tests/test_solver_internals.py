"""Small internals of the solver and the runner that the larger tests do not reach."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from boxchem.solver.coefficients import _interp_rows


@pytest.mark.parametrize("x", [-5.0, 0.0, 0.3, 1.0, 2.5, 3.0, 7.0])
def test_interp_rows_equals_np_interp_per_column(x):
    # reference: numpy's own piecewise-linear interpolation, column by column
    # (common practice, no source)
    grid = np.array([0.0, 1.0, 2.0, 3.0])
    table = np.array([[0.0, 10.0, -1.0], [1.0, 20.0, -3.0], [4.0, 25.0, -2.0], [9.0, 40.0, 0.0]])
    expected = np.array([np.interp(x, grid, col) for col in table.T])
    np.testing.assert_allclose(_interp_rows(x, grid, table), expected, rtol=1e-15, atol=0)


def test_interp_rows_single_node_holds_the_value():
    # one SZA node (an interval whose SZA range collapsed): the value is held, as np.interp does
    table = np.array([[2.0, 3.0]])
    np.testing.assert_array_equal(_interp_rows(80.0, np.array([85.0]), table), table[0])
    np.testing.assert_array_equal(_interp_rows(90.0, np.array([85.0]), table), table[0])


EMPTY_REACTIONS_MECH = """\
[species]
A     lumped
M     fixed
[reactions]
"""

EMPTY_REACTIONS_SCENARIO = """\
[run]
mechanism = "empty.mech"
start = "2026-09-01T00:00:00Z"
duration = "6 h"
output_interval = "2 h"
[location]
latitude = -70.0
longitude = 0.0
altitude = "18 km"
[environment]
temperature = "200 K"
pressure = "70 hPa"
[initial]
A = "1e9 cm-3"
"""


@pytest.mark.parametrize("jit", ["1", "0"])
def test_run_of_a_mechanism_with_an_empty_reactions_section(tmp_path, monkeypatch, jit):
    # the compiled path used to fail reshaping its zero-row slot tables
    import boxchem
    monkeypatch.setenv("BOXCHEM_JIT", jit)
    (tmp_path / "empty.mech").write_text(EMPTY_REACTIONS_MECH)
    (tmp_path / "empty.toml").write_text(EMPTY_REACTIONS_SCENARIO)
    ds = boxchem.run(tmp_path / "empty.toml")
    assert ds.sizes["reaction"] == 0 and ds.sizes["time"] == 4
    # nothing reacts: A keeps its initial number density (common practice, no source)
    np.testing.assert_array_equal(ds.number_density.sel(species="A").values, 1e9)
    assert ds.attrs["integration_status"] == "success"


def test_integrate_box_input_errors_name_the_value_and_species():
    from boxchem.runner import prepare
    from boxchem.scenario import load_scenario
    from boxchem.solver.timeloop import integrate_box

    setup = prepare(load_scenario(Path(__file__).parent / "data" / "runner_chain.toml"))
    y0 = setup.y0.copy()
    y0[setup.kinetics.variable_species.index("B")] = np.nan
    with pytest.raises(ValueError, match=r"y0: .*nan for 'B' \(index 1\)"):
        integrate_box(setup.kinetics, setup.coefficients, y0, np.array([0.0, 10.0]))
    with pytest.raises(ValueError, match=r"output_times_s: .*10.0 s at index 1 followed by 10.0 s"):
        integrate_box(setup.kinetics, setup.coefficients, setup.y0, np.array([0.0, 10.0, 10.0]))


FIXED_O3_MECH = """\
[species]
O3    fixed 2e-6
O2    fixed 0.2095
O     lumped
M     fixed
[reactions]
j_o2   O2 + hv -> O + O    photolysis l=1e-11 m=1 n=1  ref="invented test value"
"""


def test_ozone_column_following_a_fixed_o3_is_a_scenario_error(tmp_path):
    # used to end in "tuple.index(x): x not in tuple" from deep inside prepare()
    import boxchem
    from boxchem.errors import ScenarioError
    (tmp_path / "empty.mech").write_text(FIXED_O3_MECH)
    (tmp_path / "s.toml").write_text(EMPTY_REACTIONS_SCENARIO.replace("A = ", "O = ")
                                     + '[photolysis]\nmethod = "parametric"\n'
                                       "ozone_column_follows_box = true\n")
    with pytest.raises(ScenarioError, match=r"ozone_column_follows_box: O3 is a fixed species"):
        boxchem.run(tmp_path / "s.toml")
