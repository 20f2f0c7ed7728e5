"""Compiled radiance sweeps of the source-function technique (used by :mod:`.actinic`).

For every column (solar zenith angle, ozone column, wavelength bin) and every
Gauss direction mu, the diffuse radiance u = 2 pi I (per unit extraterrestrial
flux, so that the actinic flux is the integral of u over mu in [-1, 1]) is
carried through the homogeneous layers, from the Lambertian ground up and from
the top (no diffuse light) down:

    u_out = u_in exp(-dtau / mu) + int_0^dtau S(x) exp(-x / mu) dx / mu

with the source of each layer (single-scattering albedo w0)

    S = w0 / 2 [m0 (1 + P2(mu) r2 / 2) + beam p(mu, mu0)],  p = 1 + P2(mu) P2(mu0) / 2,

m0 the actinic flux of the diffuse light and r2 its P2 moment over m0
(azimuth-mean Rayleigh phase function, Chandrasekhar 1960, Radiative
Transfer, Ch. I).  m0 and the beam are interpolated exponentially in the
layer (exact for the beam, whose slant optical depth is linear in tau), r2
linearly.  The method is described in :func:`boxchem.photolysis.actinic._diffuse_at_box`.

numba compiles the sweep on first use and caches it (``cache=True``); without
numba the same function runs as plain Python (slow, same numbers).
"""
from __future__ import annotations

import math

import numpy as np

try:  # numba is a core dependency; the plain-Python path keeps the numbers without it
    import numba as _numba
except ImportError:  # pragma: no cover
    _numba = None


def _njit(fn):
    if _numba is None:  # pragma: no cover
        return fn
    return _numba.njit(cache=True, nogil=True, error_model="numpy")(fn)


@_njit
def _layer_integral(near, far, decay, delta, trans, mu):
    """int_0^delta s(x) exp(-x/mu) dx/mu for s = near exp(-decay x), far = s(delta), trans = exp(-delta/mu)."""
    d = 1.0 + mu * decay
    if abs(d) < 1e-6:                      # the source grows as fast as the path attenuates
        return near * delta / mu
    return (near - far * trans) / d


@_njit
def radiance_sweep(dtau, w0, trans_mu, beam, slant, m0, ratio2, p2_sun, mu0_pos, d_ground, albedo, mu, weight,
                   box, out_m0, out_r2, out_dground):
    """Sweep every column along every direction.

    Arrays are column-flattened: ``dtau``, ``w0`` (n_layers, n_col); ``beam``,
    ``slant``, ``m0``, ``ratio2`` (n_levels, n_col); ``p2_sun``, ``mu0_pos``,
    ``d_ground`` (n_col,); ``mu``, ``weight`` Gauss directions and weights on
    (0, 1]; ``trans_mu`` (n_mu, n_layers, n_inner) = exp(-dtau / mu) of the
    columns' innermost n_inner (ozone x wavelength) part, which does not
    depend on the solar zenith angle (n_col = n_sza x n_inner).  With
    ``box >= 0`` writes the diffuse actinic flux at that level to
    ``out_m0[0]``; with ``box < 0`` writes m0, r2 of the integrated radiances
    at every level to ``out_m0``, ``out_r2`` and the diffuse downward
    irradiance at the ground to ``out_dground``.  Columns are the innermost
    loop so that every layer reads contiguous memory; the per-layer decay
    rates of the sources (independent of direction) are computed once.
    """
    n_lay, n_col = dtau.shape
    n_inner = trans_mu.shape[2]
    n_sza = n_col // n_inner
    m0_pos = np.maximum(m0, 1e-300)
    # decay rates [per unit optical depth] of the diffuse and beam sources from the top of
    # each layer down (towards the bottom they change sign), and the twilight edge flag
    decay_diffuse = np.zeros((n_lay, n_col))
    decay_beam = np.zeros((n_lay, n_col))
    edge = np.zeros((n_lay, n_col), dtype=np.bool_)
    shape2 = np.zeros((n_lay, n_col))
    for j in range(n_lay):
        for c in range(n_col):
            delta = dtau[j, c]
            safe = delta if delta > 0.0 else 1.0
            decay_diffuse[j, c] = (math.log(m0_pos[j, c]) - math.log(m0_pos[j + 1, c])) / safe
            decay_beam[j, c] = (slant[j + 1, c] - slant[j, c]) / safe
            edge[j, c] = (beam[j, c] > 0.0) != (beam[j + 1, c] > 0.0)
            shape2[j, c] = 0.25 * (ratio2[j, c] + ratio2[j + 1, c])
    every = box < 0
    top_stop = 0 if every else box
    down_stop = n_lay if every else box
    sum0 = np.zeros((n_lay + 1, n_col))
    sum2 = np.zeros((n_lay + 1, n_col))
    u = np.empty(n_col)
    for k in range(mu.size):
        m = mu[k]
        wk = weight[k]
        p2 = 0.5 * (3.0 * m * m - 1.0)
        for c in range(n_col):
            u[c] = 2.0 * albedo * (mu0_pos[c] * beam[n_lay, c] + d_ground[c])
            sum0[n_lay, c] += wk * u[c]
            sum2[n_lay, c] += wk * p2 * u[c]
        for direction in range(2):                              # 0: ground up, 1: top down
            if direction == 1:
                u[:] = 0.0
            n_steps = (n_lay - top_stop) if direction == 0 else down_stop
            for step in range(n_steps):
                j = n_lay - 1 - step if direction == 0 else step
                sign = 1.0 if direction == 0 else -1.0
                near = j if direction == 0 else j + 1
                far = j + 1 if direction == 0 else j
                level = j if direction == 0 else j + 1
                for isza in range(n_sza):
                    phase = 1.0 + 0.5 * p2 * p2_sun[isza * n_inner]
                    for inner in range(n_inner):
                        c = isza * n_inner + inner
                        trans = trans_mu[k, j, inner]
                        w = w0[j, c]
                        source = 0.0
                        if w > 0.0:
                            delta = dtau[j, c]
                            diffuse = _layer_integral(m0_pos[near, c], m0_pos[far, c], sign * decay_diffuse[j, c],
                                                      delta, trans, m)
                            b_near = beam[near, c]
                            if edge[j, c]:                     # ray blocked by the Earth at one end only
                                direct = 0.5 * (b_near + beam[far, c]) * (1.0 - trans)
                            elif b_near > 0.0:
                                direct = _layer_integral(b_near, beam[far, c], sign * decay_beam[j, c], delta,
                                                         trans, m)
                            else:
                                direct = 0.0
                            source = 0.5 * w * ((1.0 + p2 * shape2[j, c]) * diffuse + phase * direct)
                        u[c] = u[c] * trans + source
                        sum0[level, c] += wk * u[c]
                        sum2[level, c] += wk * p2 * u[c]
        if every:
            for c in range(n_col):
                out_dground[c] += wk * m * u[c]
    if every:
        for lev in range(n_lay + 1):
            for c in range(n_col):
                out_m0[lev, c] = max(sum0[lev, c], 0.0)
                r = sum2[lev, c] / sum0[lev, c] if sum0[lev, c] > 0.0 else 0.0
                out_r2[lev, c] = min(max(r, -0.5), 1.0)
    else:
        for c in range(n_col):
            out_m0[0, c] = max(sum0[box, c], 0.0)
