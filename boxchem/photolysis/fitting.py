"""Fit the parametric form J = l cos(chi)^m exp(-n sec(chi)) to a computed J(SZA) curve.

Least squares in log J (scipy.optimize.least_squares), so that small J near the
horizon weigh as much as large J at high sun.  With an air mass a(chi),

    log J = log l - m log a(chi) - n a(chi).

Without ``altitude_m`` the air mass is sec(chi) (the published form) and
only points below ``max_sza_deg`` (default 85 deg, where sec(chi) is still a
fair air mass) enter the fit.  With ``altitude_m`` the air mass is the one
runs use for the parametric form at that altitude
(:func:`boxchem.photolysis.rates.parametric_air_mass`: sec(chi) to 75 deg,
scaled Chapman air mass beyond), and points up to the box's horizon enter
the fit, so fitted l m n reproduce the curve where polar runs need them.
"""
from __future__ import annotations

import numpy as np
from scipy.optimize import least_squares


def fit_lmn(sza_deg, j, *, altitude_m: float | None = None, max_sza_deg: float | None = None):
    """Return (l [s-1], m [1], n [1], rms of log residuals) fitted to J(SZA) [s-1].

    ``sza_deg`` [degrees], ``j`` [s-1]; ``altitude_m`` [m] selects the air
    mass runs use at that altitude (see the module docstring).
    """
    from ..environment.solar import horizon_zenith_angle
    from .rates import parametric_air_mass

    chi = np.asarray(sza_deg, dtype=float)
    jv = np.asarray(j, dtype=float)
    if max_sza_deg is None:
        max_sza_deg = 85.0 if altitude_m is None else float(horizon_zenith_angle(altitude_m))
    use = (jv > 0.0) & (chi < max_sza_deg)
    if np.count_nonzero(use) < 3:
        raise ValueError(f"fit_lmn: need at least 3 points with J > 0 and SZA < {max_sza_deg:g} deg, "
                         f"got {np.count_nonzero(use)}")
    if altitude_m is None:
        a = 1.0 / np.cos(np.radians(chi[use]))
    else:
        a = parametric_air_mass(chi[use], altitude_m)
    y = np.log(jv[use])

    def residual(p):
        return p[0] - p[1] * np.log(a) - p[2] * a - y

    guess = np.array([y.max(), 1.0, 0.1])
    sol = least_squares(residual, guess, bounds=([-np.inf, -5.0, 0.0], [np.inf, 10.0, 20.0]))
    rms = float(np.sqrt(np.mean(sol.fun**2)))
    return float(np.exp(sol.x[0])), float(sol.x[1]), float(sol.x[2]), rms
