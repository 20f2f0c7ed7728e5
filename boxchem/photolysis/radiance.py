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
def _layer_source(near, far, delta, w, trans, mu, p2_mu, p2_sun, b_near, b_far, s_near, s_far,
                  m_near, m_far, lm_near, lm_far, r_near, r_far):
    """Source contribution of one layer of one column to the radiance leaving it at its ``near`` side."""
    if w <= 0.0:
        return 0.0
    safe = delta if delta > 0.0 else 1.0
    diffuse = _layer_integral(m_near, m_far, (lm_near - lm_far) / safe, delta, trans, mu)
    shape = 1.0 + 0.25 * p2_mu * (r_near + r_far)
    if (b_near > 0.0) != (b_far > 0.0):    # ray blocked by the Earth at one end only (twilight)
        direct = 0.5 * (b_near + b_far) * (1.0 - trans)
    elif b_near > 0.0:
        direct = _layer_integral(b_near, b_far, (s_far - s_near) / safe, delta, trans, mu)
    else:
        direct = 0.0
    return 0.5 * w * (shape * diffuse + (1.0 + 0.5 * p2_mu * p2_sun) * direct)


@_njit
def radiance_sweep(dtau, w0, trans_mu, beam, slant, m0, ratio2, p2_sun, mu0_pos, d_ground, albedo, mu, weight,
                   box, out_m0, out_r2, out_dground):
    """Sweep every column along every direction.

    Arrays are column-flattened: ``dtau``, ``w0`` (n_layers, n_col); ``beam``,
    ``slant``, ``m0``, ``ratio2`` (n_levels, n_col); ``p2_sun``, ``mu0_pos``,
    ``d_ground`` (n_col,); ``mu``, ``weight`` Gauss directions and weights on
    (0, 1]; ``trans_mu`` (n_mu, n_layers, n_inner) = exp(-dtau / mu) of the
    columns' innermost n_inner (ozone x wavelength) part, which does not
    depend on the solar zenith angle.  With ``box >= 0`` writes the diffuse actinic flux at that level
    to ``out_m0[0]``; with ``box < 0`` writes m0, r2 of the integrated
    radiances at every level to ``out_m0``, ``out_r2`` and the diffuse
    downward irradiance at the ground to ``out_dground``.  Columns are the
    innermost loop so that every layer reads contiguous memory.
    """
    n_lay, n_col = dtau.shape
    n_inner = trans_mu.shape[2]
    m0_pos = np.maximum(m0, 1e-300)
    log_m0 = np.log(m0_pos)
    every = box < 0
    top_stop = 0 if every else box
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
        for j in range(n_lay - 1, top_stop - 1, -1):              # ground up: near side = top (j)
            for c in range(n_col):
                delta = dtau[j, c]
                trans = trans_mu[k, j, c % n_inner]
                u[c] = u[c] * trans + _layer_source(j, j + 1, delta, w0[j, c], trans, m, p2, p2_sun[c],
                                                    beam[j, c], beam[j + 1, c], slant[j, c], slant[j + 1, c],
                                                    m0_pos[j, c], m0_pos[j + 1, c], log_m0[j, c],
                                                    log_m0[j + 1, c], ratio2[j, c], ratio2[j + 1, c])
                sum0[j, c] += wk * u[c]
                sum2[j, c] += wk * p2 * u[c]
        u[:] = 0.0
        stop = n_lay if every else box
        for j in range(0, stop):                                  # top down: near side = bottom (j + 1)
            for c in range(n_col):
                delta = dtau[j, c]
                trans = trans_mu[k, j, c % n_inner]
                u[c] = u[c] * trans + _layer_source(j + 1, j, delta, w0[j, c], trans, m, p2, p2_sun[c],
                                                    beam[j + 1, c], beam[j, c], slant[j + 1, c], slant[j, c],
                                                    m0_pos[j + 1, c], m0_pos[j, c], log_m0[j + 1, c],
                                                    log_m0[j, c], ratio2[j + 1, c], ratio2[j, c])
                sum0[j + 1, c] += wk * u[c]
                sum2[j + 1, c] += wk * p2 * u[c]
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
