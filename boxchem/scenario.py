"""Scenario files (TOML) -> a validated :class:`Scenario` in internal units.

A scenario names a mechanism, a start time, a duration, an output interval, a
place, the environment of the box, initial amounts, solver settings, rate
scale factors and photolysis options.  Every value with a unit is converted
here, once, with :mod:`boxchem.units`; everything downstream sees s, m, K,
Pa, cm-3, cm2 cm-3, DU and degrees only.  The full layout with every key is
documented in ``docs/scenarios.md``.

All mistakes found in one file are collected and raised together as one
:class:`~boxchem.errors.ScenarioError`; each line names the file and the key
path (``stratosphere-box.toml: [environment].temperature: ...``), what was
found and what would be valid.

A file may build on another with a top-level ``extends = "polar-spring"``
(a shipped name or a path relative to the file): the base is read first and
the file's sections are merged over it key by key; ``remove = ["section.key",
"section"]`` deletes keys of the base.  Chains are followed, cycles are
errors, and every key remembers the file that wrote it, so that its errors
name that file and relative paths in it are read against that file's
folder.  Details in ``docs/scenarios.md`` ("Building on another scenario").
"""
from __future__ import annotations

import copy
import datetime as _dt
import difflib
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .environment.history import ICE_FROST_POINT_K
from .errors import BoxchemError, ScenarioError, UnitError
from .units import parse_amount, parse_quantity

__all__ = ["Scenario", "TimeSeriesSpec", "ThresholdRuleSpec", "load_scenario",
           "split_scenario_text", "SCENARIO_KEYS", "SOLVER_METHODS", "PHOTOLYSIS_METHODS",
           "EXTENDS_KEY", "REMOVE_KEY", "PROVENANCE_MARKER", "paths_from_working_folder"]

#: solver methods a scenario may name (see boxchem.solver)
SOLVER_METHODS = ("rodas3", "ros3")
#: photolysis methods (see boxchem.photolysis.rates.PhotolysisRates)
PHOTOLYSIS_METHODS = ("spectral", "parametric")

#: every known key per section; [initial] and [scale] take species / reaction ids
SCENARIO_KEYS: dict[str, tuple[str, ...]] = {
    "run": ("mechanism", "start", "duration", "output_interval", "allow_long_run"),
    "location": ("latitude", "longitude", "altitude", "pressure"),
    "environment": ("temperature", "temperature_offset", "pressure", "trajectory", "ozone_column",
                    "psc_surface_area", "sulfate_surface_area", "ice_surface_area", "albedo"),
    "solver": ("rtol", "atol", "method", "max_step", "allow_loose_atol"),
    "photolysis": ("method", "cross_sections", "ozone_column_follows_box",
                   "ozone_loss_layer_depth"),
}
_FREE_SECTIONS = ("initial", "scale")
_SERIES_KEYS = ("times", "values", "time_unit", "unit")
_RULE_KEYS = ("rule", "area", "below", "width")
#: keys of the thermodynamic area rules (rule = "nat" / "ice"; boxchem/environment/psc.py)
_EQUILIBRIUM_RULE_KEYS = ("rule", "particle_number_density", "geometric_std")
#: keys of the liquid STS rule (sulfate_surface_area = { rule = "sts", ... }; environment/sts.py)
_STS_RULE_KEYS = ("rule", "h2so4", "particle_number_density", "geometric_std")

#: top-level keys (not sections) of a file that builds on another scenario
EXTENDS_KEY = "extends"
REMOVE_KEY = "remove"
#: keys whose values are file paths, read against the folder of the file that wrote them
_PATH_KEYS = ("[run].mechanism", "[environment].trajectory", "[photolysis].cross_sections")
#: deepest chain of files that extend each other
MAX_EXTENDS_DEPTH = 64
#: line that starts each file's text in ``Scenario.text`` when a file extends others
PROVENANCE_MARKER = "#>>> boxchem scenario file: "

#: defaults (internal units); documented in docs/scenarios.md
DEFAULT_OUTPUT_INTERVAL_S = 3600.0
DEFAULT_LONGITUDE_DEG = 0.0
DEFAULT_OZONE_COLUMN_DU = 300.0     # a typical mid-latitude total column; common practice, no source
DEFAULT_ALBEDO = 0.3                # a common global-mean surface/cloud albedo; common practice, no source
DEFAULT_RTOL = 1.0e-4
DEFAULT_ATOL_CM3 = 1.0           # = boxchem.solver.DEFAULT_ATOL (justified in solver/timeloop.py)
DEFAULT_SOLVER_METHOD = "rodas3"  # = the solver default (measured choice, solver/rosenbrock.py)
DEFAULT_PHOTOLYSIS_METHOD = "spectral"
DEFAULT_OZONE_LOSS_LAYER_DEPTH_M = 10_000.0   # reasoning in boxchem/photolysis/ozonefollow.py

# physical ranges for plausibility checks (wide on purpose: reject only nonsense)
_ALTITUDE_RANGE_M = (-500.0, 120_000.0)


@dataclass(frozen=True)
class TimeSeriesSpec:
    """A quantity given at times (s since the run start), linearly interpolated."""

    times_s: np.ndarray
    values: np.ndarray

    def __eq__(self, other: object) -> bool:
        return (isinstance(other, TimeSeriesSpec)
                and np.array_equal(self.times_s, other.times_s)
                and np.array_equal(self.values, other.values))


@dataclass(frozen=True)
class ThresholdRuleSpec:
    """PSC (or ice) surface area ``area`` [cm2 cm-3] below ``below`` [K], ramped in over ``width`` [K].

    Evaluated by :class:`boxchem.environment.history.PscThresholdRule`
    (smoothstep from 0 at ``below`` to ``area`` at ``below - width``).
    """

    area: float
    below: float
    width: float = 1.0


@dataclass(frozen=True)
class EquilibriumRuleSpec:
    """PSC area from thermodynamics: ``kind`` "nat" (HNO3 over NAT, Hanson and Mauersberger
    1988) or "ice" (frost point, Murphy and Koop 2005), condensed excess in lognormal
    particles of ``number_density`` [cm-3] and ``geometric_std`` [1]
    (:mod:`boxchem.environment.psc`)."""

    kind: str
    number_density: float
    geometric_std: float = 1.8


@dataclass(frozen=True)
class StsRuleSpec:
    """Liquid sulfate / STS area from thermodynamics (Carslaw et al. 1995): ``h2so4``
    [mol mol-1] of H2SO4 in droplets of ``number_density`` [cm-3] and ``geometric_std`` [1]
    that take up HNO3 and H2O (:mod:`boxchem.environment.sts`)."""

    h2so4: float
    number_density: float = 10.0
    geometric_std: float = 1.8


Value = float | TimeSeriesSpec | ThresholdRuleSpec | EquilibriumRuleSpec | StsRuleSpec | None


@dataclass(frozen=True)
class Scenario:
    """A validated scenario in internal units.

    Times in s (``start`` a UTC ``numpy.datetime64[ns]``), lengths in m,
    pressures in Pa, temperatures in K, surface areas in cm2 cm-3, ozone
    column in DU, angles in degrees, amounts as mole fractions or cm-3.
    """

    source: str
    text: str = field(repr=False)
    data: Mapping[str, Any] = field(repr=False)
    base_dir: Path
    mechanism_path: Path
    start: np.datetime64
    duration_s: float
    output_interval_s: float
    latitude: float | TimeSeriesSpec
    longitude: float | TimeSeriesSpec
    altitude_m: float | None
    location_pressure_pa: float | None
    temperature: float | TimeSeriesSpec | None
    pressure: float | TimeSeriesSpec | None
    trajectory: Path | None
    ozone_column_du: float | TimeSeriesSpec
    psc_surface_area: float | TimeSeriesSpec | ThresholdRuleSpec
    sulfate_surface_area: float | TimeSeriesSpec | StsRuleSpec
    albedo: float
    initial: Mapping[str, tuple[float, str]]     # species -> (value, "mole_fraction"|"number_density")
    rtol: float
    atol: float
    solver_method: str
    max_step_s: float | None
    scale: Mapping[str, float]
    photolysis_method: str
    overrides: Mapping[str, Any] = field(default_factory=dict)
    mechanism: Any = field(default=None, repr=False, compare=False)
    #: reaction id -> user cross-section file ([photolysis].cross_sections)
    photolysis_cross_sections: Mapping[str, Path] = field(default_factory=dict)
    ozone_column_follows_box: bool = False
    ozone_loss_layer_depth_m: float = DEFAULT_OZONE_LOSS_LAYER_DEPTH_M
    #: key path ``"[section].key"`` -> where its overriding value came from (e.g.
    #: ``"--scale clo_clo_m=1.2"``), so that errors in it name that, not the file
    override_origins: Mapping[str, str] = field(default_factory=dict, repr=False, compare=False)
    #: the files read, the given one first then its bases: ``((source, text), ...)``
    layers: tuple[tuple[str, str], ...] = field(default=(), repr=False, compare=False)
    #: key path (``"[initial].HCl"``, ``"[run]"``) -> file that wrote it, where not ``source``
    key_sources: Mapping[str, str] = field(default_factory=dict, repr=False, compare=False)
    #: path-valued key (``"[run].mechanism"``) -> folder its relative path is read against
    key_dirs: Mapping[str, Path] = field(default_factory=dict, repr=False, compare=False)
    #: ice PSC surface area ([environment].ice_surface_area; 0 when not given)
    ice_surface_area: float | TimeSeriesSpec | ThresholdRuleSpec = 0.0

    # -- construction ----------------------------------------------------------
    @classmethod
    def from_text(cls, text: str, base_dir: str | Path = ".", source: str = "<scenario>",
                  *, mechanism: Any = None) -> "Scenario":
        """Parse and validate TOML ``text``; relative paths are read against ``base_dir``.

        ``mechanism`` (a :class:`~boxchem.mechanism.model.Mechanism`) skips
        loading the mechanism named in ``[run].mechanism``.  A top-level
        ``extends`` reads the base scenario(s) first and merges ``text`` over
        them (module docstring); ``text`` of the result then holds every file
        read, each after a :data:`PROVENANCE_MARKER` line.
        """
        base_dir = Path(base_dir)
        own_path = base_dir / source
        merged = _read_layers(text, base_dir, source, own_path if own_path.is_file() else None, ())
        return _build(merged.data, text=merged.provenance_text(), base_dir=base_dir, source=source,
                      mechanism=mechanism, overrides={}, layers=merged.layers,
                      key_sources=merged.key_sources, key_dirs=merged.key_dirs)

    def with_overrides(self, *, scale: Mapping[str, float] | None = None,
                       origins: Mapping[str, str] | None = None, **overrides: Any) -> "Scenario":
        """A new scenario with some values replaced, validated like the file.

        ``overrides`` keys are ``"section.key"`` (``{"run.duration": "2 d"}``)
        or a bare key that names one key of one section (``duration="2 d"``,
        ``rtol=1e-6``); a value of None removes the key (its default applies).
        ``scale`` entries multiply onto the file's ``[scale]``.
        ``origins`` says where each override came from, keyed like the
        overrides (``"run.duration"``, ``"scale.ID"``, ``"initial.SPECIES"``),
        e.g. ``{"scale.clo_clo_m": "--scale clo_clo_m=1.2"}``; errors in that
        value then name it instead of the scenario file.  Without an entry an
        error names the override itself (``override run.duration='-2 d'``).
        The original text stays in ``text``; the overrides are kept in
        ``overrides`` for provenance.
        """
        origins = dict(origins or {})
        data = copy.deepcopy(dict(self.data))
        record = dict(self.overrides)
        labels = dict(self.override_origins)
        key_dirs = dict(self.key_dirs)
        targets = set()
        for key, value in overrides.items():
            section, name = _override_target(key, origins.get(key, f"override {key}={value!r}"))
            targets.add((section, name))
            # an overriding path is read against the scenario's own folder, not a base's
            key_dirs.pop(_where(section, name), None)
            label = origins.get(key, f"override {section}.{name}={value!r}")
            if value is None:
                data.get(section, {}).pop(name, None)
            elif section == "initial" and isinstance(value, Mapping):
                data.setdefault("initial", {}).update(value)
                for species, amount in value.items():
                    default = origins.get(key, f"override initial.{species}={amount!r}")
                    labels[_where("initial", species)] = origins.get(f"initial.{species}", default)
            else:
                data.setdefault(section, {})[name] = value
                labels[_where(section, name)] = label
            record[f"{section}.{name}"] = value
        if scale:
            table = data.setdefault("scale", {})
            for rid, factor in scale.items():
                labels[_where("scale", rid)] = origins.get(f"scale.{rid}", f"override scale.{rid}={factor!r}")
                old = table.get(rid, 1.0)
                if isinstance(old, (int, float)) and not isinstance(old, bool) \
                        and isinstance(factor, (int, float)) and not isinstance(factor, bool):
                    table[rid] = float(old) * float(factor)
                else:
                    table[rid] = factor  # let validation report the bad value
                record[f"scale.{rid}"] = factor
        # an overridden [run].mechanism must be loaded (the loaded one belongs to the old value)
        mechanism = None if ("run", "mechanism") in targets else self.mechanism
        return _build(data, text=self.text, base_dir=self.base_dir, source=self.source,
                      mechanism=mechanism, overrides=record, origins=labels,
                      layers=self.layers, key_sources=self.key_sources, key_dirs=key_dirs)

    # -- derived -----------------------------------------------------------------
    @property
    def end(self) -> np.datetime64:
        return self.start + np.timedelta64(int(round(self.duration_s * 1e9)), "ns")

    def output_times_s(self) -> np.ndarray:
        """Output times [s since start]: every ``output_interval`` and the end time."""
        n = int(math.floor(self.duration_s / self.output_interval_s + 1e-9))
        times = np.arange(n + 1, dtype=float) * self.output_interval_s
        if self.duration_s - times[-1] > 1e-6 * self.output_interval_s:
            times = np.append(times, self.duration_s)
        return times


_TOML_POSITION = re.compile(r"\s*\(at line (\d+), column (\d+)\)\s*$")


def _toml_error_message(exc: Exception, text: str, source: str) -> str:
    """``file:line:col: not valid TOML: ...`` with the offending line, a caret and a hint."""
    message = str(exc)
    match = _TOML_POSITION.search(message)
    hint = ('expected lines such as  key = "2.6 ppmv"  (strings in double quotes, '
            'numbers bare) under [section] headers; see docs/scenarios.md')
    if not match:
        return f"{source}: not valid TOML: {message}; {hint}"
    line, col = int(match.group(1)), int(match.group(2))
    what = message[:match.start()]
    from .textio import shorten_line, split_lines
    lines = split_lines(text)
    if what.startswith("Illegal character '\\n'") or (what.startswith("Unterminated string")):
        what += " (a string is not closed: add the closing double quote)"
    shown = ""
    if 1 <= line <= len(lines):
        text_shown, caret = shorten_line(lines[line - 1], col)
        shown = f"\n    {text_shown}\n    {' ' * (caret - 1)}^"
    return f"{source}:{line}:{col}: not valid TOML: {what}; {hint}{shown}"


def load_scenario(path_or_name: str | Path, *, mechanism: Any = None) -> Scenario:
    """Read a scenario file by path or shipped bare name (``"stratosphere-box"``)."""
    from .resources import resolve
    try:
        path = resolve(path_or_name, "scenarios")
    except BoxchemError as exc:
        raise ScenarioError(str(exc)) from None
    from .textio import read_text_file
    text = read_text_file(path, ScenarioError, "scenario file")
    return Scenario.from_text(text, base_dir=path.parent.resolve(), source=path.name, mechanism=mechanism)


def split_scenario_text(text: str) -> list[tuple[str, str]]:
    """``Scenario.text`` (or a result's ``scenario`` attribute) -> ``[(file name, file text), ...]``.

    The text of a scenario that extends others holds each file read after a
    :data:`PROVENANCE_MARKER` line, the given file first; written out under
    their names in one folder (and with any ``extends`` path adjusted to that
    folder) the files reproduce the scenario.  A text without markers is one
    file: ``[("", text)]``.
    """
    if not text.startswith(PROVENANCE_MARKER):
        return [("", text)]
    out: list[tuple[str, list[str]]] = []
    for line in text.splitlines(keepends=True):
        if line.startswith(PROVENANCE_MARKER):
            name = line[len(PROVENANCE_MARKER):].split(" (", 1)[0].strip()
            out.append((name, []))
        else:
            out[-1][1].append(line)
    return [(name, "".join(lines)) for name, lines in out]


# ---------------------------------------------------------------------------
# extends: reading a file and its bases, merging them
# ---------------------------------------------------------------------------
@dataclass
class _Merged:
    """A file merged over its bases, with the file that wrote each key."""

    data: dict[str, Any]
    #: ((source, text, note), ...), the given file first; note says how it was reached
    files: tuple[tuple[str, str, str], ...]
    key_sources: dict[str, str]
    key_dirs: dict[str, Path]

    @property
    def layers(self) -> tuple[tuple[str, str], ...]:
        return tuple((source, text) for source, text, _ in self.files)

    def provenance_text(self) -> str:
        """The file's own text, or every file read, each after a marker line."""
        if len(self.files) == 1:
            return self.files[0][1]
        parts = []
        for source, text, note in self.files:
            parts.append(f"{PROVENANCE_MARKER}{source}{f' ({note})' if note else ''}\n")
            parts.append(text if text.endswith("\n") else f"{text}\n")
        return "".join(parts)


def _parse_toml(text: str, source: str) -> dict[str, Any]:
    from .textio import strip_bom
    text = strip_bom(text)          # a UTF-8 byte-order mark is not part of the TOML
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(_toml_error_message(exc, text, source)) from None
    except RecursionError:
        raise ScenarioError(f"{source}: tables or arrays nested too deeply to read (hundreds of "
                            f"levels); a scenario needs at most three") from None


def _record_keys(data: Mapping[str, Any], source: str, folder: Path,
                 key_sources: dict[str, str], key_dirs: dict[str, Path]) -> None:
    """Note ``source`` as the writer of every section and key in ``data``."""
    for section, table in data.items():
        key_sources[_where(section)] = source
        if isinstance(table, Mapping):
            for key in table:
                key_sources[_where(section, key)] = source
                if _where(section, key) in _PATH_KEYS:
                    key_dirs[_where(section, key)] = folder


def _read_layers(text: str, base_dir: Path, source: str, path: Path | None,
                 chain: tuple[tuple[str, Path], ...], note: str = "") -> _Merged:
    """``text`` merged over the scenario its ``extends`` names (recursively).

    ``chain`` holds (source, resolved path) of the files that led here, to
    detect cycles; ``path`` is this file's own path when it has one.
    """
    data = _parse_toml(text, source)
    own = path.resolve() if path is not None else None
    extends = data.pop(EXTENDS_KEY, None)
    remove = data.pop(REMOVE_KEY, None)
    if extends is None:
        if remove is not None:
            raise ScenarioError(f"{source}: {REMOVE_KEY}: only a file with '{EXTENDS_KEY} = ...' can "
                                f"remove keys of its base; delete the line or add e.g. "
                                f"{EXTENDS_KEY} = \"polar-spring\" before the first [section]")
        key_sources: dict[str, str] = {}
        key_dirs: dict[str, Path] = {}
        _record_keys(data, source, base_dir, key_sources, key_dirs)
        return _Merged(data, ((source, text, note),), key_sources, key_dirs)

    if not isinstance(extends, str) or not extends.strip():
        raise ScenarioError(f"{source}: {EXTENDS_KEY}: expected a shipped scenario name or a path "
                            f"relative to this file, e.g. {EXTENDS_KEY} = \"polar-spring\", got {extends!r}")
    from .resources import resolve
    try:
        base_path = resolve(extends, "scenarios", relative_to=base_dir).resolve()
    except BoxchemError as exc:
        raise ScenarioError(f"{source}: {EXTENDS_KEY}: {exc}") from None
    visited = chain + (((source, own),) if own is not None else ())
    if any(p == base_path for _, p in visited):
        names = [str(p) for _, p in visited] + [str(base_path)]
        first = names.index(str(base_path))
        raise ScenarioError(f"{source}: {EXTENDS_KEY}: {extends!r} closes a cycle of extends: "
                            f"{' -> '.join(names[first:])}; a scenario cannot build on itself, "
                            f"directly or through its bases")
    if len(visited) >= MAX_EXTENDS_DEPTH:
        raise ScenarioError(f"{source}: {EXTENDS_KEY}: chain of extends deeper than "
                            f"{MAX_EXTENDS_DEPTH} files; build on fewer levels")
    from .textio import read_text_file
    try:
        base_text = read_text_file(base_path, ScenarioError, "scenario file")
    except ScenarioError as exc:
        raise ScenarioError(f"{source}: {EXTENDS_KEY}: cannot read {str(base_path)!r}: {exc}") from None
    base = _read_layers(base_text, base_path.parent, base_path.name, base_path, visited,
                        note=f"extended by {source} with {EXTENDS_KEY} = \"{extends}\"")

    merged = base.data
    _remove_keys(remove, merged, base, source)
    for section, table in data.items():
        if isinstance(table, Mapping) and isinstance(merged.get(section), Mapping):
            merged[section] = {**merged[section], **table}     # a table replaces only the keys it gives
        else:
            merged[section] = table
    _record_keys(data, source, base_dir, base.key_sources, base.key_dirs)
    return _Merged(merged, ((source, text, note),) + base.files, base.key_sources, base.key_dirs)


def _remove_keys(remove: Any, merged: dict[str, Any], base: _Merged, source: str) -> None:
    """Apply ``remove = ["section.key", "section", ...]`` to the merged base (all errors at once)."""
    if remove is None:
        return
    err = _Errors(source)
    if not isinstance(remove, list):
        err.add(REMOVE_KEY, f"expected a list of key paths, e.g. {REMOVE_KEY} = [\"initial.HNO3\", "
                            f"\"environment.pressure\"], got {remove!r}")
        err.raise_if_any()
    base_name = base.files[0][0]
    for i, item in enumerate(remove):
        where = f"{REMOVE_KEY}[{i}]"
        if not isinstance(item, str) or not item:
            err.add(where, f"expected a key path string such as \"initial.HNO3\" or a section "
                           f"such as \"scale\", got {item!r}")
            continue
        section, _, key = item.partition(".")
        table = merged.get(section)
        present = [f"{s}.{k}" for s, t in merged.items() if isinstance(t, Mapping) for k in t] + list(merged)
        if table is None or (key and (not isinstance(table, Mapping) or key not in table)):
            hint = difflib.get_close_matches(item, present, n=1)
            extra = f" - did you mean {hint[0]!r}?" if hint else ""
            err.add(where, f"{item!r} is not in the base {base_name} (or its bases){extra}")
            continue
        prefix = _where(section, key) if key else _where(section)
        if key:
            del table[key]
        else:
            del merged[section]
        for mapping in (base.key_sources, base.key_dirs):
            for path in [p for p in mapping if p == prefix or p.startswith(f"{prefix}.")]:
                del mapping[path]
    err.raise_if_any()


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------
class _Errors:
    """Collects messages ``source: [section].key: message``.

    A key path whose value came from an override (``origins``: ``"[scale].ID"``
    -> ``"--scale ID=1.2"``) is reported under that origin instead:
    ``--scale ID=1.2: message``.
    """

    def __init__(self, source: str, origins: Mapping[str, str] | None = None,
                 key_sources: Mapping[str, str] | None = None):
        self.source = source
        self.origins = dict(origins or {})
        self.key_sources = dict(key_sources or {})
        self.messages: list[str] = []

    def at(self, where: str) -> str:
        """``file: where`` (the file that wrote the key), or the override it came from."""
        for path, label in self.origins.items():
            if where == path:
                return label
            if where.startswith(path) and where[len(path)] in ".[":
                return f"{label}: {where[len(path):].lstrip('.')}"
            if path.startswith(f"{where}."):      # e.g. an unknown [section] the override made
                return label
        return f"{self._writer(where)}: {where}"

    def _writer(self, where: str) -> str:
        """The file that wrote the longest key path containing ``where`` (``extends``)."""
        best = ""
        for path in self.key_sources:
            if (where == path or (where.startswith(path) and where[len(path)] in ".[")) \
                    and len(path) > len(best):
                best = path
        return self.key_sources[best] if best else self.source

    def add(self, where: str, message: str) -> None:
        self.messages.append(_cut(f"{self.at(where)}: {message}"))

    def add_unit_error(self, exc: UnitError) -> None:
        self.messages.append(_cut(str(exc)))

    def raise_if_any(self) -> None:
        if not self.messages:
            return
        if len(self.messages) == 1:
            raise ScenarioError(self.messages[0])
        body = "\n".join(f"  {m}" for m in self.messages)
        bases = sorted(set(self.key_sources.values()) - {self.source})
        via = f" (with its base{'s' if len(bases) > 1 else ''} {', '.join(bases)})" if bases else ""
        raise ScenarioError(f"{len(self.messages)} problems in scenario {self.source}{via}:\n{body}")


#: longest message line kept (a value of 100,000 characters is shown cut in the middle)
_MAX_MESSAGE = 2000


def _cut(message: str) -> str:
    if len(message) <= _MAX_MESSAGE:
        return message
    return (f"{message[:_MAX_MESSAGE // 2]} ...[{len(message) - _MAX_MESSAGE} characters left out]... "
            f"{message[-_MAX_MESSAGE // 4:]}")


def _override_target(key: str, label: str) -> tuple[str, str]:
    if "." in key:
        section, name = key.split(".", 1)
        return section, name
    owners = [s for s, keys in SCENARIO_KEYS.items() if key in keys]
    if key in ("initial", "scale"):
        return key, key
    if len(owners) == 1:
        return owners[0], key
    if len(owners) > 1:
        raise ScenarioError(f"{label}: override {key!r} is ambiguous; write one of "
                            f"{', '.join(f'{s}.{key}' for s in owners)}")
    valid = sorted({k for keys in SCENARIO_KEYS.values() for k in keys})
    raise ScenarioError(f"{label}: unknown override {key!r}; valid keys: {', '.join(valid)} "
                        f"(or 'section.key')")


def paths_from_working_folder(overrides: Mapping[str, Any], folder: Path | None = None) -> dict[str, Any]:
    """Overrides with relative file paths (``run.mechanism``, ``environment.trajectory``,
    ``photolysis.cross_sections`` values) made absolute against ``folder`` (default: cwd).

    For values typed on the command line (``--set``, ``--vary``): the user means
    a path from where they stand, not from the scenario's folder.  Bare
    mechanism names (no suffix, no separator) stay shipped names.
    """
    folder = Path.cwd() if folder is None else Path(folder)

    def absolute(value: Any) -> Any:
        if not isinstance(value, str) or not value.strip():
            return value
        path = Path(value).expanduser()
        looks_like_path = path.suffix != "" or "/" in value or "\\" in value
        return str((folder / path).resolve()) if looks_like_path and not path.is_absolute() else value

    out = dict(overrides)
    for key, value in overrides.items():
        try:
            section, name = _override_target(key, key)
        except ScenarioError:
            continue            # reported when the override is applied
        if _where(section, name) in ("[run].mechanism", "[environment].trajectory"):
            out[key] = absolute(value)
        elif _where(section, name) == "[photolysis].cross_sections" and isinstance(value, Mapping):
            out[key] = {rid: absolute(v) for rid, v in value.items()}
    return out


def _where(section: str, key: str | None = None) -> str:
    return f"[{section}]" if key is None else f"[{section}].{key}"


def _check_keys(table: Mapping[str, Any], section: str, valid: tuple[str, ...], err: _Errors,
                *, label: str = "key") -> None:
    for key in table:
        if key not in valid:
            hint = difflib.get_close_matches(key, valid, n=1)
            extra = f" - did you mean {hint[0]!r}?" if hint else ""
            err.add(_where(section, key), f"unknown {label} {key!r}{extra}; valid: {', '.join(valid)}")


def _quantity(value: Any, kind: str, where: str, err: _Errors, *,
              default_unit: str | None = None) -> float | None:
    try:
        return parse_quantity(value, kind, default_unit=default_unit, where=err.at(where))
    except UnitError as exc:
        err.add_unit_error(exc)
        return None


def _parse_time(value: Any, start: np.datetime64 | None, where: str, err: _Errors,
                time_unit: str | None) -> float | None:
    """A series time: a duration since start ("10 d") or a UTC date-time."""
    if isinstance(value, (_dt.datetime, _dt.date)) or (
            isinstance(value, str) and len(value) >= 10 and value[4:5] == "-" and value[7:8] == "-"):
        if start is None:
            err.add(where, "date-times need a valid [run].start")
            return None
        t = _datetime64(value, where, err)
        if t is None:
            return None
        return float((t - start) / np.timedelta64(1, "ns")) * 1e-9
    return _quantity(value, "time", where, err, default_unit=time_unit)


def _datetime64(value: Any, where: str, err: _Errors) -> np.datetime64 | None:
    """UTC date-time from a TOML date-time or an ISO 8601 string; naive means UTC.

    Read at second resolution first and checked against the supported range
    (:mod:`boxchem.timerange`), so a far date is an error, never a wrapped time.
    """
    from .timerange import TimeRangeError, utc_nanoseconds
    try:
        return utc_nanoseconds(value, where)
    except TimeRangeError as exc:
        message = str(exc)
        err.add(where, message[len(where) + 2:] if message.startswith(f"{where}: ") else message)
        return None


def _series_or_value(value: Any, kind: str, where: str, err: _Errors, *,
                     start: np.datetime64 | None, default_unit: str | None = None,
                     check=None) -> float | TimeSeriesSpec | None:
    """A constant with unit, or an inline ``{ times = [...], values = [...] }`` table."""
    if isinstance(value, Mapping):
        bad = [k for k in value if k not in _SERIES_KEYS]
        for k in bad:
            err.add(f"{where}.{k}", f"unknown key in a time series; valid: {', '.join(_SERIES_KEYS)}")
        times, values = value.get("times"), value.get("values")
        if not isinstance(times, list) or not isinstance(values, list) or not times:
            err.add(where, "a time series needs non-empty lists 'times' and 'values', e.g. "
                           "{ times = [\"0 d\", \"10 d\"], values = [\"195 K\", \"200 K\"] }")
            return None
        if len(times) != len(values):
            err.add(where, f"'times' has {len(times)} entries but 'values' has {len(values)}; "
                           "they must have the same length")
            return None
        time_unit = value.get("time_unit")
        unit = value.get("unit", default_unit)
        ts = [_parse_time(t, start, f"{where}.times[{i}]", err, time_unit) for i, t in enumerate(times)]
        vs = [_quantity(v, kind, f"{where}.values[{i}]", err, default_unit=unit)
              for i, v in enumerate(values)]
        if any(t is None for t in ts) or any(v is None for v in vs):
            return None
        t_arr, v_arr = np.asarray(ts, float), np.asarray(vs, float)
        if np.any(np.diff(t_arr) <= 0):
            err.add(f"{where}.times", "times must be strictly increasing")
            return None
        if check is not None:
            for i, v in enumerate(v_arr):
                msg = check(float(v))
                if msg:
                    err.add(f"{where}.values[{i}]", msg)
                    return None
        return TimeSeriesSpec(t_arr, v_arr)
    q = _quantity(value, kind, where, err, default_unit=default_unit)
    if q is not None and check is not None:
        msg = check(q)
        if msg:
            err.add(where, msg)
            return None
    return q


def _positive(name: str, unit: str):
    return lambda v: None if v > 0 else f"{name} must be > 0 {unit}, got {v:g} {unit}"


def _non_negative(name: str, unit: str):
    return lambda v: None if v >= 0 else f"{name} must be >= 0 {unit}, got {v:g} {unit}"


def _latitude_check(v: float) -> str | None:
    return None if -90.0 <= v <= 90.0 else f"latitude must lie in [-90, 90] degrees north, got {v:g}"


def _longitude_check(v: float) -> str | None:
    return None if -360.0 <= v <= 360.0 else f"longitude must lie in [-360, 360] degrees east, got {v:g}"


def _build(data: Mapping[str, Any], *, text: str, base_dir: Path, source: str,
           mechanism: Any, overrides: Mapping[str, Any],
           origins: Mapping[str, str] | None = None,
           layers: tuple[tuple[str, str], ...] = (),
           key_sources: Mapping[str, str] | None = None,
           key_dirs: Mapping[str, Path] | None = None) -> Scenario:
    key_sources = {k: v for k, v in (key_sources or {}).items() if v != source}
    key_dirs = dict(key_dirs or {})
    err = _Errors(source, origins, key_sources)
    sections = tuple(SCENARIO_KEYS) + _FREE_SECTIONS
    for name, value in data.items():
        if name not in sections:
            hint = difflib.get_close_matches(name, sections, n=1)
            extra = f" - did you mean [{hint[0]}]?" if hint else ""
            err.add(f"[{name}]", f"unknown section{extra}; valid sections: "
                                 f"{', '.join(f'[{s}]' for s in sections)}")
        elif not isinstance(value, Mapping):
            err.add(f"[{name}]", f"expected a table, got {value!r}")
    tables = {s: data.get(s, {}) if isinstance(data.get(s, {}), Mapping) else {} for s in sections}
    for section, keys in SCENARIO_KEYS.items():
        _check_keys(tables[section], section, keys, err)

    run, loc, env = tables["run"], tables["location"], tables["environment"]
    solver, phot = tables["solver"], tables["photolysis"]

    # [run] ---------------------------------------------------------------------
    mechanism_path = None
    if "mechanism" not in run and mechanism is None:
        err.add("[run].mechanism", "missing; give a shipped mechanism name (e.g. \"stratosphere\") "
                                   "or a path relative to the scenario file")
    elif "mechanism" in run:
        if not isinstance(run["mechanism"], str):
            err.add("[run].mechanism", f"expected a name or path string, got {run['mechanism']!r}")
        else:
            from .resources import resolve
            try:
                mechanism_path = resolve(run["mechanism"], "mechanisms",
                                         relative_to=key_dirs.get("[run].mechanism", base_dir))
            except BoxchemError as exc:
                err.add("[run].mechanism", str(exc))
    start = None
    if "start" not in run:
        err.add("[run].start", "missing; give the UTC start, e.g. start = \"2026-09-01T00:00:00Z\"")
    else:
        start = _datetime64(run["start"], "[run].start", err)
    duration = None
    if "duration" not in run:
        err.add("[run].duration", "missing; give e.g. duration = \"30 d\" (s, min, h, d)")
    else:
        duration = _quantity(run["duration"], "time", "[run].duration", err)
        if duration is not None and duration <= 0:
            err.add("[run].duration", f"must be > 0, got {run['duration']!r}")
            duration = None
    if start is not None and duration is not None:
        from .timerange import range_problem
        end_problem = range_problem(start.astype("datetime64[s]")
                                    + np.timedelta64(int(min(duration, 1e13)), "s"), "the run's end")
        if end_problem:
            err.add("[run].duration", f"{run['duration']!r} from the start {run['start']!r}: "
                                      f"{end_problem}; shorten the run or start earlier")
            duration = None
    interval = DEFAULT_OUTPUT_INTERVAL_S
    if "output_interval" in run:
        interval = _quantity(run["output_interval"], "time", "[run].output_interval", err)
        if interval is not None and interval <= 0:
            err.add("[run].output_interval", f"must be > 0, got {run['output_interval']!r}")
            interval = None
        if interval is not None and duration is not None and interval > duration:
            err.add("[run].output_interval", f"{run['output_interval']!r} is longer than the "
                                             f"duration {run['duration']!r}; use at most the duration")

    # [location] ------------------------------------------------------------------
    latitude = None
    if "latitude" not in loc and "trajectory" not in env:
        err.add("[location].latitude", "missing; give degrees north in [-90, 90], e.g. latitude = -70.0")
    elif "latitude" in loc:
        latitude = _series_or_value(loc["latitude"], "angle", "[location].latitude", err,
                                    start=start, default_unit="deg", check=_latitude_check)
    longitude = _series_or_value(loc.get("longitude", DEFAULT_LONGITUDE_DEG), "angle",
                                 "[location].longitude", err, start=start, default_unit="deg",
                                 check=_longitude_check)
    altitude = loc_pressure = None
    if "altitude" in loc:
        altitude = _quantity(loc["altitude"], "length", "[location].altitude", err)
        if altitude is not None and not _ALTITUDE_RANGE_M[0] <= altitude <= _ALTITUDE_RANGE_M[1]:
            err.add("[location].altitude", f"{loc['altitude']!r} is outside "
                                           f"{_ALTITUDE_RANGE_M[0]:g} to {_ALTITUDE_RANGE_M[1]:g} m")
            altitude = None
    if "pressure" in loc:
        loc_pressure = _quantity(loc["pressure"], "pressure", "[location].pressure", err)
        if loc_pressure is not None and loc_pressure <= 0:
            err.add("[location].pressure", f"must be > 0, got {loc['pressure']!r}")
            loc_pressure = None
    if "altitude" not in loc and "pressure" not in loc and "trajectory" not in env:
        err.add("[location]", "give the box's altitude (e.g. altitude = \"18 km\") or its "
                              "pressure (e.g. pressure = \"60 hPa\")")

    # [environment] -----------------------------------------------------------------
    trajectory = None
    if "trajectory" in env:
        if not isinstance(env["trajectory"], str):
            err.add("[environment].trajectory", f"expected a file path, got {env['trajectory']!r}")
        else:
            trajectory = (key_dirs.get("[environment].trajectory", base_dir) / env["trajectory"]).expanduser()
            if not trajectory.is_file():
                err.add("[environment].trajectory", f"no file {str(trajectory)!r} (paths are "
                                                    "relative to the scenario file)")
                trajectory = None
    if trajectory is not None:
        from .environment.history import load_trajectory
        from .errors import DataFileError
        try:
            columns = load_trajectory(trajectory)
        except (DataFileError, ScenarioError) as exc:
            err.add("[environment].trajectory", str(exc))
        else:
            for key, section in (("temperature", "environment"), ("pressure", "environment"),
                                 ("latitude", "location"), ("longitude", "location"),
                                 ("altitude", "location")):
                table = env if section == "environment" else loc
                if key in columns and key in table:
                    err.add(f"[{section}].{key}", f"given both here and by the trajectory file "
                                                  f"{str(trajectory)!r}; give it one way only")
    temperature = pressure = None
    if "temperature" in env:
        temperature = _series_or_value(env["temperature"], "temperature", "[environment].temperature",
                                       err, start=start, check=_positive("temperature", "K"))
    if "temperature_offset" in env:
        temperature = _temperature_offset(env, temperature, err)
    if "pressure" in env:
        pressure = _series_or_value(env["pressure"], "pressure", "[environment].pressure",
                                    err, start=start, check=_positive("pressure", "Pa"))
    ozone = _series_or_value(env.get("ozone_column", f"{DEFAULT_OZONE_COLUMN_DU} DU"), "column",
                             "[environment].ozone_column", err, start=start,
                             check=_non_negative("ozone column", "DU"))
    psc = _area_or_rule(env.get("psc_surface_area", "0 um2 cm-3"), "[environment].psc_surface_area",
                        err, start)
    ice = _area_or_rule(env.get("ice_surface_area", "0 um2 cm-3"), "[environment].ice_surface_area",
                        err, start, default_below=ICE_FROST_POINT_K)
    sulfate_raw = env.get("sulfate_surface_area", "0 um2 cm-3")
    if isinstance(sulfate_raw, Mapping) and "rule" in sulfate_raw:
        sulfate = _sts_rule(sulfate_raw, "[environment].sulfate_surface_area", err)
    else:
        sulfate = _series_or_value(sulfate_raw, "surface_area",
                                   "[environment].sulfate_surface_area", err, start=start,
                                   check=_non_negative("surface area", "cm2 cm-3"))
    if isinstance(sulfate, StsRuleSpec) and isinstance(psc, EquilibriumRuleSpec) and psc.kind == "nat":
        err.add("[environment].sulfate_surface_area",
                "rule \"sts\" together with psc_surface_area rule \"nat\": both would hold the condensed "
                "HNO3; choose one (valid: NAT with liquid binary sulfate, e.g. sulfate_surface_area = "
                "\"0.5 um2 cm-3\", or STS without NAT: psc_surface_area = \"0 um2 cm-3\")")
        sulfate = None
    albedo = env.get("albedo", DEFAULT_ALBEDO)
    if isinstance(albedo, bool) or not isinstance(albedo, (int, float)) or not 0.0 <= albedo <= 1.0:
        err.add("[environment].albedo", f"expected a number in [0, 1], got {albedo!r}")
        albedo = None

    # [solver] ------------------------------------------------------------------------
    rtol = _plain_number(solver, "rtol", DEFAULT_RTOL, "[solver].rtol", err,
                         lambda v: None if 0 < v < 1 else "must lie in (0, 1), e.g. 1e-4")
    atol = DEFAULT_ATOL_CM3
    if "atol" in solver:
        raw = solver["atol"]
        if isinstance(raw, str):
            try:
                value, kind = parse_amount(raw, where=err.at("[solver].atol"))
                if kind != "number_density":
                    err.add("[solver].atol", f"must be a number density (cm-3), got {raw!r}")
                else:
                    atol = value
            except UnitError as exc:
                err.add_unit_error(exc)
        else:
            atol = _plain_number(solver, "atol", DEFAULT_ATOL_CM3, "[solver].atol", err, None)
        if atol is not None and atol <= 0:
            err.add("[solver].atol", f"must be > 0 cm-3, got {raw!r}")
    method = solver.get("method", DEFAULT_SOLVER_METHOD)
    if method not in SOLVER_METHODS:
        err.add("[solver].method", f"unknown method {method!r}; valid: {', '.join(SOLVER_METHODS)}")
    max_step = None
    if "max_step" in solver:
        max_step = _quantity(solver["max_step"], "time", "[solver].max_step", err)
        if max_step is not None and max_step <= 0:
            err.add("[solver].max_step", f"must be > 0, got {solver['max_step']!r}")

    # [photolysis] ---------------------------------------------------------------------
    phot_method = phot.get("method", DEFAULT_PHOTOLYSIS_METHOD)
    if phot_method not in PHOTOLYSIS_METHODS:
        err.add("[photolysis].method", f"unknown method {phot_method!r}; valid: "
                                       f"{', '.join(PHOTOLYSIS_METHODS)}")

    # mechanism-dependent sections -----------------------------------------------------------
    if mechanism is None and mechanism_path is not None:
        from .errors import MechanismError
        load_mechanism = _mechanism_loader()
        try:
            mechanism = load_mechanism(mechanism_path)
        except MechanismError as exc:
            err.add("[run].mechanism", f"the mechanism {str(mechanism_path)!r} has errors:\n{exc}")
    initial = _initial(tables["initial"], mechanism, err)
    scale = _scale(tables["scale"], mechanism, err)
    user_spectra = _cross_sections(phot.get("cross_sections", {}), mechanism,
                                   key_dirs.get("[photolysis].cross_sections", base_dir), phot_method, err)
    follows = phot.get("ozone_column_follows_box", False)
    if not isinstance(follows, bool):
        err.add("[photolysis].ozone_column_follows_box", f"expected true or false, got {follows!r}")
        follows = False
    if follows and mechanism is not None and "O3" not in mechanism.species_names:
        err.add("[photolysis].ozone_column_follows_box", "the mechanism has no species O3 to follow")
    layer_depth = DEFAULT_OZONE_LOSS_LAYER_DEPTH_M
    if "ozone_loss_layer_depth" in phot:
        layer_depth = _quantity(phot["ozone_loss_layer_depth"], "length",
                                "[photolysis].ozone_loss_layer_depth", err)
        if layer_depth is not None and not layer_depth > 0:
            err.add("[photolysis].ozone_loss_layer_depth",
                    f"must be > 0, got {phot['ozone_loss_layer_depth']!r}")

    err.raise_if_any()
    _preflight(err, mechanism=mechanism, run=run, solver=solver, temperature=temperature,
               pressure=pressure if pressure is not None else loc_pressure,
               pressure_key="[environment].pressure" if pressure is not None else "[location].pressure",
               altitude=altitude, trajectory=trajectory, duration=duration, interval=interval,
               max_step=max_step, atol=atol, initial=initial, scale=scale)
    err.raise_if_any()
    return Scenario(
        source=source, text=text, data=copy.deepcopy(dict(data)), base_dir=base_dir,
        mechanism_path=mechanism_path if mechanism_path is not None else Path(getattr(mechanism, "source", "") or "."),
        start=start, duration_s=float(duration), output_interval_s=float(interval),
        latitude=latitude, longitude=longitude, altitude_m=altitude,
        location_pressure_pa=loc_pressure, temperature=temperature, pressure=pressure,
        trajectory=trajectory, ozone_column_du=ozone, psc_surface_area=psc,
        sulfate_surface_area=sulfate, albedo=float(albedo), initial=initial,
        rtol=float(rtol), atol=float(atol), solver_method=method, max_step_s=max_step,
        scale=scale, photolysis_method=phot_method,
        overrides=dict(overrides), mechanism=mechanism, override_origins=dict(origins or {}),
        photolysis_cross_sections=user_spectra, ozone_column_follows_box=follows,
        ozone_loss_layer_depth_m=float(layer_depth),
        layers=tuple(layers) or ((source, text),), key_sources=key_sources, key_dirs=key_dirs,
        ice_surface_area=ice)


def _flag(table: Mapping[str, Any], key: str, where: str, err: _Errors) -> bool:
    value = table.get(key, False)
    if not isinstance(value, bool):
        err.add(where, f"expected true or false, got {value!r}")
        return False
    return value


def _preflight(err: _Errors, *, mechanism, run, solver, temperature, pressure, pressure_key,
               altitude, trajectory, duration, interval, max_step, atol, initial, scale) -> None:
    """Conditions, rate coefficients, work and tolerance checks (boxchem.preflight) -> ``err``."""
    from .preflight import scenario_problems
    allow_long = _flag(run, "allow_long_run", "[run].allow_long_run", err)
    allow_loose = _flag(solver, "allow_loose_atol", "[solver].allow_loose_atol", err)

    def values(v):
        if v is None:
            return None
        return np.asarray(v.values if isinstance(v, TimeSeriesSpec) else [v], dtype=float)

    temperatures: dict[str, np.ndarray] = {}
    pressures: dict[str, np.ndarray] = {}
    if trajectory is not None:
        from .environment.history import load_trajectory
        columns = load_trajectory(trajectory)          # read fine above
        for key, target in (("temperature", temperatures), ("pressure", pressures)):
            if key in columns:
                target["[environment].trajectory"] = np.asarray(columns[key].values, dtype=float)
        if "altitude" in columns and "temperature" not in columns and temperature is None:
            from .environment.atmosphere import standard_atmosphere
            p_std, t_std = standard_atmosphere(np.asarray(columns["altitude"].values, dtype=float))
            temperatures["[environment].trajectory"] = np.asarray(t_std, dtype=float)
            pressures.setdefault("[environment].trajectory", np.asarray(p_std, dtype=float))
    if values(temperature) is not None:
        temperatures["[environment].temperature"] = values(temperature)
    if values(pressure) is not None:
        pressures[pressure_key] = values(pressure)
    if not temperatures or not pressures:
        # the runner falls back on the standard atmosphere at the box's altitude
        from .environment.atmosphere import altitude_from_pressure, standard_atmosphere
        z = altitude
        if z is None and pressures:
            with np.errstate(all="ignore"):
                z = float(np.nan_to_num(altitude_from_pressure(next(iter(pressures.values()))[0])))
        if z is not None:
            p_std, t_std = standard_atmosphere(float(z))
            temperatures.setdefault("[location].altitude", np.array([float(t_std)]))
            pressures.setdefault("[location].altitude", np.array([float(p_std)]))
    for where, message in scenario_problems(
            mechanism=mechanism, temperatures=temperatures, pressures=pressures,
            duration_s=duration, interval_s=interval, max_step_s=max_step, atol_cm3=atol,
            initial=initial, scale=scale, allow_long_run=allow_long, allow_loose_atol=allow_loose):
        err.add(where, message)


def _temperature_offset(env: Mapping[str, Any], temperature: Any, err: _Errors) -> Any:
    """``[environment].temperature`` shifted by ``temperature_offset`` [K] (constant or series)."""
    where = "[environment].temperature_offset"
    offset = _quantity(env["temperature_offset"], "temperature", where, err, default_unit="K")
    if offset is None:
        return temperature
    if "temperature" not in env:
        err.add(where, "needs [environment].temperature to shift (without it the temperature "
                       "comes from the trajectory or the standard atmosphere); give a temperature, "
                       "constant or a time series, or remove the offset")
        return temperature
    if temperature is None:          # the temperature itself has an error, reported already
        return None
    if isinstance(temperature, TimeSeriesSpec):
        shifted: float | TimeSeriesSpec = TimeSeriesSpec(temperature.times_s, temperature.values + offset)
        lowest = float(np.min(shifted.values))
    else:
        shifted = lowest = float(temperature) + offset
    if lowest <= 0:
        err.add(where, f"{env['temperature_offset']!r} takes the temperature to {lowest:g} K; "
                       f"the shifted temperature must stay > 0 K")
        return None
    return shifted


def _mechanism_loader():
    """``load_mechanism`` from the mechanism package (re-exported) or its parser module."""
    from . import mechanism as mech_pkg
    loader = getattr(mech_pkg, "load_mechanism", None)
    if loader is None:
        from .mechanism.parser import load_mechanism as loader
    return loader


def _plain_number(table: Mapping[str, Any], key: str, default: float, where: str, err: _Errors,
                  check) -> float | None:
    value = table.get(key, default)
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        err.add(where, f"expected a number, got {value!r}")
        return None
    if check is not None:
        msg = check(float(value))
        if msg:
            err.add(where, f"{msg}; got {value!r}")
            return None
    return float(value)


def _area_or_rule(value: Any, where: str, err: _Errors, start,
                  default_below: float | None = None) -> Any:
    """A surface area density (constant, series or threshold rule) at key path ``where``.

    ``default_below`` [K]: the rule's threshold when ``below`` is not given
    (the ice frost point for ice clouds); None makes ``below`` required.
    """
    if isinstance(value, Mapping) and value.get("rule") in ("nat", "ice"):
        return _equilibrium_rule(value, where, err)
    if isinstance(value, Mapping) and "rule" in value:
        for k in value:
            if k not in _RULE_KEYS:
                err.add(f"{where}.{k}", f"unknown key in a rule; valid: {', '.join(_RULE_KEYS)}")
        if value["rule"] != "threshold":
            err.add(f"{where}.rule", f"unknown rule {value['rule']!r}; valid: \"threshold\", \"nat\" "
                                     f"(psc_surface_area), \"ice\" (ice_surface_area)")
            return None
        missing = [k for k in ("area", "below") if k not in value
                   and not (k == "below" and default_below is not None)]
        if missing:
            example = "188 K" if default_below is not None else "195 K"
            err.add(where, f"the threshold rule needs {' and '.join(missing)}, e.g. "
                           f"{{ rule = \"threshold\", area = \"2 um2 cm-3\", below = \"{example}\" }}")
            return None
        area = _quantity(value["area"], "surface_area", f"{where}.area", err)
        below = (_quantity(value["below"], "temperature", f"{where}.below", err)
                 if "below" in value else default_below)
        if area is not None and area < 0:
            err.add(f"{where}.area", f"must be >= 0, got {value['area']!r}")
            return None
        if below is not None and below <= 0:
            err.add(f"{where}.below", f"must be > 0 K, got {value['below']!r}")
            return None
        width = 1.0
        if "width" in value:
            width = _quantity(value["width"], "temperature", f"{where}.width", err)
            if width is not None and width <= 0:
                err.add(f"{where}.width", f"must be > 0 K, got {value['width']!r}")
                return None
        if area is None or below is None or width is None:
            return None
        return ThresholdRuleSpec(area=area, below=below, width=width)
    return _series_or_value(value, "surface_area", where, err, start=start,
                            check=_non_negative("surface area", "cm2 cm-3"))


def _equilibrium_rule(value: Mapping, where: str, err: _Errors):
    """``{ rule = "nat" | "ice", particle_number_density = "1 cm-3", geometric_std = 1.8 }``."""
    kind = value["rule"]
    ok = True
    for k in value:
        if k not in _EQUILIBRIUM_RULE_KEYS:
            err.add(f"{where}.{k}", f"unknown key in rule {kind!r}; valid: {', '.join(_EQUILIBRIUM_RULE_KEYS)}")
            ok = False
    if kind == "nat" and not where.endswith("psc_surface_area"):
        err.add(f"{where}.rule", "rule \"nat\" belongs to [environment].psc_surface_area")
        ok = False
    if kind == "ice" and not where.endswith("ice_surface_area"):
        err.add(f"{where}.rule", "rule \"ice\" belongs to [environment].ice_surface_area")
        ok = False
    default_n = 1.0 if kind == "nat" else 0.01
    number = _number_density(value.get("particle_number_density"), default_n,
                             f"{where}.particle_number_density", err)
    if number is None:
        ok = False
    sigma = value.get("geometric_std", 1.8)
    if not (isinstance(sigma, (int, float)) and not isinstance(sigma, bool) and math.isfinite(sigma)
            and sigma >= 1.0):
        err.add(f"{where}.geometric_std", f"got {sigma!r}; valid: a number >= 1, e.g. 1.8")
        ok = False
    return EquilibriumRuleSpec(kind, number, float(sigma)) if ok else None


def _number_density(raw: Any, default: float, where: str, err: _Errors) -> float | None:
    """"10 cm-3" or a bare number [cm-3] > 0."""
    number = None
    if raw is None:
        return default
    if isinstance(raw, (int, float)) and not isinstance(raw, bool):
        number = float(raw)
    elif isinstance(raw, str) and raw.replace(" ", "").endswith("cm-3"):
        try:
            number = float(raw.replace(" ", "")[:-4])
        except ValueError:
            number = None
    if number is None or not (number > 0 and math.isfinite(number)):
        err.add(where, f"got {raw!r}; valid: a number density > 0, e.g. \"10 cm-3\"")
        return None
    return number


def _sts_rule(value: Mapping, where: str, err: _Errors):
    """``{ rule = "sts", h2so4 = "0.5 ppbv", particle_number_density = "10 cm-3", geometric_std = 1.8 }``."""
    if value.get("rule") != "sts":
        err.add(f"{where}.rule", f"unknown rule {value.get('rule')!r}; valid for sulfate_surface_area: "
                                 f"\"sts\" (liquid droplets that take up HNO3 and H2O, Carslaw et al. 1995), "
                                 f"or a surface area such as \"0.5 um2 cm-3\"")
        return None
    ok = True
    for k in value:
        if k not in _STS_RULE_KEYS:
            err.add(f"{where}.{k}", f"unknown key in rule \"sts\"; valid: {', '.join(_STS_RULE_KEYS)}")
            ok = False
    h2so4 = None
    if "h2so4" not in value:
        err.add(f"{where}.h2so4", "rule \"sts\" needs the droplets' H2SO4 as a mole fraction, "
                                  "e.g. h2so4 = \"0.5 ppbv\"")
        ok = False
    else:
        try:
            amount, kind = parse_amount(value["h2so4"], where=err.at(f"{where}.h2so4"))
        except UnitError as exc:
            err.add_unit_error(exc)
            amount, kind = None, None
        if kind != "mole_fraction" or amount is None or not amount > 0:
            if kind is not None:
                err.add(f"{where}.h2so4", f"got {value['h2so4']!r}; valid: a mole fraction > 0 "
                                          f"such as \"0.5 ppbv\"")
            ok = False
        else:
            h2so4 = amount
    number = _number_density(value.get("particle_number_density"), 10.0,
                             f"{where}.particle_number_density", err)
    sigma = value.get("geometric_std", 1.8)
    if not (isinstance(sigma, (int, float)) and not isinstance(sigma, bool) and math.isfinite(sigma)
            and sigma >= 1.0):
        err.add(f"{where}.geometric_std", f"got {sigma!r}; valid: a number >= 1, e.g. 1.8")
        ok = False
    if not ok or number is None:
        return None
    return StsRuleSpec(h2so4, number, float(sigma))


def _initial(table: Mapping[str, Any], mechanism: Any, err: _Errors) -> dict[str, tuple[float, str]]:
    out: dict[str, tuple[float, str]] = {}
    names = tuple(mechanism.species_names) if mechanism is not None else None
    for name, raw in table.items():
        where = _where("initial", name)
        if names is not None and name not in names:
            hint = difflib.get_close_matches(name, names, n=1)
            extra = f" - did you mean {hint[0]!r}?" if hint else ""
            err.add(where, f"unknown species {name!r}{extra}; the mechanism has "
                           f"{', '.join(names)}")
            continue
        if name == "M":
            err.add(where, "M is the air itself; its number density follows pressure and temperature")
            continue
        try:
            value, kind = parse_amount(raw, where=err.at(where))
        except UnitError as exc:
            err.add_unit_error(exc)
            continue
        if value < 0:
            err.add(where, f"must be >= 0, got {raw!r} (a negative amount is not physical)")
            continue
        if kind == "mole_fraction" and value > 1:
            err.add(where, f"a mole fraction must be <= 1 mol/mol, got {raw!r}")
            continue
        species = mechanism.species_by_name(name) if mechanism is not None else None
        if species is not None and species.fixed and kind != "mole_fraction":
            err.add(where, f"{name} is a fixed species and follows the air: give a mole fraction "
                           f"(ppmv, ppbv, pptv or mol/mol), not {raw!r}")
            continue
        out[name] = (value, kind)
    if mechanism is not None:
        for sp in mechanism.fixed_species:
            if not sp.is_air and sp.mole_fraction is None and sp.name not in out:
                err.add(_where("initial", sp.name),
                        f"missing: the fixed species {sp.name} has no mole fraction in the "
                        f"mechanism; give one here (e.g. {sp.name} = \"1 ppmv\") or in cm-3")
    return out


def _cross_sections(table: Any, mechanism: Any, base_dir: Path, method: str,
                    err: _Errors) -> dict[str, Path]:
    """``[photolysis].cross_sections``: reaction id -> cross-section file (relative to the scenario)."""
    where = "[photolysis].cross_sections"
    if not isinstance(table, Mapping):
        err.add(where, f"expected a table of reaction id = \"file.csv\", e.g. "
                       f"cross_sections = {{ j_cl2o2 = \"my_cl2o2.csv\" }}, got {table!r}")
        return {}
    if table and method == "parametric":
        err.add(where, "cross sections are used only with method = \"spectral\"; "
                       "remove them or set [photolysis].method = \"spectral\"")
        return {}
    from .errors import DataFileError
    from .photolysis.crosssections import load_spectral_file
    photolysis_ids = (tuple(r.id for r in mechanism.reactions if r.law == "photolysis")
                      if mechanism is not None else None)
    out: dict[str, Path] = {}
    for rid, value in table.items():
        key = f"{where}.{rid}"
        if photolysis_ids is not None and rid not in photolysis_ids:
            hint = difflib.get_close_matches(rid, photolysis_ids, n=1)
            extra = f" - did you mean {hint[0]!r}?" if hint else ""
            err.add(key, f"no photolysis reaction {rid!r} in the mechanism{extra}; valid: "
                         f"{', '.join(photolysis_ids)}")
            continue
        if not isinstance(value, str) or not value:
            err.add(key, f"expected a file path string (relative to the scenario file), got {value!r}")
            continue
        path = (base_dir / Path(value).expanduser()).resolve()
        if not path.is_file():
            err.add(key, f"no file {str(path)!r} (paths are relative to the scenario file)")
            continue
        try:
            data = load_spectral_file(path)
        except DataFileError as exc:
            err.add(key, str(exc))
            continue
        if data.quantity != "cross_section":
            err.add(key, f"{path.name} holds a {data.quantity}; expected a cross_section file")
            continue
        out[rid] = path
    return out


def _scale(table: Mapping[str, Any], mechanism: Any, err: _Errors) -> dict[str, float]:
    out: dict[str, float] = {}
    ids = tuple(mechanism.reaction_ids) if mechanism is not None else None
    for rid, factor in table.items():
        where = _where("scale", rid)
        if ids is not None and rid not in ids:
            hint = difflib.get_close_matches(rid, ids, n=1)
            extra = f" - did you mean {hint[0]!r}?" if hint else ""
            err.add(where, f"unknown reaction id {rid!r}{extra}")
            continue
        if isinstance(factor, bool) or not isinstance(factor, (int, float)) \
                or not math.isfinite(factor) or factor < 0:
            err.add(where, f"expected a finite factor >= 0, got {factor!r}")
            continue
        out[rid] = float(factor)
    return out
