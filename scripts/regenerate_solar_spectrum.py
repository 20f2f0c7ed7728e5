"""Regenerate boxchem/photolysis/data/solar_spectrum.csv from the ASTM E-490 table.

Source: ASTM E490-00a (2019), "Standard Solar Constant and Zero Air Mass Solar
Spectral Irradiance Tables", ASTM International; the table as distributed in
the pyspectral package (pyspectral/data/e490_00a.dat, wavelength in um,
irradiance in W m-2 um-1).

Method: the table is read as a piecewise-linear function of wavelength; its
photon flux E(lambda) lambda / (h c) (also piecewise, evaluated on the table
points and on the bin edges) is integrated over each model bin with the
trapezoid rule on a merged grid (table points plus bin edges) and divided by
the bin width.  Output: photons cm-2 s-1 nm-1 at 1 AU.

Usage:  python scripts/regenerate_solar_spectrum.py [--check]
``--check`` compares with the shipped file instead of writing it.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

from boxchem.photolysis.spectrum import DATA_FILE, model_wavelength_edges, photons_from_energy


def e490_table() -> tuple[np.ndarray, np.ndarray]:
    """(wavelength [nm], irradiance [W m-2 nm-1]) of the E-490 table in pyspectral."""
    import pyspectral

    path = Path(pyspectral.__file__).resolve().parent / "data" / "e490_00a.dat"
    data = np.loadtxt(path, comments="#")
    return data[:, 0] * 1000.0, data[:, 1] * 1e-3


def binned_photon_flux(edges: np.ndarray) -> np.ndarray:
    wl, irr = e490_table()
    inside = (wl > edges[0]) & (wl < edges[-1])
    grid = np.union1d(wl[inside], edges)
    photons = photons_from_energy(np.interp(grid, wl, irr), grid)
    seg = 0.5 * (photons[1:] + photons[:-1]) * np.diff(grid)
    cumulative = np.concatenate([[0.0], np.cumsum(seg)])
    at_edges = cumulative[np.searchsorted(grid, edges)]
    return np.diff(at_edges) / np.diff(edges)


HEADER = """\
# boxchem extraterrestrial solar spectrum (photon flux at 1 AU, bin means)
# quantity: extraterrestrial solar photon flux
# units: photons cm-2 s-1 nm-1
# source: ASTM E490-00a (2019) Standard Solar Constant and Zero Air Mass Solar Spectral Irradiance Tables (ASTM International); solar constant of the standard 1366.1 W m-2
# source_file: e490_00a.dat as distributed in the pyspectral package (data folder), W m-2 um-1
# provenance: values read from the source table (not recalled); binned by scripts/regenerate_solar_spectrum.py
# method: piecewise-linear table, photon conversion E*lambda/(h c) inside the integral, trapezoid over each bin
"""


def render(edges: np.ndarray, flux: np.ndarray) -> str:
    lines = [HEADER.rstrip("\n"), "wavelength_lower_nm,wavelength_upper_nm,photon_flux_cm-2_s-1_nm-1"]
    lines += [f"{lo:g},{hi:g},{f:.6e}" for lo, hi, f in zip(edges[:-1], edges[1:], flux)]
    return "\n".join(lines) + "\n"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--check", action="store_true", help="compare with the shipped file, do not write")
    args = parser.parse_args(argv)
    edges = model_wavelength_edges()
    text = render(edges, binned_photon_flux(edges))
    if args.check:
        same = DATA_FILE.read_text(encoding="utf-8") == text
        print("shipped file is up to date" if same else "shipped file differs from a fresh regeneration")
        return 0 if same else 1
    DATA_FILE.parent.mkdir(parents=True, exist_ok=True)
    DATA_FILE.write_text(text, encoding="utf-8")
    print(f"wrote {DATA_FILE} ({edges.size - 1} bins, {edges[0]:g}-{edges[-1]:g} nm)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
