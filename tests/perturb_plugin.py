"""pytest plugin for benchmarks/factor2_check.py: multiply one key quantity of the model by a factor.

Active only when the environment variable BOXCHEM_PERTURB is set, as
``NAME=FACTOR`` with NAME a key of ROWS (e.g. ``clo_clo_m=2``).  It wraps the
model's own evaluation points, so every test sees the perturbed model exactly
as a user's run would:

* thermal k: ``RateEvaluator.thermal`` columns of the row's reactions;
* surface gammas: ``RateEvaluator.surface_gamma`` columns (k = gamma v S / 4 follows);
* photolysis J: ``PhotolysisRates.__call__`` columns;
* the O3 absorption cross section: ``cross_section_data("O3")`` (used for J(O3)
  and for the ozone absorption of the actinic flux).

Without BOXCHEM_PERTURB the plugin does nothing (the normal suite never loads it).
"""
from __future__ import annotations

import os

import numpy as np

#: row name -> (kind, reaction ids or data set name)
ROWS = {
    "clo_clo_m": ("thermal", ("clo_clo_m",)),
    "j_cl2o2": ("photolysis", ("j_cl2o2",)),
    "clo_bro": ("thermal", ("clo_bro_a", "clo_bro_b", "clo_bro_c")),
    "cl_o3": ("thermal", ("cl_o3",)),
    "sulfate_gammas": ("surface", ("het_clono2_hcl_sa", "het_clono2_h2o_sa", "het_hocl_hcl_sa",
                                   "het_n2o5_h2o_sa", "het_brono2_h2o_sa")),
    "nat_gammas": ("surface", ("het_clono2_hcl_psc", "het_clono2_h2o_psc", "het_hocl_hcl_psc",
                               "het_n2o5_h2o_psc", "het_n2o5_hcl_psc", "het_brono2_h2o_psc",
                               "het_brono2_hcl_psc", "het_hobr_hcl")),
    "o3_cross_section": ("cross_section", ("O3",)),
    # thermodynamics of the particles (issue 11): p_eq(HNO3) over NAT, HNO3 solubility in STS
    "nat_saturation": ("function", ("boxchem.environment.psc:nat_hno3_equilibrium_pressure",
                                    "boxchem.environment.condensation:nat_hno3_equilibrium_pressure")),
    "sts_solubility": ("function", ("boxchem.environment.sts:_henry",)),
    # the STS droplet radius of the liquid gammas' reacto-diffusive factor
    "sts_droplet_radius": ("function", ("boxchem.environment.psc:lognormal_surface_weighted_radius",)),
}


#: test files a row needs beyond benchmarks/factor2_check.py's default
ROW_TESTS = {"nat_saturation": ("tests/test_condensation.py",), "sts_solubility": ("tests/test_sts.py",),
             "sts_droplet_radius": ("tests/test_sts.py",)}


def _factor_columns(ids_all, wanted, factor):
    f = np.ones(len(ids_all))
    for i, rid in enumerate(ids_all):
        if rid in wanted:
            f[i] = factor
    return f


class _ScaledSpectralData:
    """A SpectralData whose values are multiplied by ``factor`` (point values and bin means)."""

    def __init__(self, data, factor):
        self._data, self._factor = data, factor

    def __getattr__(self, name):
        return getattr(self._data, name)

    def __call__(self, *a, **k):
        return self._factor * np.asarray(self._data(*a, **k))

    def bin_average(self, *a, **k):
        return self._factor * np.asarray(self._data.bin_average(*a, **k))


def pytest_configure(config):
    spec = os.environ.get("BOXCHEM_PERTURB")
    if not spec:
        return
    name, _, value = spec.partition("=")
    if name not in ROWS:
        raise SystemExit(f"BOXCHEM_PERTURB: unknown row {name!r}; valid: {', '.join(ROWS)}")
    factor = float(value)
    kind, ids = ROWS[name]
    from boxchem.mechanism import ratelaws

    if kind == "thermal":
        original = ratelaws.RateEvaluator.thermal

        def thermal(self, *a, **k):
            return original(self, *a, **k) * _factor_columns(self.reaction_ids, ids, factor)
        ratelaws.RateEvaluator.thermal = thermal
    elif kind == "surface":
        original = ratelaws.RateEvaluator.surface_gamma

        def surface_gamma(self, *a, **k):
            surface_ids = [self.reaction_ids[i] for i in self.surface_index]
            return original(self, *a, **k) * _factor_columns(surface_ids, ids, factor)
        ratelaws.RateEvaluator.surface_gamma = surface_gamma
    elif kind == "photolysis":
        from boxchem.photolysis import rates

        original = rates.PhotolysisRates.__call__

        def call(self, *a, **k):
            ids_all = [r.id for r in self.mechanism.reactions]
            return np.asarray(original(self, *a, **k)) * _factor_columns(ids_all, ids, factor)
        rates.PhotolysisRates.__call__ = call
    elif kind == "function":
        import importlib

        for target in ids:
            module_name, attr = target.split(":")
            module = importlib.import_module(module_name)
            original_f = getattr(module, attr)

            def scaled(*a, _f=original_f, **k):
                return np.asarray(_f(*a, **k)) * factor
            setattr(module, attr, scaled)
    elif kind == "cross_section":
        from boxchem.photolysis import crosssections

        original = crosssections.cross_section_data

        def cross_section_data(name_or_path):
            data = original(name_or_path)
            return _ScaledSpectralData(data, factor) if str(name_or_path) in ids else data
        crosssections.cross_section_data = cross_section_data

