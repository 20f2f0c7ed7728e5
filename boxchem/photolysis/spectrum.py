"""The model wavelength grid and the extraterrestrial solar spectrum on it.

Grid (bin edges, nm): 1 nm bins from 175 to 350 nm, where the O2
Schumann-Runge bands and Herzberg continuum, the O3 Hartley and Huggins bands
and most photolysis cross sections have their structure; 5 nm bins from 350 to
750 nm (Chappuis band, NO2, NO3, OClO and Cl2O2 tails), where the absorbers
are smooth on that scale.  255 bins in all.

The extraterrestrial spectrum is the ASTM E-490 zero-air-mass standard
(ASTM E490-00a (2019), "Standard Solar Constant and Zero Air Mass Solar
Spectral Irradiance Tables"), as carried by the pyspectral package
(pyspectral/data/e490_00a.dat, W m-2 um-1).  ``scripts/regenerate_solar_spectrum.py``
integrates it over each bin (trapezoid on the table, exact for its
piecewise-linear reading), converts energy to photons with E = h c / lambda
inside the integral, and writes ``data/solar_spectrum.csv`` with a provenance
header.  Only the script reads the source table; the package reads the CSV.
"""
from __future__ import annotations

import functools
from pathlib import Path

import numpy as np

from ..errors import DataFileError

DATA_FILE = Path(__file__).resolve().parent / "data" / "solar_spectrum.csv"

#: Planck constant [J s] and speed of light [m s-1] (CODATA 2018 exact values)
PLANCK_J_S = 6.62607015e-34
SPEED_OF_LIGHT_M_S = 299792458.0


def model_wavelength_edges() -> np.ndarray:
    """Bin edges of the model wavelength grid [nm] (256 edges, 255 bins)."""
    return np.concatenate([np.arange(175.0, 350.0, 1.0), np.arange(350.0, 750.0 + 1e-9, 5.0)])


@functools.lru_cache(maxsize=1)
def _read_table() -> tuple[np.ndarray, np.ndarray]:
    path = DATA_FILE
    rows = []
    header_done = False
    for lineno, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        if line.startswith("#") or not line.strip():
            continue
        if not header_done:
            expected = "wavelength_lower_nm,wavelength_upper_nm,photon_flux_cm-2_s-1_nm-1"
            if line.strip() != expected:
                raise DataFileError(f"{path}:{lineno}: column line {line.strip()!r}; expected {expected!r}")
            header_done = True
            continue
        parts = line.split(",")
        try:
            rows.append([float(x) for x in parts])
        except ValueError:
            raise DataFileError(f"{path}:{lineno}: {line!r}: expected three numbers "
                                f"(lower nm, upper nm, photons cm-2 s-1 nm-1)") from None
        if len(parts) != 3:
            raise DataFileError(f"{path}:{lineno}: {len(parts)} columns; expected 3")
    data = np.asarray(rows)
    lo, hi, flux = data[:, 0], data[:, 1], data[:, 2]
    if not np.allclose(lo[1:], hi[:-1]):
        raise DataFileError(f"{path}: bins are not contiguous")
    edges = np.append(lo, hi[-1])
    edges.setflags(write=False)
    flux.setflags(write=False)
    return edges, flux


def solar_spectrum_edges() -> np.ndarray:
    """Bin edges [nm] of the shipped extraterrestrial spectrum (the model grid)."""
    return _read_table()[0]


def extraterrestrial_flux(edges_nm=None, distance_factor=1.0) -> np.ndarray:
    """Extraterrestrial solar photon flux per bin [photons cm-2 s-1 nm-1].

    Bin means of the ASTM E-490 spectrum (see module docstring) at 1 AU times
    ``distance_factor`` = (1 AU / r)^2.  ``edges_nm`` must be a subset of the
    shipped grid's edges (bins are merged by photon-weighted averaging);
    default the full model grid.
    """
    edges0, flux0 = _read_table()
    if edges_nm is None:
        return flux0 * distance_factor
    edges = np.asarray(edges_nm, dtype=float)
    idx = np.searchsorted(edges0, edges)
    ok = (idx < edges0.size) & np.isclose(edges0[np.minimum(idx, edges0.size - 1)], edges)
    if edges.ndim != 1 or edges.size < 2 or not np.all(ok) or not np.all(np.diff(edges) > 0):
        raise ValueError(f"edges_nm: expected increasing edges taken from the model grid "
                         f"({edges0[0]:g}-{edges0[-1]:g} nm, see model_wavelength_edges()), "
                         f"got {edges_nm!r}")
    cumulative = np.concatenate([[0.0], np.cumsum(flux0 * np.diff(edges0))])
    return np.diff(cumulative[idx]) / np.diff(edges) * distance_factor


def distance_factor_on(date) -> float:
    """(1 AU / r)^2 on a date (``numpy.datetime64`` or ISO text, UTC) [1]."""
    from ..environment.solar import earth_sun_distance_factor

    return float(earth_sun_distance_factor(np.datetime64(date, "s")))


def photons_from_energy(irradiance_W_m2_nm, wavelength_nm):
    """Convert spectral irradiance [W m-2 nm-1] to photon flux [photons cm-2 s-1 nm-1].

    N = E lambda / (h c), with 1 m2 = 1e4 cm2.
    """
    wl_m = np.asarray(wavelength_nm, dtype=float) * 1e-9
    return np.asarray(irradiance_W_m2_nm) * wl_m / (PLANCK_J_S * SPEED_OF_LIGHT_M_S) * 1e-4
