"""Partitioning of the chlorine, bromine and nitrogen families over time.

A ratio such as ClOx/Cly is a weighted sum of species (the numerator) over a
family total (the denominator), both [cm-3], evaluated at every output time.
The denominator is the run's ``family_number_density`` when the mechanism
defines the family, otherwise the weighted sum of the species listed below
(those of them the result has).  Note that a family defined as ``atoms(Cl)``
counts organic chlorine too; the ratios are then fractions of total chlorine.

Group definitions (weights count atoms of the element, common practice, no
source):

* ClOx = Cl + ClO + 2 Cl2O2;  "ClO+2Cl2O2" = ClO + 2 Cl2O2
* active chlorine = Cl + ClO + 2 Cl2O2 + 2 Cl2 + HOCl + OClO + BrCl + ClNO2
* Cly (species sum) = the above + HCl + ClONO2
* BrOx = Br + BrO; Bry (species sum) = Br + BrO + HOBr + BrONO2 + HBr + BrCl + 2 Br2
* NOx = NO + NO2; NOy (species sum) = NO + NO2 + NO3 + 2 N2O5 + HNO3 + HNO4 +
  HONO + ClONO2 + BrONO2 + ClNO2

A group's required species must all be in the result; optional ones are
added when present.  A ratio whose required species are missing raises a
:class:`ResultError` naming them; :func:`partitioning` skips such ratios and
lists them in its ``skipped`` attribute.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import xarray as xr

from .result import ResultError, family_weights, is_family, is_species, require

__all__ = ["Group", "GROUPS", "RATIOS", "CLY_PARTITION", "group_sum", "ratio", "partitioning",
           "chlorine_partitioning"]


@dataclass(frozen=True)
class Group:
    """A weighted sum of species; ``family`` names the mechanism family to prefer."""

    name: str
    required: dict[str, float]
    optional: dict[str, float] = field(default_factory=dict)
    family: str | None = None


_ACTIVE_OPT = {"Cl2": 2.0, "HOCl": 1.0, "OClO": 1.0, "BrCl": 1.0, "ClNO2": 1.0}

GROUPS: dict[str, Group] = {g.name: g for g in (
    Group("ClOx", {"Cl": 1.0, "ClO": 1.0, "Cl2O2": 2.0}),
    Group("ClO+2Cl2O2", {"ClO": 1.0, "Cl2O2": 2.0}),
    Group("active_chlorine", {"Cl": 1.0, "ClO": 1.0, "Cl2O2": 2.0}, _ACTIVE_OPT),
    Group("HCl", {"HCl": 1.0}),
    Group("ClONO2", {"ClONO2": 1.0}),
    Group("HOCl", {"HOCl": 1.0}),
    Group("Cly", {"HCl": 1.0, "ClONO2": 1.0, "Cl": 1.0, "ClO": 1.0, "Cl2O2": 2.0}, _ACTIVE_OPT, family="Cly"),
    Group("BrO", {"BrO": 1.0}),
    Group("BrOx", {"Br": 1.0, "BrO": 1.0}),
    Group("Bry", {"Br": 1.0, "BrO": 1.0},
          {"HOBr": 1.0, "BrONO2": 1.0, "HBr": 1.0, "BrCl": 1.0, "Br2": 2.0}, family="Bry"),
    Group("NOx", {"NO": 1.0, "NO2": 1.0}, family=None),
    Group("NOy", {"NO": 1.0, "NO2": 1.0},
          {"NO3": 1.0, "N2O5": 2.0, "HNO3": 1.0, "HNO4": 1.0, "HONO": 1.0, "ClONO2": 1.0,
           "BrONO2": 1.0, "ClNO2": 1.0}, family="NOy"),
)}

#: ratio name -> (numerator group, denominator group)
RATIOS: dict[str, tuple[str, str]] = {
    "ClOx/Cly": ("ClOx", "Cly"),
    "(ClO+2Cl2O2)/Cly": ("ClO+2Cl2O2", "Cly"),
    "active_chlorine/Cly": ("active_chlorine", "Cly"),
    "HCl/Cly": ("HCl", "Cly"),
    "ClONO2/Cly": ("ClONO2", "Cly"),
    "HOCl/Cly": ("HOCl", "Cly"),
    "BrO/Bry": ("BrO", "Bry"),
    "BrOx/Bry": ("BrOx", "Bry"),
    "NOx/NOy": ("NOx", "NOy"),
}

#: a partition of Cly into disjoint parts (plus "other" = the rest of the family)
CLY_PARTITION = ("HCl", "ClONO2", "HOCl", "ClOx", "Cl2")


def _weights(ds: xr.Dataset, group: Group) -> dict[str, float]:
    missing = [s for s in group.required if not is_species(ds, s)]
    if missing:
        raise ResultError(f"{group.name} needs the species {', '.join(missing)}, "
                          f"which this result does not have")
    w = dict(group.required)
    w.update({s: v for s, v in group.optional.items() if is_species(ds, s)})
    return w


def number_density(ds: xr.Dataset) -> xr.DataArray:
    """Number densities [cm-3]: the run's, or mole fraction x air density (member files save only the former)."""
    if "number_density" in ds.variables:
        return ds["number_density"]
    require(ds, ["mole_fraction", "air_number_density"], "number densities")
    return (ds["mole_fraction"] * ds["air_number_density"]).assign_attrs(units="cm-3")


def group_sum(ds: xr.Dataset, name: str) -> xr.DataArray:
    """Number density of a group (time) [cm-3]: the run's family when defined, else a species sum."""
    if name not in GROUPS:
        raise ResultError(f"unknown group {name!r}; known: {', '.join(GROUPS)}")
    group = GROUPS[name]
    if group.family and is_family(ds, group.family) and "family_number_density" in ds.variables:
        return ds["family_number_density"].sel(family=group.family, drop=True)
    w = _weights(ds, group)
    weights = xr.DataArray(list(w.values()), dims="species", coords={"species": list(w)})
    nd = number_density(ds).sel(species=list(w))
    return (nd * weights).sum("species").assign_attrs(units="cm-3")


def ratio(ds: xr.Dataset, name: str) -> xr.DataArray:
    """A partitioning ratio over time [1], e.g. ``ratio(ds, "ClOx/Cly")``."""
    if name not in RATIOS:
        raise ResultError(f"unknown ratio {name!r}; known: {', '.join(RATIOS)}")
    num, den = RATIOS[name]
    d = group_sum(ds, den)
    r = group_sum(ds, num) / d.where(d > 0)
    return r.rename(name).assign_attrs(units="1", long_name=f"{name} (number-density ratio)")


def partitioning(ds: xr.Dataset, names=None) -> xr.Dataset:
    """Every ratio of :data:`RATIOS` (or of ``names``) the result supports [1].

    Variables are named by the ratio; ratios whose species are missing are
    skipped when ``names`` is None (listed in ``attrs["skipped"]``) and raise
    :class:`ResultError` when asked for by name.
    """
    out, skipped = xr.Dataset(), []
    for name in (RATIOS if names is None else names):
        try:
            out[name] = ratio(ds, name)
        except ResultError as exc:
            if names is not None:
                raise
            skipped.append(f"{name}: {exc}")
    out.attrs["skipped"] = "; ".join(skipped)
    return out


def chlorine_partitioning(ds: xr.Dataset) -> xr.Dataset:
    """Fractions of Cly in HCl, ClONO2, HOCl, ClOx, Cl2 and the rest (time) [1].

    Needs the Cly family of the run (``family_weight``) so that "other" is
    the rest of the family computed from its own members (e.g. OClO, BrCl,
    or organic chlorine when Cly counts atoms(Cl)); the parts then sum to 1
    by the family's definition, which the tests check.
    """
    require(ds, ["family_number_density"], "chlorine partitioning")
    density = number_density(ds)
    if not is_family(ds, "Cly"):
        raise ResultError("chlorine partitioning needs a family 'Cly' in the result; "
                          f"families: {', '.join(str(f) for f in ds['family'].values) if 'family' in ds.coords else '(none)'}")
    w_cly = family_weights(ds).sel(family="Cly", drop=True)
    total = ds["family_number_density"].sel(family="Cly", drop=True)
    total = total.where(total > 0)
    out, counted = xr.Dataset(), set()
    for name in CLY_PARTITION:
        group = GROUPS.get(name, Group(name, {name: 2.0 if name == "Cl2" else 1.0}))
        w = {s: v for s, v in {**group.required, **group.optional}.items() if is_species(ds, s)}
        if not w:
            continue
        counted.update(w)
        nd = density.sel(species=list(w))
        weights = w_cly.sel(species=list(w))
        out[name] = ((nd * weights).sum("species") / total).assign_attrs(units="1")
    rest = [str(s) for s in ds["species"].values if str(s) not in counted]
    nd_rest = (density.sel(species=rest) * w_cly.sel(species=rest)).sum("species")
    out["other"] = (nd_rest / total).assign_attrs(units="1", members=" ".join(
        s for s in rest if float(w_cly.sel(species=s)) != 0))
    return out
