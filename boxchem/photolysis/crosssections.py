"""Absorption cross sections and quantum yields: our spectral data files.

The file format ("boxchem-spectral 1") is documented in docs/spectral-data.md:
a block of ``# key: value`` header lines, then a CSV table whose first column
is ``wavelength_nm``.  Lab files as labs write them (comma, tab or white-space
separated, units in the header, nm or Angstrom, several temperature columns,
uncertainty columns) are read by :mod:`boxchem.photolysis.labfile`.

Public API:

* ``load_spectral_file(path) -> SpectralData``
* ``SpectralData(wavelength_nm, temperature_K=298.0)``: values at points,
  ``SpectralData.bin_average(edges_nm, temperature_K=298.0)``: bin means.
* ``ConstantYield(value)``: a wavelength- and temperature-independent
  quantum yield with the same interface.
* ``cross_section_data(name_or_path)``, ``quantum_yield_data(name_or_path_or_number)``
* ``shipped_cross_sections()``, ``shipped_quantum_yields()``

Values between tabulated points are interpolated linearly in wavelength (and,
for ``temperature_dependence: table``, linearly in temperature), so a data set
is a piecewise-linear function of wavelength at each temperature; bin means
integrate that function exactly.
"""
from __future__ import annotations

import difflib
import functools
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import DataFileError

__all__ = [
    "SpectralData",
    "ConstantYield",
    "load_spectral_file",
    "cross_section_data",
    "quantum_yield_data",
    "shipped_cross_sections",
    "shipped_quantum_yields",
    "DATA_DIR",
    "FORMAT_NAME",
]

FORMAT_NAME = "boxchem-spectral 1"
DATA_DIR = Path(__file__).resolve().parent / "data"
_KIND_DIR = {"cross_section": "cross_sections", "quantum_yield": "quantum_yields"}

_QUANTITIES = ("cross_section", "quantum_yield")
_UNITS = {"cross_section": "cm2", "quantum_yield": "1"}
_VALUE_PREFIX = {"cross_section": "sigma", "quantum_yield": "phi"}
_T_DEPENDENCES = ("none", "table", "log10_linear")
_OUTSIDE = ("zero", "hold")
_DEFAULT_OUTSIDE = {"cross_section": "zero", "quantum_yield": "hold"}

_REQUIRED_KEYS = ("format", "species", "quantity", "units", "temperature_dependence",
                  "source", "provenance")
_OPTIONAL_KEYS = ("channel", "valid_temperature_range_K", "outside_range", "notes")
_KNOWN_KEYS = _REQUIRED_KEYS + _OPTIONAL_KEYS
_HEADER_RE = re.compile(r"^#\s*([A-Za-z_][A-Za-z0-9_]*)\s*:\s*(.*?)\s*$")
_T_COLUMN_RE = re.compile(r"^(sigma|phi)_(\d+(?:\.\d+)?)K$")


# --------------------------------------------------------------------------
# the in-memory data set

@dataclass(frozen=True, eq=False)
class SpectralData:
    """One cross section or quantum yield as a function of wavelength and T.

    ``values`` has shape (n_columns, n_wavelengths): one row per tabulated
    temperature for ``temperature_dependence == "table"``, one row for
    ``"none"``, and for ``"log10_linear"`` row 0 holds sigma at the reference
    temperature ``temperatures[0]`` and row 1 the coefficient B [K-1] in
    log10 sigma(T) = log10 sigma(T0) + B (T - T0).
    """

    species: str
    channel: str
    quantity: str                   # "cross_section" | "quantum_yield"
    units: str                      # "cm2" | "1"
    temperature_dependence: str     # "none" | "table" | "log10_linear"
    source: str
    provenance: str
    wavelength_nm: np.ndarray
    temperatures: np.ndarray        # [K]; empty for "none"
    values: np.ndarray
    valid_temperature_range_K: tuple[float, float] | None = None
    outside_range: str = "zero"     # "zero" | "hold"
    notes: str = ""
    path: str = ""
    header: dict = field(default_factory=dict, repr=False)
    #: absolute 1-sigma uncertainty [cm2] like ``values`` (NaN where none), from a lab file
    uncertainty: np.ndarray | None = field(default=None, repr=False)

    # -- temperature ------------------------------------------------------
    def _clamped_temperature(self, temperature_K: np.ndarray) -> np.ndarray:
        t = np.asarray(temperature_K, dtype=float)
        if self.temperature_dependence == "table":
            return np.clip(t, self.temperatures[0], self.temperatures[-1])
        if self.temperature_dependence == "log10_linear" and self.valid_temperature_range_K:
            lo, hi = self.valid_temperature_range_K
            return np.clip(t, lo, hi)
        return t

    def at_temperature(self, temperature_K=298.0) -> np.ndarray:
        """Tabulated values at the table's own wavelengths for temperature(s) [K].

        A scalar temperature gives shape (n_wavelengths,); a 1-D array of nT
        temperatures gives (nT, n_wavelengths).  ``table``: linear
        interpolation in T, clamped to the tabulated range (the end column is
        used outside it).  ``log10_linear``: T clamped to
        ``valid_temperature_range_K``.
        """
        t_in = np.asarray(temperature_K, dtype=float)
        if t_in.ndim > 1:
            raise ValueError(f"temperature_K must be a scalar or 1-D array, got shape {t_in.shape}")
        if not np.all(np.isfinite(t_in)):
            raise ValueError(f"temperature_K must be finite, got {temperature_K!r}")
        t = np.atleast_1d(self._clamped_temperature(t_in))
        dep = self.temperature_dependence
        if dep == "none":
            out = np.broadcast_to(self.values[0], (t.size, self.values.shape[1])).copy()
        elif dep == "table":
            temps = self.temperatures
            if temps.size == 1:
                out = np.broadcast_to(self.values[0], (t.size, self.values.shape[1])).copy()
            else:
                i = np.clip(np.searchsorted(temps, t, side="right") - 1, 0, temps.size - 2)
                w = ((t - temps[i]) / (temps[i + 1] - temps[i]))[:, None]
                out = (1.0 - w) * self.values[i] + w * self.values[i + 1]
        else:  # log10_linear
            sigma0, b = self.values[0], self.values[1]
            t0 = self.temperatures[0]
            out = sigma0[None, :] * 10.0 ** (b[None, :] * (t[:, None] - t0))
        return out[0] if t_in.ndim == 0 else out

    # -- wavelength -------------------------------------------------------
    def __call__(self, wavelength_nm, temperature_K=298.0) -> np.ndarray:
        """Values at wavelengths [nm] and temperature(s) [K].

        Linear interpolation between tabulated wavelengths.  Outside the
        tabulated range: zero (``outside_range: zero``, the default for cross
        sections) or the end value held (``hold``, the default for quantum
        yields).  Shape: ``wavelength.shape`` for a scalar temperature,
        ``(nT,) + wavelength.shape`` for a 1-D temperature array.
        """
        wl = np.asarray(wavelength_nm, dtype=float)
        table = self.at_temperature(temperature_K)
        left, right = (None, None) if self.outside_range == "hold" else (0.0, 0.0)

        def interp(row):
            kwargs = {} if left is None else {"left": left, "right": right}
            return np.interp(wl.ravel(), self.wavelength_nm, row, **kwargs).reshape(wl.shape)

        if table.ndim == 1:
            return interp(table)
        return np.stack([interp(row) for row in table])

    def bin_average(self, edges_nm, temperature_K=298.0) -> np.ndarray:
        """Mean value over each bin [edges[i], edges[i+1]] [nm].

        Integrates the piecewise-linear table exactly (trapezoid segments,
        partial segments at the bin edges) and divides by the bin width.
        Shape (n_bins,) for a scalar temperature, (nT, n_bins) for 1-D T.
        """
        edges = np.asarray(edges_nm, dtype=float)
        if edges.ndim != 1 or edges.size < 2 or not np.all(np.diff(edges) > 0):
            raise ValueError("edges_nm must be a 1-D strictly increasing array of at least 2 "
                             f"wavelengths [nm], got {edges_nm!r}")
        table = self.at_temperature(temperature_K)
        cumulative = _primitive(self.wavelength_nm, np.atleast_2d(table), edges,
                                hold=self.outside_range == "hold")
        means = np.diff(cumulative, axis=-1) / np.diff(edges)
        return means[0] if table.ndim == 1 else means

    def describe(self) -> str:
        """One line: species, quantity, range, temperatures, provenance."""
        temps = ", ".join(f"{t:g}" for t in self.temperatures) or "-"
        return (f"{self.species} {self.quantity} {self.channel or ''} "
                f"{self.wavelength_nm[0]:g}-{self.wavelength_nm[-1]:g} nm, "
                f"T dependence {self.temperature_dependence} ({temps} K); "
                f"{self.provenance}").replace("  ", " ")


def _primitive(x: np.ndarray, y: np.ndarray, at: np.ndarray, *, hold: bool) -> np.ndarray:
    """Integral from x[0] to ``at`` of the piecewise-linear rows y(x).

    Beyond the table the function is 0 (``hold=False``) or the end value
    (``hold=True``).  Returns shape (n_rows, at.size).
    """
    dx = np.diff(x)
    seg = 0.5 * (y[:, 1:] + y[:, :-1]) * dx                         # trapezoids
    cum = np.concatenate([np.zeros((y.shape[0], 1)), np.cumsum(seg, axis=1)], axis=1)
    xa = np.clip(at, x[0], x[-1])
    i = np.clip(np.searchsorted(x, xa, side="right") - 1, 0, x.size - 2)
    h = xa - x[i]
    slope = (y[:, i + 1] - y[:, i]) / dx[i]
    out = cum[:, i] + y[:, i] * h + 0.5 * slope * h * h
    if hold:
        out = out + y[:, :1] * np.minimum(at - x[0], 0.0) + y[:, -1:] * np.maximum(at - x[-1], 0.0)
    return out


@dataclass(frozen=True, eq=False)
class ConstantYield:
    """A quantum yield that is the same at every wavelength and temperature."""

    value: float
    species: str = ""
    channel: str = ""
    quantity: str = "quantum_yield"
    units: str = "1"
    temperature_dependence: str = "none"
    source: str = "constant given as a number"
    provenance: str = "given as a number"
    outside_range: str = "hold"
    notes: str = ""
    path: str = ""

    def __post_init__(self):
        v = self.value
        if not (isinstance(v, (int, float)) and math.isfinite(v) and 0.0 <= v <= 1.0):
            raise DataFileError(f"quantum yield {v!r}: expected a number in [0, 1]")

    @property
    def wavelength_nm(self) -> np.ndarray:
        return np.array([], dtype=float)

    @property
    def temperatures(self) -> np.ndarray:
        return np.array([], dtype=float)

    def _shape(self, n_wl_shape, temperature_K):
        t = np.asarray(temperature_K, dtype=float)
        if t.ndim > 1:
            raise ValueError(f"temperature_K must be a scalar or 1-D array, got shape {t.shape}")
        return n_wl_shape if t.ndim == 0 else (t.size,) + tuple(n_wl_shape)

    def __call__(self, wavelength_nm, temperature_K=298.0) -> np.ndarray:
        wl = np.asarray(wavelength_nm, dtype=float)
        return np.full(self._shape(wl.shape, temperature_K), float(self.value))

    def bin_average(self, edges_nm, temperature_K=298.0) -> np.ndarray:
        edges = np.asarray(edges_nm, dtype=float)
        if edges.ndim != 1 or edges.size < 2 or not np.all(np.diff(edges) > 0):
            raise ValueError("edges_nm must be a 1-D strictly increasing array of at least 2 "
                             f"wavelengths [nm], got {edges_nm!r}")
        return np.full(self._shape((edges.size - 1,), temperature_K), float(self.value))

    def describe(self) -> str:
        return f"constant quantum yield {self.value:g}"


# --------------------------------------------------------------------------
# reading files

def load_spectral_file(path: str | Path) -> SpectralData:
    """Read a spectral data file (our format, or a lab file: docs/spectral-data.md).

    Raises DataFileError with ``file:line: what was found; what was expected``.
    """
    from ..textio import decode_text, split_lines
    p = Path(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise DataFileError(f"{p}: no such file; expected a spectral data file "
                            f"(see docs/spectral-data.md)") from None
    except OSError as exc:
        raise DataFileError(f"{p}: cannot read ({exc.strerror})") from None
    text = decode_text(data, str(p), DataFileError, "spectral data file")
    lines = split_lines(text)
    first = next((i for i, ln in enumerate(lines) if ln.strip()), None)
    if first is None:
        raise DataFileError(f"{p}:1: empty file; expected '# format: {FORMAT_NAME}' header "
                            "lines and a table, or a two-column CSV with a header line")
    if _is_boxchem_format(lines):
        return _read_boxchem_file(p, lines)
    from .labfile import read_lab_file
    return read_lab_file(p, lines)


def _is_boxchem_format(lines: list[str]) -> bool:
    """True when the leading comment block is our header (a format line, or 3+ of our keys).

    Anything else - a lab file with free-text comments, or none - is read as a lab file.
    """
    keys = set()
    for ln in lines:
        raw = ln.strip()
        if not raw:
            continue
        if not raw.startswith("#"):
            break
        m = _HEADER_RE.match(raw)
        if m and m.group(1) in _KNOWN_KEYS:
            keys.add(m.group(1))
    return "format" in keys or len(keys) >= 3


def _err(path: Path, line: int, found: str, expected: str) -> DataFileError:
    return DataFileError(f"{path}:{line}: {found}; expected {expected}")


def _read_boxchem_file(p: Path, lines: list[str]) -> SpectralData:
    header: dict[str, str] = {}
    header_line: dict[str, int] = {}
    i = 0
    # header block: '# key: value' lines (bare '#' lines are allowed as spacers)
    while i < len(lines):
        raw = lines[i].strip()
        if not raw:
            i += 1
            continue
        if not raw.startswith("#"):
            break
        lineno = i + 1
        i += 1
        if raw.strip("#").strip() == "":
            continue
        m = _HEADER_RE.match(raw)
        if not m:
            raise _err(p, lineno, f"header line {raw!r}", "'# key: value'")
        key, value = m.group(1), m.group(2)
        if key not in _KNOWN_KEYS:
            hint = difflib.get_close_matches(key, _KNOWN_KEYS, n=1)
            did = f" (did you mean {hint[0]!r}?)" if hint else ""
            raise _err(p, lineno, f"unknown header key {key!r}{did}",
                       f"one of {', '.join(_KNOWN_KEYS)}")
        if key == "notes" and key in header:
            header[key] += " " + value          # notes may continue over several lines
            continue
        if key in header:
            raise _err(p, lineno, f"header key {key!r} given twice (first on line "
                       f"{header_line[key]})", "each key once (only 'notes' may repeat)")
        if value == "":
            raise _err(p, lineno, f"empty value for header key {key!r}", "a value after the colon")
        header[key] = value
        header_line[key] = lineno
    table_start = i
    end_of_header = table_start + 1 if table_start < len(lines) else len(lines)

    for key in _REQUIRED_KEYS:
        if key not in header:
            raise _err(p, end_of_header, f"header key {key!r} missing",
                       f"'# {key}: ...' in the header block (required keys: {', '.join(_REQUIRED_KEYS)})")

    def check_choice(key, choices):
        if header[key] not in choices:
            raise _err(p, header_line[key], f"{key} {header[key]!r}", f"one of {', '.join(choices)}")

    if header["format"] != FORMAT_NAME:
        raise _err(p, header_line["format"], f"format {header['format']!r}", repr(FORMAT_NAME))
    check_choice("quantity", _QUANTITIES)
    quantity = header["quantity"]
    if header["units"] != _UNITS[quantity]:
        raise _err(p, header_line["units"], f"units {header['units']!r} for a {quantity}",
                   repr(_UNITS[quantity]))
    check_choice("temperature_dependence", _T_DEPENDENCES)
    dep = header["temperature_dependence"]
    if quantity == "quantum_yield" and dep == "log10_linear":
        raise _err(p, header_line["temperature_dependence"],
                   "temperature_dependence 'log10_linear' for a quantum yield",
                   "'none' or 'table' (log10_linear is for cross sections)")
    if quantity == "quantum_yield" and "channel" not in header:
        raise _err(p, end_of_header, "header key 'channel' missing for a quantum yield",
                   "'# channel: PRODUCTS' (e.g. 'O(1D) + O2')")
    outside = header.get("outside_range", _DEFAULT_OUTSIDE[quantity])
    if "outside_range" in header:
        check_choice("outside_range", _OUTSIDE)
    valid_range = None
    if "valid_temperature_range_K" in header:
        valid_range = _parse_range(p, header_line["valid_temperature_range_K"],
                                   header["valid_temperature_range_K"])
    if dep == "log10_linear" and valid_range is None:
        raise _err(p, end_of_header, "header key 'valid_temperature_range_K' missing for "
                   "temperature_dependence log10_linear",
                   "'# valid_temperature_range_K: LOW, HIGH' (the range the fit holds for)")

    # the table
    if table_start >= len(lines):
        raise _err(p, len(lines), "end of file after the header block",
                   "a table header line starting with 'wavelength_nm'")
    columns = [c.strip() for c in lines[table_start].split(",")]
    temperatures = _check_columns(p, table_start + 1, columns, quantity, dep)
    wl, vals, linenos = _read_rows(p, lines, table_start + 1, len(columns))
    _check_values(p, wl, vals, quantity, dep, linenos)
    return SpectralData(
        species=header["species"], channel=header.get("channel", ""), quantity=quantity,
        units=header["units"], temperature_dependence=dep, source=header["source"],
        provenance=header["provenance"], wavelength_nm=_frozen(wl),
        temperatures=_frozen(np.asarray(temperatures, dtype=float)), values=_frozen(vals.T.copy()),
        valid_temperature_range_K=valid_range, outside_range=outside,
        notes=header.get("notes", ""), path=str(p), header=dict(header))


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.ascontiguousarray(a, dtype=float)
    a.setflags(write=False)
    return a


def _parse_range(p: Path, lineno: int, text: str) -> tuple[float, float]:
    parts = [s.strip() for s in text.replace(" to ", ",").split(",")]
    try:
        lo, hi = (float(s) for s in parts)
    except ValueError:
        raise _err(p, lineno, f"valid_temperature_range_K {text!r}",
                   "two temperatures in K, 'LOW, HIGH' (e.g. '210, 300')") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo < hi):
        raise _err(p, lineno, f"valid_temperature_range_K {text!r}", "0 < LOW < HIGH")
    return lo, hi


def _check_columns(p: Path, lineno: int, columns: list[str], quantity: str, dep: str) -> list[float]:
    """Validate the table header line; returns the column temperatures [K]."""
    prefix = _VALUE_PREFIX[quantity]
    if columns[0] != "wavelength_nm":
        raise _err(p, lineno, f"first column {columns[0]!r}", "'wavelength_nm'")
    rest = columns[1:]
    if dep == "none":
        if len(rest) != 1 or not (rest[0] == prefix or _T_COLUMN_RE.match(rest[0])):
            raise _err(p, lineno, f"columns {','.join(columns)!r} for temperature_dependence none",
                       f"'wavelength_nm,{prefix}' (or one column '{prefix}_<T>K')")
        m = _T_COLUMN_RE.match(rest[0])
        return [float(m.group(2))] if m else []
    if dep == "table":
        temps = []
        for c in rest:
            m = _T_COLUMN_RE.match(c)
            if not m or m.group(1) != prefix:
                raise _err(p, lineno, f"column {c!r} for temperature_dependence table",
                           f"one column per temperature named '{prefix}_<T>K', e.g. "
                           f"'{prefix}_218K,{prefix}_298K'")
            temps.append(float(m.group(2)))
        if not temps:
            raise _err(p, lineno, "no value columns", f"'{prefix}_<T>K' columns after wavelength_nm")
        if any(b <= a for a, b in zip(temps, temps[1:])):
            raise _err(p, lineno, f"column temperatures {temps}", "strictly increasing temperatures")
        return temps
    # log10_linear
    m = _T_COLUMN_RE.match(rest[0]) if len(rest) == 2 else None
    if not m or m.group(1) != prefix or rest[1] != "B":
        raise _err(p, lineno, f"columns {','.join(columns)!r} for temperature_dependence log10_linear",
                   "'wavelength_nm,sigma_<T0>K,B' (e.g. 'wavelength_nm,sigma_298K,B')")
    return [float(m.group(2))]


def _read_rows(p: Path, lines: list[str], start: int, ncol: int) -> tuple[np.ndarray, np.ndarray, list[int]]:
    """Numeric rows after line index ``start``; also their 1-based line numbers."""
    rows, linenos = [], []
    for j in range(start, len(lines)):
        raw = lines[j].strip()
        if not raw or raw.startswith("#"):
            continue
        cells = [c.strip() for c in raw.split(",")]
        if len(cells) != ncol:
            raise _err(p, j + 1, f"{len(cells)} values in {raw!r}", f"{ncol} comma-separated values")
        try:
            row = [float(c) for c in cells]
        except ValueError:
            bad = next(c for c in cells if not _is_float(c))
            raise _err(p, j + 1, f"{bad!r} is not a number", "decimal numbers like 1.5e-19") from None
        rows.append(row)
        linenos.append(j + 1)
    if len(rows) < 2:
        raise _err(p, len(lines), f"{len(rows)} data row(s)", "at least 2 rows of the table")
    arr = np.array(rows, dtype=float)
    return arr[:, 0], arr[:, 1:], linenos


def _is_float(s: str) -> bool:
    try:
        float(s)
        return True
    except ValueError:
        return False


def _check_values(p: Path, wl: np.ndarray, vals: np.ndarray, quantity: str, dep: str,
                  linenos: list[int]) -> None:
    bad = ~np.isfinite(wl) | (wl <= 0)
    if bad.any():
        k = int(np.argmax(bad))
        raise _err(p, linenos[k], f"wavelength {float(wl[k])!r}", "a finite positive wavelength in nm")
    step = np.diff(wl)
    if np.any(step <= 0):
        k = int(np.argmax(step <= 0)) + 1
        raise _err(p, linenos[k], f"wavelength {wl[k]:g} nm after {wl[k - 1]:g} nm",
                   "strictly increasing wavelengths")
    checked = vals[:, :1] if dep == "log10_linear" else vals
    if dep == "log10_linear":
        bcol = vals[:, 1]
        if not np.all(np.isfinite(bcol)) or np.any(np.abs(bcol) > 1.0):
            k = int(np.argmax(~np.isfinite(bcol) | (np.abs(bcol) > 1.0)))
            raise _err(p, linenos[k], f"B = {float(bcol[k])!r}", "a finite coefficient |B| <= 1 K-1")
    bad = ~np.isfinite(checked) | (checked < 0)
    if bad.any():
        k = int(np.argmax(bad.any(axis=1)))
        v = checked[k][bad[k]][0]
        raise _err(p, linenos[k], f"value {float(v)!r}", "finite non-negative values")
    if quantity == "quantum_yield" and np.any(checked > 1):
        k = int(np.argmax((checked > 1).any(axis=1)))
        v = checked[k][checked[k] > 1][0]
        raise _err(p, linenos[k], f"quantum yield {float(v)!r}", "values in [0, 1]")


# --------------------------------------------------------------------------
# shipped data sets by name

def shipped_cross_sections() -> list[str]:
    """Names of the shipped cross-section data sets."""
    return sorted(f.stem for f in (DATA_DIR / "cross_sections").glob("*.csv"))


def shipped_quantum_yields() -> list[str]:
    """Names of the shipped quantum-yield data sets."""
    return sorted(f.stem for f in (DATA_DIR / "quantum_yields").glob("*.csv"))


@functools.lru_cache(maxsize=None)
def _load_cached(path: str) -> SpectralData:
    return load_spectral_file(path)


def _resolve(name_or_path, quantity: str) -> SpectralData:
    text = str(name_or_path)
    candidate = Path(text).expanduser()
    looks_like_path = candidate.suffix != "" or "/" in text or "\\" in text
    if candidate.is_file():
        data = load_spectral_file(candidate)
    elif not looks_like_path and (DATA_DIR / _KIND_DIR[quantity] / f"{text}.csv").is_file():
        data = _load_cached(str(DATA_DIR / _KIND_DIR[quantity] / f"{text}.csv"))
    else:
        names = shipped_cross_sections() if quantity == "cross_section" else shipped_quantum_yields()
        label = quantity.replace("_", "-")
        lower = {n.lower(): n for n in names}
        hints = [lower[h] for h in difflib.get_close_matches(text.lower(), list(lower), n=3,
                                                              cutoff=0.5)]
        if looks_like_path:
            raise DataFileError(f"no {label} file {text!r} (no such file); expected a readable "
                                f"file (docs/spectral-data.md) or the name of a shipped data set")
        msg = f"no {label} file {text!r} and no shipped {label} data set named {text!r}"
        if hints:
            msg += f"; close matches: {', '.join(hints)}"
        msg += f"; shipped: {', '.join(names)}"
        raise DataFileError(msg)
    if data.quantity != quantity:
        raise DataFileError(f"{data.path}: quantity {data.quantity!r}; expected {quantity!r} here")
    return data


def cross_section_data(name_or_path: str | Path) -> SpectralData:
    """A shipped cross section by name (e.g. 'O3') or a user file by path."""
    return _resolve(name_or_path, "cross_section")


def quantum_yield_data(name_or_path_or_number) -> SpectralData | ConstantYield:
    """A shipped quantum yield by name (e.g. 'O3_O1D'), a file path, or a constant.

    A number (or a string that parses as one, as the mechanism's ``qy=`` gives)
    returns a ``ConstantYield`` with the same interface; it must lie in [0, 1].
    """
    x = name_or_path_or_number
    if isinstance(x, (int, float, np.floating, np.integer)) and not isinstance(x, bool):
        return ConstantYield(float(x))
    if isinstance(x, str) and _is_float(x.strip()):
        return ConstantYield(float(x))
    return _resolve(x, "quantum_yield")
