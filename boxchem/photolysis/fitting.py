"""Fit the parametric form J = l cos(chi)^m exp(-n sec(chi)) to a computed J(SZA) curve.

Least squares in log J (scipy.optimize.least_squares), so that small J near the
horizon weigh as much as large J at high sun:

    log J = log l + m log cos(chi) - n sec(chi).

Only points with J > 0 and chi below ``max_sza_deg`` (default 85 deg, where
sec(chi) is still a fair air mass) enter the fit.
"""
from __future__ import annotations

import numpy as np
from scipy.optimize import least_squares


def fit_lmn(sza_deg, j, *, max_sza_deg: float = 85.0):
    """Return (l [s-1], m [1], n [1], rms of log residuals) fitted to J(SZA) [s-1]."""
    chi = np.radians(np.asarray(sza_deg, dtype=float))
    jv = np.asarray(j, dtype=float)
    use = (jv > 0.0) & (np.degrees(chi) < max_sza_deg)
    if np.count_nonzero(use) < 3:
        raise ValueError(f"fit_lmn: need at least 3 points with J > 0 and SZA < {max_sza_deg} deg, "
                         f"got {np.count_nonzero(use)}")
    c, y = np.cos(chi[use]), np.log(jv[use])

    def residual(p):
        return p[0] + p[1] * np.log(c) - p[2] / c - y

    guess = np.array([y.max(), 1.0, 0.1])
    sol = least_squares(residual, guess, bounds=([-np.inf, -5.0, 0.0], [np.inf, 10.0, 20.0]))
    rms = float(np.sqrt(np.mean(sol.fun**2)))
    return float(np.exp(sol.x[0])), float(sol.x[1]), float(sol.x[2]), rms
