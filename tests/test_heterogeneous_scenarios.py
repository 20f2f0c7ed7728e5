"""The shipped midlatitude and polar-spring scenarios behave physically for the right reasons (issue 11)."""
from __future__ import annotations

import numpy as np
import pytest

import boxchem


def _x(ds, s):
    return ds["mole_fraction"].sel(species=s).values


def _daily_max(ds, s, day):
    per_day = int(round(86400.0 / float((ds["time"][1] - ds["time"][0]) / np.timedelta64(1, "s"))))
    return float(_x(ds, s)[day * per_day:(day + 1) * per_day].max())


@pytest.fixture(scope="module")
def midlatitude():
    return boxchem.run("midlatitude")


def test_midlatitude_hcl_stays_the_main_chlorine_reservoir(midlatitude):
    # In the midlatitude lower stratosphere HCl is the largest inorganic chlorine reservoir
    # (about 60-70 % of Cly, ClONO2 most of the rest; WMO/UNEP ozone assessments, recalled
    # from memory), and warm (222 K) sulfate aerosol does not convert it: gamma(ClONO2 + HCl)
    # ~ 1e-7 there (Shi et al. 2001).  Over the 10-day run HCl changes by less than 10 %.
    ds = midlatitude
    inorganic = ["HCl", "ClONO2", "HOCl", "ClO", "Cl", "Cl2O2", "Cl2", "OClO", "BrCl", "ClNO2"]
    present = [s for s in inorganic if s in ds["species"].values]
    cly = sum(_x(ds, s) * (2 if s in ("Cl2", "Cl2O2") else 1) for s in present)
    hcl = _x(ds, "HCl")
    assert np.all(hcl / cly > 0.55)
    assert abs(hcl[-1] / hcl[0] - 1) < 0.10
    # noon ClO of order 100 pptv, not the several hundred of activated air (common knowledge)
    assert _daily_max(ds, "ClO", 8) < 200e-12


@pytest.fixture(scope="module")
def warming_vortex():
    """Activated vortex air from 18 September as the vortex warms (197 -> 210 K)."""
    return boxchem.run("polar-spring", **{"run.start": "2026-09-18T00:00:00Z", "run.duration": "22 d",
                                          "run.output_interval": "2 h"})


@pytest.fixture(scope="module")
def cold_vortex():
    """The same air held at 193 K (no NAT for 2 ppbv HNO3 above 193.7 K: sulfate only)."""
    return boxchem.run("polar-spring", **{"run.start": "2026-09-18T00:00:00Z", "run.duration": "22 d",
                                          "run.output_interval": "2 h",
                                          "environment.temperature": "194 K"})


def test_polar_spring_deactivates_as_the_vortex_warms(warming_vortex, cold_vortex):
    ds = warming_vortex
    # no NAT in denitrified air this warm (T_NAT about 193.5 K for 2 ppbv HNO3; Hanson and
    # Mauersberger 1988): the sulfate gammas alone decide
    assert float(ds["psc_surface_area"].max()) == 0.0
    # chlorine deactivates: ClO falls, HCl and ClONO2 recover (the spring recovery of the
    # Antarctic vortex; e.g. Douglass et al. 1995, JGR 100, 13967, recalled from memory)
    assert _daily_max(ds, "ClO", 20) < 0.25 * _daily_max(ds, "ClO", 0)
    assert _x(ds, "HCl")[-1] > 1.3 * _x(ds, "HCl")[0]
    # ... because the sulfate gammas fall with temperature (Shi et al. 2001): ClONO2 + HCl on
    # sulfate slows by orders of magnitude between 197 and 210 K
    k = ds["rate_coefficient"].sel(reaction="het_clono2_hcl_sa").values
    assert k[-1] < 1e-3 * k[0]
    # the same air kept at 194 K (no NAT) stays activated on the cold sulfate (physics, not a switch)
    assert float(cold_vortex["psc_surface_area"].max()) == 0.0
    assert _daily_max(cold_vortex, "ClO", 20) > 3 * _daily_max(ds, "ClO", 20)
