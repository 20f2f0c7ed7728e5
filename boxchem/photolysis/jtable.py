"""J-value tables: spectral integrals precomputed on a (SZA, ozone column, T) grid.

    J = sum over bins  sigma(lambda, T) phi(lambda, T) F(lambda) d lambda      [s-1]

with bin-mean cross sections sigma [cm2] and quantum yields phi [1] of each
``data=`` reaction and the actinic flux F [photons cm-2 s-1 nm-1] of
:mod:`boxchem.photolysis.actinic` at the box.  The flux depends on the solar
zenith angle and the overhead ozone column; the box temperature enters only
through sigma and phi.  So a run computes the flux once on the (SZA, ozone)
grid and contracts it with sigma*phi on the temperature grid (one einsum over
all reactions).  During integration ``JTable.__call__`` interpolates
log J linearly in SZA, ozone column and temperature (clamped at the ends of
the ozone and temperature grids) - no spectral integral in the RHS.

The SZA grid is dense towards the box's horizon, where J falls by orders of
magnitude; J is exactly zero at and beyond the horizon.
"""
from __future__ import annotations

import bisect
import functools

import numpy as np

from ..errors import BoxchemError, DataFileError

#: default temperature grid [K] of the box (covers polar to mid-latitude stratosphere)
DEFAULT_TEMPERATURES_K = (180.0, 200.0, 220.0, 240.0, 260.0, 280.0, 300.0)
#: default overhead ozone columns [DU] (ozone hole to high mid-latitude columns)
DEFAULT_OZONE_DU = (75.0, 150.0, 250.0, 350.0, 500.0)
#: log J floor: exp(-700) ~ 1e-304, keeps interpolation free of -inf
_LOG_FLOOR = -700.0


def default_sza_grid(horizon_deg: float) -> np.ndarray:
    """SZA grid [deg]: 15 deg steps to 60, 4 deg to 80, 2 deg to 88, then about 0.25 deg to the horizon.

    log J is nearly linear in SZA at high sun but curves strongly once the ray
    to the box grazes the dense air below it (beyond 90 deg), hence the
    dense end; the last point lies 0.01 deg before the horizon.
    """
    n_dense = max(int(np.ceil((horizon_deg - 0.01 - 88.0) / 0.25)), 2) + 1
    return np.concatenate([np.arange(0.0, 60.0, 15.0), np.arange(60.0, 80.0, 4.0),
                           np.arange(80.0, 88.0, 2.0), np.linspace(88.0, horizon_deg - 0.01, n_dense)])


def spectral_product(reaction_data, edges_nm, temperatures_K):
    """sigma*phi bin means [cm2] for each (cross section, quantum yield) pair.

    ``reaction_data`` is a list of (SpectralData, SpectralData|ConstantYield);
    returns (n_reactions, n_T, n_bins).
    """
    t = np.atleast_1d(np.asarray(temperatures_K, dtype=float))
    out = np.empty((len(reaction_data), t.size, np.asarray(edges_nm).size - 1))
    for i, (xs, qy) in enumerate(reaction_data):   # construction only, not in the hot path
        out[i] = xs.bin_average(edges_nm, t) * qy.bin_average(edges_nm, t)
    return out


def integrate_j(flux, sigma_phi, edges_nm):
    """J [s-1] = sum flux * sigma*phi * dlambda.

    ``flux`` (..., n_bins) [photons cm-2 s-1 nm-1], ``sigma_phi`` (n_r, n_T, n_bins)
    [cm2]; returns (..., n_T, n_r).
    """
    dl = np.diff(np.asarray(edges_nm, dtype=float))
    return np.einsum("...b,rtb->...tr", flux * dl, sigma_phi)


def load_reaction_data(reaction, cross_sections=None, quantum_yields=None):
    """(cross section, quantum yield) data of a ``data=`` reaction (user overrides first).

    A user spectrum that covers only part of the shipped one is spliced or
    refused by the reaction's ``outside=`` rule (:mod:`boxchem.photolysis.splice`).
    """
    return load_reaction_data_noted(reaction, cross_sections, quantum_yields)[:2]


def load_reaction_data_noted(reaction, cross_sections=None, quantum_yields=None):
    """(cross section, quantum yield, note): ``note`` says what a partial spectrum did, else None."""
    from .crosssections import quantum_yield_data
    from .splice import reaction_cross_section

    xs, note = reaction_cross_section(reaction, (cross_sections or {}).get(reaction.id))
    qy = (quantum_yields or {}).get(reaction.id, reaction.parameters.get("qy", 1.0))
    qy = qy if hasattr(qy, "bin_average") else quantum_yield_data(qy)
    return xs, qy, note


class JTable:
    """log J on a (SZA, ozone column, temperature) grid for n_r reactions; call to interpolate."""

    def __init__(self, sza_deg, ozone_DU, temperature_K, j, horizon_deg, reaction_ids=()):
        self.sza_deg = np.asarray(sza_deg, dtype=float)
        self.ozone_DU = np.asarray(ozone_DU, dtype=float)
        self.temperature_K = np.asarray(temperature_K, dtype=float)
        self.j = np.asarray(j, dtype=float)                     # (n_sza, n_oz, n_T, n_r)
        self.horizon_deg = float(horizon_deg)
        self.reaction_ids = tuple(reaction_ids)
        with np.errstate(divide="ignore"):
            log_j = np.maximum(np.log(self.j), _LOG_FLOOR)
        n_s, n_o, n_t, n_r = log_j.shape
        # flat (cell, reaction) layout: one gather of the 8 corners of the cell
        self._flat = np.ascontiguousarray(log_j.reshape(n_s * n_o * n_t, n_r))
        self._strides = np.array([n_o * n_t, n_t, 1])
        corners = np.array([[a, b, c] for a in (0, 1) for b in (0, 1) for c in (0, 1)])
        self._corner_offsets = corners @ self._strides                    # (8,)
        self._corner_bits = corners.astype(float)                          # (8, 3)
        self._grids = (self.sza_deg.tolist(), self.ozone_DU.tolist(), self.temperature_K.tolist())
        self._strides_int = (n_o * n_t, n_t)

    @staticmethod
    def _locate(grid, x):
        i = np.clip(np.searchsorted(grid, x, side="right") - 1, 0, grid.size - 2)
        w = np.clip((x - grid[i]) / (grid[i + 1] - grid[i]), 0.0, 1.0)
        return i, w

    def _scalar(self, sza, oz, t):
        """Fast path for one point (the solver's per-step call): plain floats, one gather."""
        if not (sza < self.horizon_deg or sza != sza):
            return np.zeros(self._flat.shape[1])
        idx, frac = [], []
        for grid, x in ((self._grids[0], sza), (self._grids[1], oz), (self._grids[2], t)):
            i = min(max(bisect.bisect_right(grid, x) - 1, 0), len(grid) - 2)
            f = (x - grid[i]) / (grid[i + 1] - grid[i])
            idx.append(i)
            frac.append(0.0 if f < 0.0 else 1.0 if f > 1.0 else f)
        base = idx[0] * self._strides_int[0] + idx[1] * self._strides_int[1] + idx[2]
        fa, fb, fc = frac
        w = np.array([(1 - fa) * (1 - fb) * (1 - fc), (1 - fa) * (1 - fb) * fc,
                      (1 - fa) * fb * (1 - fc), (1 - fa) * fb * fc,
                      fa * (1 - fb) * (1 - fc), fa * (1 - fb) * fc,
                      fa * fb * (1 - fc), fa * fb * fc])
        return np.exp(w @ self._flat[base + self._corner_offsets])

    def __call__(self, sza_deg, ozone_DU, temperature_K):
        """J [s-1], shape broadcast(sza, ozone, T).shape + (n_r,); 0 at/after the horizon.

        Trilinear interpolation of log J in (SZA, ozone column, T), clamped at
        the grid ends; exactly 0 where ``sza >= horizon``.
        """
        sza = np.asarray(sza_deg, dtype=float)
        oz = np.asarray(ozone_DU, dtype=float)
        t = np.asarray(temperature_K, dtype=float)
        if sza.ndim == 0 and oz.ndim == 0 and t.ndim == 0:
            return self._scalar(float(sza), float(oz), float(t))
        i, wi = self._locate(self.sza_deg, sza)
        k, wk = self._locate(self.ozone_DU, oz)
        m, wm = self._locate(self.temperature_K, t)
        base = i * self._strides[0] + k * self._strides[1] + m
        w = np.stack(np.broadcast_arrays(wi, wk, wm), axis=-1)[..., None, :]   # (..., 1, 3)
        bits = self._corner_bits
        weights = np.prod(bits * w + (1.0 - bits) * (1.0 - w), axis=-1)       # (..., 8)
        rows = self._flat[np.asarray(base)[..., None] + self._corner_offsets]  # (..., 8, n_r)
        j = np.exp(np.einsum("...c,...cr->...r", weights, rows))
        lit = (sza < self.horizon_deg) | np.isnan(sza)
        if lit.ndim == 0:
            return j if lit else np.zeros_like(j)
        return np.where(lit[..., None], j, 0.0)


@functools.lru_cache(maxsize=16)
def _cached_flux_grid(sza, altitude_m, ozone, albedo, edges, ozone_profile):
    """The actinic flux grid of a J table, computed once per process for the same inputs.

    The flux does not depend on the mechanism, so runs of one place (an
    ensemble's setup groups, repeated runs, tests) share it; read-only array.
    """
    from .actinic import flux_grid
    flux = flux_grid(np.asarray(sza), altitude_m, np.asarray(ozone), albedo=albedo,
                     wavelength_edges_nm=None if edges is None else np.asarray(edges), ozone_profile=ozone_profile)
    flux.setflags(write=False)
    return flux


def build_jtable(reactions, *, altitude_m, albedo, temperature_grid=None, ozone_grid_DU=None,
                 sza_grid_deg=None, wavelength_edges_nm=None, cross_sections=None,
                 quantum_yields=None, ozone_profile="midlatitude"):
    """J table for the ``data=`` reactions at the box.

    Returns ``(JTable, notes)``; ``notes`` maps reaction id -> what a partial
    user spectrum did (spliced onto the shipped one, or zero outside).  A data
    set that cannot be loaded raises DataFileError naming the reaction: a
    run never falls back silently.
    """
    from ..environment.solar import horizon_zenith_angle
    from .spectrum import model_wavelength_edges

    horizon = float(horizon_zenith_angle(float(altitude_m)))
    sza = default_sza_grid(horizon) if sza_grid_deg is None else np.asarray(sza_grid_deg, dtype=float)
    ozone = np.asarray(DEFAULT_OZONE_DU if ozone_grid_DU is None else ozone_grid_DU, dtype=float)
    temps = np.asarray(DEFAULT_TEMPERATURES_K if temperature_grid is None else temperature_grid, dtype=float)
    for name, grid in (("sza_grid_deg", sza), ("ozone_grid_DU", ozone), ("temperature_grid", temps)):
        if grid.ndim != 1 or grid.size < 2 or not np.all(np.diff(grid) > 0):
            raise BoxchemError(f"{name}: expected at least two increasing values, got {grid!r}")
    edges = model_wavelength_edges() if wavelength_edges_nm is None else np.asarray(wavelength_edges_nm, float)

    data, ids, notes = [], [], {}
    for r in reactions:
        try:
            xs, qy, note = load_reaction_data_noted(r, cross_sections, quantum_yields)
        except DataFileError as exc:
            raise DataFileError(f"reaction {r.id!r}: {exc}") from None
        data.append((xs, qy))
        ids.append(r.id)
        if note:
            notes[r.id] = note
    flux = _cached_flux_grid(tuple(sza.tolist()), float(altitude_m), tuple(ozone.tolist()), float(albedo),
                             None if wavelength_edges_nm is None else tuple(np.asarray(wavelength_edges_nm,
                                                                                       float).tolist()),
                             ozone_profile)
    j = integrate_j(flux, spectral_product(data, edges, temps), edges)   # (n_sza, n_oz, n_T, n_r)
    return JTable(sza, ozone, temps, j, horizon, ids), notes
