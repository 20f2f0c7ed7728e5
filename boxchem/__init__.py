"""boxchem: an atmospheric photochemistry box model.

Public API (imported lazily so that ``import boxchem`` stays fast):

* ``load_mechanism(path_or_name)``      -> Mechanism
* ``load_scenario(path_or_name)``       -> Scenario
* ``run(scenario_or_path, **overrides)`` -> xarray.Dataset
* ``ensemble(scenario, members, ...)``  -> member-file xarray.Dataset (many runs, one engine)
* ``solar_zenith_angle(time, latitude, longitude)`` -> degrees
* ``actinic_flux(...)``                 -> spectral actinic flux at the box
"""
from __future__ import annotations

__version__ = "0.1.0"

_LAZY = {
    "load_mechanism": ("boxchem.mechanism.parser", "load_mechanism"),
    "parse_mechanism": ("boxchem.mechanism.parser", "parse_mechanism"),
    "load_scenario": ("boxchem.scenario", "load_scenario"),
    "run": ("boxchem.runner", "run"),
    "ensemble": ("boxchem.analysis.ensemble", "ensemble"),
    "solar_zenith_angle": ("boxchem.environment.solar", "solar_zenith_angle"),
    "actinic_flux": ("boxchem.photolysis.actinic", "actinic_flux"),
    "MechanismError": ("boxchem.errors", "MechanismError"),
    "ScenarioError": ("boxchem.errors", "ScenarioError"),
    "BoxchemError": ("boxchem.errors", "BoxchemError"),
}

__all__ = ["__version__", *_LAZY]


def __getattr__(name: str):
    if name in _LAZY:
        import importlib
        module_name, attr = _LAZY[name]
        value = getattr(importlib.import_module(module_name), attr)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'boxchem' has no attribute {name!r}")
