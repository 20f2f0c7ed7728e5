"""Mechanism -> compiled kinetics; the stiff Rosenbrock integrator; the time loop.

* :class:`CompiledKinetics` - rates, RHS and analytic Jacobian from index arrays
* :class:`RateCoefficientModel` - k(t) and fixed densities from the environment
* :func:`integrate_box` - steps through output times and sunrise/sunset breakpoints
"""
from .coefficients import RateCoefficientModel
from .kinetics import CompiledKinetics
from .rosenbrock import RODAS3, ROS3, RosenbrockMethod
from .timeloop import DEFAULT_ATOL, DEFAULT_RTOL, TimeLoopResult, integrate_box

__all__ = ["CompiledKinetics", "RateCoefficientModel", "integrate_box", "TimeLoopResult",
           "RosenbrockMethod", "ROS3", "RODAS3", "DEFAULT_RTOL", "DEFAULT_ATOL"]
