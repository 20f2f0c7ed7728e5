"""Quantities with units, converted once at the edge.

Scenario files and command-line options carry values such as ``"60 hPa"``,
``"18 km"``, ``"2.8 ppmv"`` or ``"15 min"``.  They are converted here, at load
time, to the internal units the kernels use:

==============  ==================  ===========================================
kind            internal unit       accepted units
==============  ==================  ===========================================
pressure        Pa                  Pa, hPa, kPa, mbar, bar, atm, Torr
length          m                   m, km
time            s                   s, min, h, d  (also sec, hour, day, days)
temperature     K                   K
amount          1 or cm-3           ppmv, ppbv, pptv, ppm, ppb, ppt, mol/mol,
                                    cm-3, molecule cm-3, molec cm-3
column          DU                  DU, molecule cm-2 (1 DU = 2.6867e16 cm-2)
surface_area    cm2 cm-3            um2 cm-3, cm2 cm-3
angle           degree              deg, degree, degrees
wavelength      nm                  nm
==============  ==================  ===========================================

A bare number is accepted where a kind has a default unit (given by the
caller); otherwise a missing unit is an error.
"""
from __future__ import annotations

import math
import re

from .errors import UnitError

#: Dobson unit in molecule cm-2 (definition: 10 um of gas at STP; common practice, no source)
DOBSON_UNIT_CM2 = 2.6867e16

_FACTORS: dict[str, dict[str, float]] = {
    "pressure": {"pa": 1.0, "hpa": 100.0, "kpa": 1000.0, "mbar": 100.0, "mb": 100.0,
                 "bar": 1.0e5, "atm": 101325.0, "torr": 101325.0 / 760.0},
    "length": {"m": 1.0, "km": 1000.0},
    "time": {"s": 1.0, "sec": 1.0, "second": 1.0, "seconds": 1.0,
             "min": 60.0, "minute": 60.0, "minutes": 60.0,
             "h": 3600.0, "hr": 3600.0, "hour": 3600.0, "hours": 3600.0,
             "d": 86400.0, "day": 86400.0, "days": 86400.0},
    "temperature": {"k": 1.0},
    "column": {"du": 1.0, "moleculecm-2": 1.0 / DOBSON_UNIT_CM2, "cm-2": 1.0 / DOBSON_UNIT_CM2},
    "surface_area": {"um2cm-3": 1.0e-8, "µm2cm-3": 1.0e-8, "cm2cm-3": 1.0},
    "angle": {"deg": 1.0, "degree": 1.0, "degrees": 1.0},
    "wavelength": {"nm": 1.0},
}

#: how error messages spell the units of each kind (the keys above are lower-cased for lookup)
_DISPLAY: dict[str, str] = {
    "pressure": "Pa, hPa, kPa, mbar, bar, atm, Torr",
    "length": "m, km",
    "time": "s, min, h, d",
    "temperature": "K",
    "column": "DU, molecule cm-2",
    "surface_area": "um2 cm-3, cm2 cm-3",
    "angle": "deg",
    "wavelength": "nm",
}
#: the unit shown in the "e.g." of a missing-unit message (the one scenarios mostly use)
_EXAMPLE_UNIT = {"pressure": "hPa", "length": "km", "time": "h", "temperature": "K", "column": "DU",
                 "surface_area": "um2 cm-3", "angle": "deg", "wavelength": "nm"}

_MIXING_RATIO = {"ppmv": 1e-6, "ppm": 1e-6, "ppbv": 1e-9, "ppb": 1e-9,
                 "pptv": 1e-12, "ppt": 1e-12, "mol/mol": 1.0, "molmol-1": 1.0, "1": 1.0}
_NUMBER_DENSITY = {"cm-3": 1.0, "moleculecm-3": 1.0, "moleculescm-3": 1.0, "moleccm-3": 1.0,
                   "molecule/cm3": 1.0, "molecules/cm3": 1.0}

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")

KINDS = tuple(_FACTORS) + ("amount",)


#: a whole example value of each kind, shown when a value cannot be read at all
_EXAMPLE_VALUE = {"pressure": "60 hPa", "temperature": "195 K", "length": "18 km", "time": "15 min",
                  "amount": "2.8 ppmv", "column": "300 DU", "surface_area": "2 um2 cm-3",
                  "angle": "70 deg", "wavelength": "300 nm"}


def _split(value: object, where: str, kind: str) -> tuple[float, str]:
    example = _EXAMPLE_VALUE[kind]
    if isinstance(value, bool):
        raise UnitError(f"{where}: expected a number with a unit such as \"{example}\", got {value!r}")
    if isinstance(value, (int, float)):
        return float(value), ""
    if not isinstance(value, str):
        raise UnitError(f"{where}: expected a number with a unit such as \"{example}\", got {value!r}")
    m = _NUMBER.match(value)
    if not m:
        raise UnitError(f"{where}: cannot read {value!r} as a number with a unit (e.g. \"{example}\")")
    return float(m.group(1)), m.group(2)


def _key(unit: str) -> str:
    return unit.replace(" ", "").replace("^", "").replace("·", "").lower()


def parse_quantity(value: object, kind: str, *, default_unit: str | None = None,
                   where: str = "value") -> float:
    """Convert ``"60 hPa"``-like text (or a bare number) to the internal unit of ``kind``.

    ``where`` names the key path or option for error messages.  A bare number
    takes ``default_unit``; with no default a bare number is an error.
    """
    if kind not in _FACTORS:
        raise ValueError(f"unknown quantity kind {kind!r}; expected one of {sorted(_FACTORS)}")
    number, unit = _split(value, where, kind)
    if not math.isfinite(number):
        raise UnitError(f"{where}: {value!r} is not a finite number")
    if not unit:
        if default_unit is None:
            raise UnitError(f"{where}: {value!r} has no unit; write it with one of "
                            f"{_DISPLAY[kind]}, e.g. \"{number:g} {_EXAMPLE_UNIT[kind]}\"")
        unit = default_unit
    factors = _FACTORS[kind]
    key = _key(unit)
    if key not in factors:
        raise UnitError(f"{where}: unknown {kind} unit {unit!r} in {value!r}; "
                        f"valid units: {_DISPLAY[kind]}")
    return number * factors[key]


def parse_amount(value: object, *, where: str = "value") -> tuple[float, str]:
    """Read an initial amount: returns ``(number, "mole_fraction")`` or ``(number, "number_density")``.

    Mole fractions come back as plain fractions (``"2.8 ppmv"`` -> 2.8e-6);
    number densities in molecule cm-3.  A bare number is an error, since the
    two readings differ by twenty orders of magnitude.
    """
    number, unit = _split(value, where, "amount")
    if not math.isfinite(number):
        raise UnitError(f"{where}: {value!r} is not a finite number")
    key = _key(unit)
    if key in _MIXING_RATIO and key != "1":
        return number * _MIXING_RATIO[key], "mole_fraction"
    if key in {"mol/mol", "molmol-1"}:
        return number, "mole_fraction"
    if key in _NUMBER_DENSITY:
        return number, "number_density"
    raise UnitError(f"{where}: {value!r} needs an amount unit: ppmv, ppbv, pptv, mol/mol "
                    f"(mixing ratio) or cm-3 (molecule cm-3)")
