"""A small synthetic run result that follows the output contract exactly.

Used by the diagnostics, plotting, compare and sweep tests so they do not
depend on a full integration.  The numbers are invented (smooth functions of
time), not chemistry: the tests check identities and closed forms on them.
"""
from __future__ import annotations

import numpy as np
import xarray as xr

from boxchem.mechanism.model import Cycle, Family, Mechanism, Reaction, Species, Term

SPECIES = ("O3", "O", "O1D", "O2", "Cl", "ClO", "Cl2O2", "Cl2", "HCl", "ClONO2", "HOCl",
           "NO", "NO2", "Br", "BrO")
FIXED = {"O2"}

#: id, reactants, products, photolysis?, third body?, mean rate [cm-3 s-1] (invented)
REACTIONS = (
    ("j_o2",      {"O2": 1},              {"O": 2},                      True,  False, 2.0e3),
    ("o_o2",      {"O": 1, "O2": 1},      {"O3": 1},                     False, True,  5.0e6),
    ("j_o3",      {"O3": 1},              {"O": 1, "O2": 1},             True,  False, 5.0e6),
    ("o_o3",      {"O": 1, "O3": 1},      {"O2": 2},                     False, False, 3.0e2),
    ("cl_o3",     {"Cl": 1, "O3": 1},     {"ClO": 1, "O2": 1},           False, False, 4.0e5),
    ("clo_dimer", {"ClO": 2},             {"Cl2O2": 1},                  False, True,  1.5e5),
    ("j_dimer",   {"Cl2O2": 1},           {"Cl": 2, "O2": 1},            True,  False, 1.4e5),
    ("clo_o",     {"ClO": 1, "O": 1},     {"Cl": 1, "O2": 1},            False, False, 1.0e3),
    ("no_o3",     {"NO": 1, "O3": 1},     {"NO2": 1, "O2": 1},           False, False, 2.0e4),
    ("j_no2",     {"NO2": 1},             {"NO": 1, "O": 1},             True,  False, 1.9e4),
    ("clo_bro",   {"ClO": 1, "BrO": 1},   {"Cl": 1, "Br": 1, "O2": 1},   False, False, 6.0e4),
    ("br_o3",     {"Br": 1, "O3": 1},     {"BrO": 1, "O2": 1},           False, False, 7.0e4),
    ("clo_no2",   {"ClO": 1, "NO2": 1},   {"ClONO2": 1},                 False, True,  2.0e3),
    ("cl2_j",     {"Cl2": 1},             {"Cl": 2},                     True,  False, 1.0e3),
)

FAMILIES = {
    "Ox": {"O3": 1, "O": 1, "O1D": 1},
    "Cly": {"Cl": 1, "ClO": 1, "Cl2O2": 2, "Cl2": 2, "HCl": 1, "ClONO2": 1, "HOCl": 1},
    "ClOx": {"Cl": 1, "ClO": 1, "Cl2O2": 2},
    "Bry": {"Br": 1, "BrO": 1},
    "NOx": {"NO": 1, "NO2": 1},
}
CYCLES = {"chapman": {"o_o3": 2.0}, "clo_dimer": {"j_dimer": 2.0}, "clo_o": {"clo_o": 2.0},
          "clo_bro": {"clo_bro": 2.0}}

#: invented mean number densities [cm-3]
MEAN_DENSITY = {"O3": 1.5e12, "O": 1e5, "O1D": 1.0, "O2": 1.5e17, "Cl": 5e4, "ClO": 7e8,
                "Cl2O2": 4e8, "Cl2": 1e7, "HCl": 3e8, "ClONO2": 2e8, "HOCl": 5e7, "NO": 1e6,
                "NO2": 5e7, "Br": 1e6, "BrO": 1e8}
AIR = 7.0e17


def _equation(reactants, products, photolysis, third):
    lhs = " + ".join(f"{'' if c == 1 else c}{s}" for s, c in reactants.items())
    rhs = " + ".join(f"{'' if c == 1 else c}{s}" for s, c in products.items())
    return f"{lhs}{' + hv' if photolysis else ''}{' + M' if third else ''} -> {rhs}{' + M' if third else ''}"


def daylight(hours: np.ndarray) -> np.ndarray:
    """Invented daylight factor: a half sine between 06 and 18 UTC, 0 at night."""
    return np.clip(np.sin(2 * np.pi * (hours - 6.0) / 24.0), 0.0, None)


def make_mechanism() -> Mechanism:
    species = tuple(Species(s, None, fixed=s in FIXED) for s in SPECIES)
    reactions = tuple(
        Reaction(rid, tuple(Term(s, c) for s, c in re.items()), tuple(Term(s, c) for s, c in pr.items()),
                 "photolysis" if ph else "arrhenius", third_body=tb, photolysis=ph,
                 equation=_equation(re, pr, ph, tb))
        for rid, re, pr, ph, tb, _ in REACTIONS)
    families = tuple(Family(n, dict(m)) for n, m in FAMILIES.items())
    cycles = tuple(Cycle(n, "Ox", dict(t)) for n, t in CYCLES.items())
    return Mechanism(species, reactions, families, cycles, source="synthetic")


def make_result(days: float = 3.0, step_minutes: float = 15.0, start: str = "2026-09-01T00:00",
                o3_scale: float = 1.0, rate_scale: dict | None = None) -> xr.Dataset:
    """A synthetic run result with every contract variable plus stoichiometry and family_weight."""
    rate_scale = rate_scale or {}
    n = int(round(days * 1440 / step_minutes)) + 1
    t0 = np.datetime64(start, "ns")
    time = t0 + (np.arange(n) * step_minutes * 60e9).astype("timedelta64[ns]")
    sec = np.arange(n) * step_minutes * 60.0
    hours = (sec / 3600.0 + (t0 - t0.astype("datetime64[D]")).astype(float) / 3.6e12) % 24.0
    day = daylight(hours)

    ns, nr = len(SPECIES), len(REACTIONS)
    phase = np.linspace(0, 2 * np.pi, ns, endpoint=False)
    nd = np.array([MEAN_DENSITY[s] for s in SPECIES])[None, :] * (1 + 0.3 * np.sin(2 * np.pi * sec[:, None] / 86400 + phase))
    nd[:, SPECIES.index("O3")] = o3_scale * MEAN_DENSITY["O3"] * (1 - 0.02 * sec / 86400)
    nd[:, SPECIES.index("O2")] = 0.2095 * AIR

    rates = np.empty((n, nr))
    for j, (rid, _, _, ph, _, mean) in enumerate(REACTIONS):
        shape = 2.0 * day if ph else 1 + 0.5 * np.sin(2 * np.pi * sec / 86400 + j)
        rates[:, j] = mean * shape * rate_scale.get(rid, 1.0)
    k = rates / 1e10

    nu = np.zeros((ns, nr))
    for j, (_, re, pr, _, _, _) in enumerate(REACTIONS):
        for s, c in re.items():
            nu[SPECIES.index(s), j] -= c
        for s, c in pr.items():
            nu[SPECIES.index(s), j] += c
    fams = list(FAMILIES)
    w = np.array([[FAMILIES[f].get(s, 0.0) for s in SPECIES] for f in fams])
    rid = [r[0] for r in REACTIONS]
    cyc = list(CYCLES)
    cycle_rate = np.stack([sum(c * rates[:, rid.index(r)] for r, c in CYCLES[name].items()) for name in cyc], axis=1)

    air = np.full(n, AIR)
    ds = xr.Dataset(
        {
            "number_density": (("time", "species"), nd, {"units": "cm-3"}),
            "mole_fraction": (("time", "species"), nd / air[:, None], {"units": "1"}),
            "rate_coefficient": (("time", "reaction"), k, {"units": "cm3 s-1"}),
            "reaction_rate": (("time", "reaction"), rates, {"units": "cm-3 s-1"}),
            "family_number_density": (("time", "family"), nd @ w.T, {"units": "cm-3"}),
            "cycle_rate": (("time", "cycle"), cycle_rate, {"units": "cm-3 s-1"}),
            "solar_zenith_angle": ("time", 90.0 - 60.0 * np.sin(2 * np.pi * (hours - 6) / 24), {"units": "degree"}),
            "temperature": ("time", np.full(n, 195.0), {"units": "K"}),
            "pressure": ("time", np.full(n, 6000.0), {"units": "Pa"}),
            "air_number_density": ("time", air, {"units": "cm-3"}),
            "stoichiometry": (("species", "reaction"), nu, {"units": "1"}),
            "family_weight": (("family", "species"), w, {"units": "1"}),
        },
        coords={"time": time, "species": list(SPECIES), "reaction": rid,
                "equation": ("reaction", [_equation(*r[1:5]) for r in REACTIONS]),
                "family": fams, "cycle": cyc,
                "species_is_fixed": ("species", np.array([int(s in FIXED) for s in SPECIES], dtype=np.int8))},
        attrs={"boxchem_version": "0.1.0", "mechanism_sha256": "0" * 64, "scenario": "synthetic",
               "latitude": -70.0, "longitude": 0.0},
    )
    return ds
