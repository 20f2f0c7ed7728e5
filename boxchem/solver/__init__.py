"""Mechanism -> compiled kinetics; the stiff Rosenbrock integrator; the time loop.

* :class:`CompiledKinetics` - rates, RHS and analytic Jacobian from index arrays
* :class:`RateCoefficientModel` - k(t) and fixed densities from the environment
* :func:`integrate_batch` - many members on shared k(t) tables, one compiled loop
* :func:`integrate_box` - one box: a batch of one
"""
from .coefficients import RateCoefficientModel
from .kinetics import CompiledKinetics
from .rosenbrock import RODAS3, ROS3, RosenbrockMethod
from .timeloop import (DEFAULT_ATOL, DEFAULT_RTOL, BatchResult, TimeLoopResult, integrate_batch,
                       integrate_box)

__all__ = ["CompiledKinetics", "RateCoefficientModel", "integrate_batch", "BatchResult", "integrate_box",
           "TimeLoopResult", "RosenbrockMethod", "ROS3", "RODAS3", "DEFAULT_RTOL", "DEFAULT_ATOL"]
