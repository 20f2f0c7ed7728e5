"""A lab spectrum that covers only part of the shipped one: splice, refuse, or zero - never silently.

A user cross section (a ``data=`` path, or ``[photolysis].cross_sections``)
is compared with the shipped data set of the same molecule (the photolysed
species).  Where the shipped set absorbs (above ``NEGLIGIBLE`` of its peak)
outside the user file's wavelength range, the reaction's ``outside=`` key
decides (docs/spectral-data.md, "Partial spectra"):

* ``splice`` (default): the shipped values are used outside the file's
  range, the file's inside; the splice is reported with the ratio
  file/shipped at each join (a ratio beyond ``MAX_JOIN_RATIO`` either way is
  an error: almost always a unit mistake);
* ``error``: refused with an error that names both ranges;
* ``zero``: the file alone, zero outside its range, reported.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import DataFileError

__all__ = ["OUTSIDE_CHOICES", "DEFAULT_OUTSIDE", "NEGLIGIBLE", "MAX_JOIN_RATIO", "SplicedSpectrum",
           "uncovered_ranges", "reaction_cross_section", "is_shipped"]

OUTSIDE_CHOICES = ("splice", "error", "zero")
DEFAULT_OUTSIDE = "splice"
#: shipped absorption below this fraction of its peak does not count as missing.  Small on
#: purpose: weak long-wave tails (the O3 Chappuis band at ~5e-4 of the Hartley peak, the Cl2O2
#: tail beyond 350 nm) carry much of J, because the actinic flux there is large.
NEGLIGIBLE = 1e-5
#: a file/shipped ratio at a join beyond this factor (either way) refuses the splice
MAX_JOIN_RATIO = 10.0
#: wavelengths [nm] closer than this to the file's ends count as covered
_EDGE_TOLERANCE_NM = 0.5


def is_shipped(data) -> bool:
    from .crosssections import DATA_DIR
    return bool(data.path) and str(data.path).startswith(str(DATA_DIR))


def _reference_temperatures(lab) -> np.ndarray:
    t = np.asarray(lab.temperatures, dtype=float)
    return t if t.size else np.array([298.0])


def uncovered_ranges(lab, base) -> list[tuple[float, float]]:
    """Wavelength ranges [nm] where ``base`` absorbs (> NEGLIGIBLE of its peak) but ``lab`` has no rows."""
    wl = np.asarray(base.wavelength_nm, dtype=float)
    values = np.atleast_2d(base.at_temperature(_reference_temperatures(lab))).max(axis=0)
    if values.size == 0 or values.max() <= 0:
        return []
    significant = values > NEGLIGIBLE * values.max()
    lo, hi = float(lab.wavelength_nm[0]), float(lab.wavelength_nm[-1])
    ranges = []
    below = significant & (wl < lo - _EDGE_TOLERANCE_NM)
    if below.any():
        ranges.append((float(wl[below].min()), lo))
    above = significant & (wl > hi + _EDGE_TOLERANCE_NM)
    if above.any():
        ranges.append((hi, float(wl[above].max())))
    return ranges


@dataclass(frozen=True, eq=False)
class SplicedSpectrum:
    """``lab`` inside its wavelength range, ``base`` outside it; the SpectralData interface."""

    lab: object
    base: object

    def __getattr__(self, name):          # metadata (species, quantity, units, ...) of the lab file
        if name in ("lab", "base"):
            raise AttributeError(name)
        return getattr(self.lab, name)

    @property
    def _range(self) -> tuple[float, float]:
        return float(self.lab.wavelength_nm[0]), float(self.lab.wavelength_nm[-1])

    @property
    def wavelength_nm(self) -> np.ndarray:
        lo, hi = self._range
        wl = np.asarray(self.base.wavelength_nm, dtype=float)
        return np.union1d(np.asarray(self.lab.wavelength_nm), wl[(wl < lo) | (wl > hi)])

    @property
    def provenance(self) -> str:
        lo, hi = self._range
        return (f"{self.lab.provenance}; spliced onto the shipped {self.base.species} data set "
                f"outside {lo:g}-{hi:g} nm")

    def __call__(self, wavelength_nm, temperature_K=298.0) -> np.ndarray:
        wl = np.asarray(wavelength_nm, dtype=float)
        lo, hi = self._range
        inside = (wl >= lo) & (wl <= hi)
        return np.where(inside, self.lab(wl, temperature_K), self.base(wl, temperature_K))

    def at_temperature(self, temperature_K=298.0) -> np.ndarray:
        return self(self.wavelength_nm, temperature_K)

    def bin_average(self, edges_nm, temperature_K=298.0) -> np.ndarray:
        """Exact bin means of the spliced piecewise-linear function (shape as SpectralData)."""
        from .crosssections import _primitive
        edges = np.asarray(edges_nm, dtype=float)
        width = np.diff(edges)
        lab_integral = np.atleast_2d(self.lab.bin_average(edges, temperature_K)) * width
        lo, hi = self._range
        base_values = np.atleast_2d(self.base.at_temperature(temperature_K))
        hold = self.base.outside_range == "hold"
        full = _primitive(self.base.wavelength_nm, base_values, edges, hold=hold)
        inner = _primitive(self.base.wavelength_nm, base_values, np.clip(edges, lo, hi), hold=hold)
        base_outside = np.diff(full, axis=-1) - np.diff(inner, axis=-1)
        means = (lab_integral + base_outside) / width
        return means[0] if np.ndim(temperature_K) == 0 else means

    def describe(self) -> str:
        return f"{self.lab.describe()}; spliced onto shipped {self.base.species}"


def _ranges_text(ranges) -> str:
    return " and ".join(f"{a:g}-{b:g} nm" for a, b in ranges)


def reaction_cross_section(reaction, override=None):
    """(data set, note) of a photolysis reaction's cross section, partial spectra handled.

    ``override`` (a path or SpectralData) replaces ``data=``.  ``note`` is
    None for a shipped set and for a file that covers the shipped range;
    otherwise one sentence for the user (what was spliced or left out, the
    ratios at the joins).  Raises DataFileError for a missing or bad file and
    for a partial spectrum under ``outside=error``.
    """
    from .crosssections import SpectralData, cross_section_data, shipped_cross_sections

    spec = override if override is not None else reaction.parameters.get("data")
    data = spec if isinstance(spec, SpectralData) else cross_section_data(spec)
    if is_shipped(data) or data.outside_range == "hold":
        return data, None
    outside = str(reaction.parameters.get("outside", DEFAULT_OUTSIDE))
    if outside not in OUTSIDE_CHOICES:
        raise DataFileError(f"outside={outside!r}; expected one of {', '.join(OUTSIDE_CHOICES)}")
    molecule = reaction.reactants[0].species if reaction.reactants else ""
    lo, hi = float(data.wavelength_nm[0]), float(data.wavelength_nm[-1])
    label = data.path or "the cross section"
    if molecule not in shipped_cross_sections():
        return data, (f"{label} covers {lo:g}-{hi:g} nm; there is no shipped {molecule} cross "
                      f"section to compare with, so J counts no absorption outside that range")
    base = cross_section_data(molecule)
    missing = uncovered_ranges(data, base)
    if not missing:
        return data, None
    what = (f"{label} covers {lo:g}-{hi:g} nm, but the shipped {molecule} cross section also "
            f"absorbs at {_ranges_text(missing)}")
    if outside == "error":
        raise DataFileError(f"{what}; expected a spectrum over the whole range, or outside=splice "
                            f"(use the shipped values there, reported) or outside=zero on the "
                            f"reaction line (docs/spectral-data.md, \"Partial spectra\")")
    if outside == "zero":
        return data, f"{what}; outside=zero: J counts no absorption there"
    temps = _reference_temperatures(data)
    joins = []
    for a, b in missing:
        at = b if a < lo else a          # the join is the file's end next to the missing range
        ratio = np.atleast_1d(data(at, temps)) / np.atleast_1d(base(at, temps))
        for t, r in zip(temps, np.atleast_1d(ratio)):
            if not (np.isfinite(r) and 1.0 / MAX_JOIN_RATIO <= r <= MAX_JOIN_RATIO):
                raise DataFileError(
                    f"{what}; at the join at {at:g} nm ({t:g} K) the file is {r:.3g} times the "
                    f"shipped value, which looks like a unit mistake; expected a ratio within "
                    f"1/{MAX_JOIN_RATIO:g}..{MAX_JOIN_RATIO:g} to splice (check the units in the "
                    f"header, e.g. 'sigma (1e-20 cm2)'), or outside=zero to use the file alone")
        ratios = ", ".join(f"{r:.3g}" + (f" ({t:g} K)" if len(temps) > 1 or data.temperatures.size
                                         else "") for t, r in zip(temps, np.atleast_1d(ratio)))
        joins.append(f"{ratios} at {at:g} nm")
    return SplicedSpectrum(data, base), (
        f"{what}; spliced: shipped values used at {_ranges_text(missing)}; ratio file/shipped at the "
        f"joins: {'; '.join(joins)}")
