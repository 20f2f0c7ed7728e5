"""Small internals of the solver and the runner that the larger tests do not reach."""
from __future__ import annotations

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
