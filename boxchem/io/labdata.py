"""Lab measurement files in: tables of measured rate coefficients and kinetic traces.

Both are plain text, one record per line (format in docs/lab-data.md):

* ``#`` starts a comment (whole line or the rest of a line);
* a header line names the columns, each with its unit in brackets or
  parentheses (``T [K]``, ``p [hPa]``, ``M [cm-3]``, ``k [cm3 molecule-1 s-1]``,
  ``k_err [%]``); a unit may carry a scale factor (``k [1e-12 cm3 molecule-1 s-1]``);
* columns are separated by commas, tabs or runs of spaces (decided from the
  header line; brackets keep a unit with spaces in one column);
* a trace file has ``key = value`` lines (conditions) before its header.

Values are converted here, at the edge, to molecule-cm-s units, K and
molecule cm-3.  Every problem is reported as ``file:line:column`` with the
value found and what would be valid (a :class:`~boxchem.errors.DataFileError`).
Uncertainties are stored as absolute one-standard-deviation values; a column
whose unit says ``2 sigma`` is halved on reading.
"""
from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import DataFileError, UnitError
from ..units import parse_amount, parse_quantity

__all__ = ["RateTable", "Trace", "read_rate_table", "read_trace", "parse_rate_unit",
           "RATE_COLUMNS", "MAX_REPORTED_PROBLEMS"]

#: how many bad rows one error message lists before "... and N more"
MAX_REPORTED_PROBLEMS = 12

#: column roles of a rate table and the header names that select them (compared
#: case-insensitively, except that ``k`` is a rate coefficient and ``K`` an equilibrium constant)
RATE_COLUMNS: dict[str, tuple[str, ...]] = {
    "temperature": ("t", "temperature", "temp"),
    "pressure": ("p", "pressure"),
    "air_density": ("m", "[m]", "air_density", "number_density"),
    "k": ("k", "k_obs", "rate_coefficient"),
    "k_forward": ("k_forward", "kf", "k_f"),
    "k_reverse": ("k_reverse", "kr", "k_r"),
    "equilibrium": ("K", "Keq", "K_eq"),
    "bath_gas": ("bath", "bath_gas", "bath gas", "buffer", "diluent"),
}
#: text columns kept as row notes and otherwise ignored
NOTE_COLUMNS = ("note", "comment", "source", "ref", "id", "run", "trace", "traces", "n_traces")
_UNCERTAINTY_FORMS = ("{}_err", "{}_sigma", "{}_unc", "sigma_{}", "d{}", "u({})")
_VALUE_ROLES = ("k", "k_forward", "k_reverse", "equilibrium")


# ----------------------------------------------------------------------------- units

_UNIT_TOKEN = re.compile(r"^(cm|molecules?|molec|s)(?:\^?\(?([-+]?\d+)\)?)?$")
_SCALE = re.compile(r"^\s*(?:10\^\(?([-+]?\d+)\)?|(\d+(?:\.\d*)?(?:[eE][-+]?\d+)?))\s*(?:[*x×]\s*)?")
_RATE_UNIT_HELP = ("cm3 molecule-1 s-1 (bimolecular), cm6 molecule-2 s-1 (termolecular) or s-1 "
                   "(first order), optionally with a factor such as '1e-12 cm3 molecule-1 s-1'")


def parse_rate_unit(unit: str) -> tuple[float, int, int]:
    """Read a molecule-cm-s unit: returns (factor, cm exponent, s exponent).

    ``"1e-12 cm3 molecule-1 s-1"`` -> (1e-12, 3, -1); ``"cm^3/molecule/s"``
    works too; ``molecule`` may be left out (``cm3 s-1``) but if given its
    exponent must be minus a third of the cm exponent.  Raises ValueError
    with the reason when the text is not such a unit.
    """
    text = unit.strip()
    factor = 1.0
    m = _SCALE.match(text)
    if m and m.end() > 0 and (m.group(1) or m.group(2)):
        rest = text[m.end():]
        if rest and not rest[0].isdigit():
            factor = 10.0 ** int(m.group(1)) if m.group(1) else float(m.group(2))
            text = rest
    exps = {"cm": 0, "molecule": 0, "s": 0}
    seen_molecule = False
    sign = 1
    for raw in re.split(r"(/)|\s+|\*|·", text):
        if raw is None or raw == "":
            continue
        if raw == "/":
            sign = -1
            continue
        tok = _UNIT_TOKEN.match(raw)
        if not tok:
            raise ValueError(f"'{raw}' is not cm, molecule or s with an exponent")
        base = {"molecules": "molecule", "molec": "molecule"}.get(tok.group(1), tok.group(1))
        exps[base] += sign * int(tok.group(2) or 1)
        seen_molecule |= base == "molecule"
        sign = 1  # a '/' divides by the next factor only: cm3/molecule/s
    if exps["cm"] % 3:
        raise ValueError(f"cm exponent {exps['cm']} is not a multiple of 3")
    if seen_molecule and exps["molecule"] != -exps["cm"] // 3:
        raise ValueError(f"molecule exponent {exps['molecule']} does not match cm{exps['cm']}")
    return factor, exps["cm"], exps["s"]


def _rate_units_label(cm: int, s: int) -> str:
    # the spelling of Reaction.rate_coefficient_units ("cm3 s-1", "s-1"), plus K's "cm3"
    parts = [f"cm{cm}"] if cm else []
    if s:
        parts.append(f"s{s}")
    return " ".join(parts) or "1"


# ----------------------------------------------------------------------------- tokens

@dataclass(frozen=True)
class _Field:
    text: str
    column: int  # 1-based character column in the line


class _Problems:
    """Collects file:line:column problems and raises them together."""

    def __init__(self, source: str):
        self.source = source
        self.items: list[str] = []

    def add(self, line: int, column: int | None, message: str) -> None:
        where = f"{self.source}:{line}" + (f":{column}" if column else "")
        self.items.append(f"{where}: {message}")

    def raise_if_any(self) -> None:
        if not self.items:
            return
        shown = self.items[:MAX_REPORTED_PROBLEMS]
        more = len(self.items) - len(shown)
        text = "\n".join(shown) + (f"\n... and {more} more" if more > 0 else "")
        if len(self.items) > 1:
            text = f"{len(self.items)} problems in {self.source}:\n{text}"
        raise DataFileError(text)


def _strip_comment(line: str) -> str:
    at = line.find("#")
    return line if at < 0 else line[:at]


def _separator(header: str) -> str:
    if "," in header:
        return ","
    if "\t" in header:
        return "\t"
    if ";" in header:
        return ";"
    return " "


# a header field in a space-separated file: a name (which may hold '(k)'-like groups
# without spaces) and an optional bracketed unit that may contain spaces
_HEADER_SPACE = re.compile(r"(?:[^\s\[\(]|\([^\)\s]*\))+(?:\s*[\[\(][^\]\)]*[\]\)])?")


def _split(line: str, sep: str, header: bool = False) -> list[_Field]:
    if sep == " ":
        pattern = _HEADER_SPACE if header else re.compile(r"\S+")
        return [_Field(m.group(0), m.start() + 1) for m in pattern.finditer(line)]
    fields, start = [], 0
    for part in line.split(sep):
        lead = len(part) - len(part.lstrip())
        fields.append(_Field(part.strip(), start + lead + 1))
        start += len(part) + 1
    return fields


_NAME_UNIT = re.compile(r"^(.*?)\s*(?:\[([^\]]*)\]|\(([^\)]*)\))\s*$")


def _name_and_unit(text: str) -> tuple[str, str | None]:
    m = _NAME_UNIT.match(text)
    # 'u(k)' is a name (the uncertainty of k), not 'u' with the unit 'k'
    if m and m.group(1) and m.group(1).strip().lower() != "u":
        return m.group(1).strip(), (m.group(2) if m.group(2) is not None else m.group(3)).strip()
    if "/" in text:
        # the quantity-calculus spelling of papers' tables: 'T / K', 'k / 1e-12 cm3 molecule-1 s-1'
        name, _, unit = text.partition("/")
        if name.strip() and unit.strip():
            return name.strip(), unit.strip()
    return text.strip(), None


def _number(text: str) -> float | None:
    try:
        value = float(text)
    except ValueError:
        return None
    return value if math.isfinite(value) else None


# ----------------------------------------------------------------------------- rate tables

@dataclass(frozen=True)
class RateTable:
    """Measured rate coefficients (or equilibrium constants) read from one file.

    temperature [K]; air_density [molecule cm-3] (NaN where the file gives
    neither p nor [M]); ``value`` [molecule-cm-s units of ``value_units``]:
    k, or K = k_forward/k_reverse for an equilibrium table; ``sigma``: absolute
    1-sigma uncertainty of ``value`` (None: the file gave none); ``kind`` is
    ``"k"`` or ``"K"``; ``line`` the file line of each row.
    """

    source: str
    kind: str
    temperature: np.ndarray
    air_density: np.ndarray
    value: np.ndarray
    sigma: np.ndarray | None
    value_units: str
    bath_gas: tuple[str, ...]
    line: np.ndarray
    columns: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    header_comments: tuple[str, ...] = field(default=())
    #: relative 1-sigma uncertainty shared by every value (e.g. a cross section's): fully correlated
    common_rel_sigma: float = 0.0

    def __len__(self) -> int:
        return int(self.value.size)

    @property
    def name(self) -> str:
        return Path(self.source).name

    def select(self, mask) -> "RateTable":
        """The rows where ``mask`` is true."""
        mask = np.asarray(mask, dtype=bool)
        pick = np.flatnonzero(mask)
        return RateTable(self.source, self.kind, self.temperature[pick], self.air_density[pick],
                         self.value[pick], None if self.sigma is None else self.sigma[pick],
                         self.value_units, tuple(self.bath_gas[i] for i in pick), self.line[pick],
                         self.columns, tuple(self.notes[i] for i in pick), self.header_comments,
                         self.common_rel_sigma)

    def has_air_density(self) -> bool:
        return bool(np.all(np.isfinite(self.air_density)))


def _role_of(name: str) -> str | None:
    if name in RATE_COLUMNS["equilibrium"]:
        return "equilibrium"
    low = name.lower()
    for role, names in RATE_COLUMNS.items():
        if role != "equilibrium" and low in names:
            return role
    return None


def _uncertainty_target(name: str, value_names: dict[str, str]) -> str | None:
    """The value role an uncertainty column belongs to, e.g. 'k_err' -> 'k'."""
    low = name.lower()
    if low in ("err", "error", "sigma", "uncertainty", "unc") and "k" in value_names:
        return "k"
    for role, col in value_names.items():
        for form in _UNCERTAINTY_FORMS:
            if name == form.format(col) or (role != "equilibrium" and low == form.format(col).lower()):
                return role
    return None


def _all_known_names() -> list[str]:
    names = [n for ns in RATE_COLUMNS.values() for n in ns] + list(NOTE_COLUMNS)
    return names + ["k_err", "k_sigma", "dk"]


def _sigma_level(unit: str) -> tuple[str, float]:
    """Strip '2 sigma' / '1 sigma' from an uncertainty unit; returns (unit, divisor)."""
    m = re.search(r"[,;]?\s*([12])\s*(?:sigma|σ|s\.d\.|sd)\s*$", unit, flags=re.IGNORECASE)
    if not m:
        return unit.strip(), 1.0
    return unit[:m.start()].strip(), float(m.group(1))



def _text_lines(path, text: str | None) -> list[str]:
    """The lines of ``text``, or of the file at ``path`` (a DataFileError naming it if unreadable)."""
    if text is None:
        try:
            text = Path(path).read_text(encoding="utf-8-sig")
        except FileNotFoundError:
            raise DataFileError(f"{path}: no such file") from None
        except (OSError, UnicodeDecodeError) as exc:
            raise DataFileError(f"{path}: cannot read the file ({exc})") from None
    return text.splitlines()

def _first_content_line(lines: list[str]) -> int | None:
    for i, line in enumerate(lines):
        if _strip_comment(line).strip():
            return i
    return None


def read_rate_table(path: str | Path, *, text: str | None = None) -> RateTable:
    """Read a table of measured k (or of k_forward/k_reverse pairs, or of K) from ``path``.

    Required columns: ``T [K]`` and one of ``k [unit]``, ``k_forward`` with
    ``k_reverse``, or ``K [cm3 molecule-1]``.  Optional: ``p [hPa|Pa|Torr|...]``
    or ``M [cm-3]``, a bath-gas column, an uncertainty column per value
    (``k_err [same unit as k | %]``, optionally ``[% 2 sigma]``), note columns.
    ``text`` reads that text instead of the file (``path`` names it in errors).
    """
    source = str(path)
    lines = _text_lines(path, text)
    problems = _Problems(source)
    h = _first_content_line(lines)
    common = 0.0
    while h is not None and "=" in _strip_comment(lines[h]):
        # 'key = value' lines before the header: only the shared (correlated) uncertainty
        key, _, value = _strip_comment(lines[h]).partition("=")
        key = key.strip()
        bare, level = _sigma_level(value.strip())
        m = re.match(r"^(\S+)\s*%$", bare)
        if key != "common_uncertainty":
            problems.add(h + 1, None, f"unknown setting '{key}'; the only setting before the header is "
                         "'common_uncertainty = 5 %' (a relative uncertainty shared by every k)")
        elif not m or _number(m.group(1)) is None or _number(m.group(1)) < 0:
            problems.add(h + 1, None, f"common_uncertainty = {value.strip()}: write a relative 1-sigma "
                         "uncertainty such as '5 %' (or '10 % 2 sigma')")
        else:
            common = _number(m.group(1)) / 100.0 / level
        nxt = _first_content_line(lines[h + 1:])
        h = None if nxt is None else h + 1 + nxt
    problems.raise_if_any()
    if h is None:
        raise DataFileError(f"{source}: no header line and no data; expected a header such as "
                            f"'T [K], p [hPa], k [cm3 molecule-1 s-1], k_err [%]' and one row per measurement")
    header_line = _strip_comment(lines[h])
    sep = _separator(header_line)
    header = _split(header_line, sep, header=True)
    comments = tuple(line.lstrip("# ").rstrip() for line in lines[:h] if line.lstrip().startswith("#"))

    roles: dict[str, int] = {}
    units: dict[str, str | None] = {}
    value_names: dict[str, str] = {}
    sigma_cols: dict[str, tuple[int, str | None]] = {}
    note_cols: list[int] = []
    names = []
    for j, fld in enumerate(header):
        name, unit = _name_and_unit(fld.text)
        names.append(name)
        role = _role_of(name)
        if role is not None:
            if role in roles:
                problems.add(h + 1, fld.column, f"column '{name}' repeats the {role} column "
                             f"'{names[roles[role]]}'; give each quantity once")
                continue
            roles[role], units[role] = j, unit
            if role in _VALUE_ROLES:
                value_names[role] = name
            continue
        if name.lower() in NOTE_COLUMNS:
            note_cols.append(j)
            continue
        sigma_cols[name] = (j, unit)
    for name, (j, unit) in list(sigma_cols.items()):
        target = _uncertainty_target(name, value_names)
        if target is None:
            hint = difflib.get_close_matches(name, _all_known_names(), n=1)
            problems.add(h + 1, header[j].column,
                         f"unknown column '{name}'" + (f" - did you mean '{hint[0]}'?" if hint else "")
                         + "; valid columns: T, p or M, k (or k_forward and k_reverse, or K), an "
                         "uncertainty per value (k_err, k_sigma, dk, u(k)), bath, note")
            del sigma_cols[name]
        else:
            sigma_cols[name] = (j, unit, target)  # type: ignore[assignment]
    problems.raise_if_any()

    if "temperature" not in roles:
        problems.add(h + 1, None, "no temperature column; add 'T [K]'")
    pairs = "k_forward" in roles or "k_reverse" in roles
    if pairs and not ("k_forward" in roles and "k_reverse" in roles):
        problems.add(h + 1, None, "an equilibrium table needs both 'k_forward' and 'k_reverse' columns")
    present = [r for r in ("k", "equilibrium") if r in roles] + (["pair"] if pairs else [])
    if not present:
        problems.add(h + 1, None, "no rate-coefficient column; add 'k [cm3 molecule-1 s-1]' (or "
                     "'k_forward' and 'k_reverse' columns, or 'K [cm3 molecule-1]')")
    elif len(present) > 1:
        problems.add(h + 1, None, "give one kind of value per file: k, K, or k_forward with k_reverse")
    problems.raise_if_any()

    # ---- units
    scale: dict[str, float] = {}
    dims: dict[str, tuple[int, int]] = {}
    t_unit = units["temperature"]
    t_offset = 0.0
    if t_unit is None or t_unit.strip() in ("K", "k", "kelvin", "Kelvin"):
        if t_unit is None:
            problems.add(h + 1, header[roles["temperature"]].column,
                         "temperature column has no unit; write 'T [K]' (or 'T [degC]')")
    elif t_unit.strip().lower() in ("degc", "°c", "c", "celsius"):
        t_offset = 273.15
    else:
        problems.add(h + 1, header[roles["temperature"]].column,
                     f"unknown temperature unit '{t_unit}'; valid: K, degC")
    if "pressure" in roles:
        try:
            scale["pressure"] = parse_quantity(f"1 {units['pressure'] or ''}", "pressure",
                                               where="pressure column")
        except UnitError:
            problems.add(h + 1, header[roles["pressure"]].column,
                         f"pressure column unit '{units['pressure']}' is not a pressure unit; "
                         "valid: Pa, hPa, kPa, mbar, bar, atm, Torr (e.g. 'p [Torr]')")
    if "air_density" in roles:
        try:
            number, kind = parse_amount(f"1 {units['air_density'] or ''}", where="M column")
            if kind != "number_density":
                raise UnitError("not a number density")
            scale["air_density"] = number
        except UnitError:
            problems.add(h + 1, header[roles["air_density"]].column,
                         f"[M] column unit '{units['air_density']}' is not a number density; "
                         "valid: cm-3, molecule cm-3 (e.g. 'M [cm-3]')")
    for role in _VALUE_ROLES:
        if role not in roles:
            continue
        unit = units[role]
        col = header[roles[role]].column
        if unit is None:
            problems.add(h + 1, col, f"column '{value_names[role]}' has no unit; write e.g. "
                         f"'{value_names[role]} [cm3 molecule-1 s-1]'" if role != "equilibrium" else
                         f"column '{value_names[role]}' has no unit; write '{value_names[role]} [cm3 molecule-1]'")
            continue
        try:
            factor, cm, s = parse_rate_unit(unit)
        except ValueError as exc:
            problems.add(h + 1, col, f"unit '{unit}' of column '{value_names[role]}': {exc}; valid: "
                         + ("cm3 molecule-1" if role == "equilibrium" else _RATE_UNIT_HELP))
            continue
        if role == "equilibrium" and (s != 0 or cm != 3):
            problems.add(h + 1, col, f"an equilibrium constant K is in cm3 molecule-1, not '{unit}' "
                         "(a rate coefficient column is named 'k')")
            continue
        if role != "equilibrium" and s != -1:
            problems.add(h + 1, col, f"unit '{unit}' of column '{value_names[role]}' is not a rate "
                         f"coefficient (s exponent {s}); valid: {_RATE_UNIT_HELP}")
            continue
        scale[role], dims[role] = factor, (cm, s)
    sigma_spec: dict[str, tuple[int, str, float]] = {}  # role -> (column, 'relative'|'absolute', factor)
    for name, (j, unit, target) in sigma_cols.items():  # type: ignore[misc]
        col = header[j].column
        if target in sigma_spec:
            problems.add(h + 1, col, f"a second uncertainty column for '{value_names[target]}'")
            continue
        if unit is None:
            problems.add(h + 1, col, f"uncertainty column '{name}' has no unit; write '{name} [%]' "
                         f"(relative) or '{name} [{units.get(target) or 'cm3 molecule-1 s-1'}]' (absolute), "
                         "with '2 sigma' inside the brackets if the values are 2-sigma")
            continue
        bare, level = _sigma_level(unit)
        if bare in ("%", "percent"):
            sigma_spec[target] = (j, "relative", 0.01 / level)
            continue
        try:
            factor, cm, s = parse_rate_unit(bare)
        except ValueError as exc:
            problems.add(h + 1, col, f"uncertainty unit '{unit}': {exc}; valid: % or the unit of "
                         f"'{value_names[target]}'")
            continue
        if target in dims and (cm, s) != dims[target]:
            problems.add(h + 1, col, f"uncertainty unit '{unit}' does not match the unit "
                         f"'{units[target]}' of '{value_names[target]}'")
            continue
        sigma_spec[target] = (j, "absolute", factor / level)
    problems.raise_if_any()

    if pairs:
        cm_f, _ = dims["k_forward"]
        cm_r, _ = dims["k_reverse"]
        if cm_f - cm_r != 3:
            problems.add(h + 1, header[roles["k_forward"]].column,
                         f"k_forward [{units['k_forward']}] / k_reverse [{units['k_reverse']}] is not an "
                         "equilibrium constant in cm3 molecule-1 (e.g. k_forward in cm3 molecule-1 s-1 "
                         "with k_reverse in s-1)")
        problems.raise_if_any()
        value_roles = ("k_forward", "k_reverse")
    else:
        value_roles = ("equilibrium",) if "equilibrium" in roles else ("k",)

    # ---- rows
    numeric = ["temperature"] + [r for r in ("pressure", "air_density") if r in roles] + list(value_roles)
    cols = {r: [] for r in numeric}
    sig = {r: [] for r in sigma_spec}
    baths, notes, row_lines = [], [], []
    n_cols = len(header)
    for i in range(h + 1, len(lines)):
        body = _strip_comment(lines[i])
        if not body.strip():
            continue
        fields = _split(body, sep)
        if len(fields) != n_cols:
            problems.add(i + 1, None, f"{len(fields)} values, expected {n_cols} "
                         f"({', '.join(f.text for f in header)})")
            continue
        row_ok = True
        got: dict[str, float] = {}
        checks = [(role, roles[role], False) for role in numeric] + \
                 [(role, spec[0], True) for role, spec in sigma_spec.items()]
        for role, j, is_sigma in checks:
            fld = fields[j]
            value = _number(fld.text)
            label = header[j].text
            if value is None:
                problems.add(i + 1, fld.column, f"'{fld.text}' in column '{label}' is not a finite number")
                row_ok = False
                continue
            if role == "temperature" and not is_sigma:
                value += t_offset
            if value <= 0:
                if is_sigma:
                    msg = (f"uncertainty {fld.text} in column '{label}' must be positive (0 would give "
                           "the point infinite weight)")
                else:
                    msg = (f"{role.replace('_', ' ')} {fld.text} in column '{label}' must be positive"
                           + (" (a fit in ln k needs k > 0)" if role in _VALUE_ROLES else ""))
                problems.add(i + 1, fld.column, msg)
                row_ok = False
                continue
            got[("sigma:" if is_sigma else "") + role] = value
        if not row_ok:
            continue
        for role in numeric:
            cols[role].append(got[role])
        for role, (j, mode, factor) in sigma_spec.items():
            # final units: relative -> fraction of the value; absolute -> the column's own unit factor
            raw = got["sigma:" + role]
            sig[role].append(raw * factor * got[role] * scale[role] if mode == "relative" else raw * factor)
        baths.append(fields[roles["bath_gas"]].text if "bath_gas" in roles else "")
        notes.append("; ".join(fields[j].text for j in note_cols))
        row_lines.append(i + 1)
    problems.raise_if_any()
    if not row_lines:
        raise DataFileError(f"{source}: no data rows after the header (line {h + 1})")

    T = np.asarray(cols["temperature"])
    if "air_density" in cols:
        M = np.asarray(cols["air_density"]) * scale["air_density"]
    elif "pressure" in cols:
        from ..environment.atmosphere import air_number_density
        M = air_number_density(np.asarray(cols["pressure"]) * scale["pressure"], T)
    else:
        M = np.full(T.shape, np.nan)

    if pairs:
        kf = np.asarray(cols["k_forward"]) * scale["k_forward"]
        kr = np.asarray(cols["k_reverse"]) * scale["k_reverse"]
        value = kf / kr
        if "k_forward" in sigma_spec and "k_reverse" in sigma_spec:
            rel = np.hypot(np.asarray(sig["k_forward"]) / kf, np.asarray(sig["k_reverse"]) / kr)
            sigma = rel * value
        elif "k_forward" in sigma_spec or "k_reverse" in sigma_spec:
            raise DataFileError(f"{source}:{h + 1}: give uncertainty columns for both k_forward and "
                                "k_reverse (or for neither)")
        else:
            sigma = None
        kind, units_label = "K", "cm3"
    else:
        role = value_roles[0]
        value = np.asarray(cols[role]) * scale[role]
        sigma = np.asarray(sig[role]) if role in sigma_spec else None
        kind = "K" if role == "equilibrium" else "k"
        units_label = _rate_units_label(*dims[role])
    return RateTable(source=source, kind=kind, temperature=T, air_density=np.asarray(M, dtype=float),
                     value=value, sigma=sigma, value_units=units_label, bath_gas=tuple(baths),
                     line=np.asarray(row_lines), columns=tuple(f.text for f in header),
                     notes=tuple(notes), header_comments=comments, common_rel_sigma=common)


# ----------------------------------------------------------------------------- traces

#: condition keys of a trace file and what they hold
TRACE_KEYS = {
    "kind": "second-order | pseudo-first-order",
    "T": "temperature, e.g. '250 K'",
    "p": "pressure, e.g. '100 Torr' (or give M)",
    "M": "air number density, e.g. '3.2e18 cm-3' (or give p)",
    "bath": "bath gas, e.g. N2",
    "cross_section": "absorption cross section of the decaying species, e.g. '6.5e-18 cm2'",
    "cross_section_uncertainty": "relative 1-sigma uncertainty of the cross section, e.g. '5 %'",
    "path_length": "absorption path length, e.g. '80 cm' or '1.2 m'",
    "co_reactant": "number density of the excess co-reactant B, e.g. '1.2e14 cm-3'",
    "species": "name of the decaying species (for labels), e.g. ClO",
}
#: other spellings accepted for condition keys
TRACE_KEY_ALIASES = {"temperature": "T", "pressure": "p", "air_density": "M"}
TRACE_KINDS = ("second-order", "pseudo-first-order")
_TIME_UNITS = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "μs": 1e-6, "ns": 1e-9}
_SIGNAL_COLUMNS = {"absorbance": ("base e", "base 10"), "concentration": ("cm-3",), "signal": ("arb",)}


@dataclass(frozen=True)
class Trace:
    """One kinetic trace after a photolysis flash.

    time [s]; ``signal`` in the unit of ``signal_kind``: ``"absorbance"``
    (natural-log absorbance ln(I0/I); a decadic file is converted),
    ``"concentration"`` [molecule cm-3] or ``"signal"`` (arbitrary units
    proportional to the concentration).  ``signal_sigma`` absolute 1-sigma
    noise per point, or None.  Conditions: temperature [K], air_density
    [cm-3], cross_section [cm2], path_length [cm], co_reactant [cm-3].
    """

    source: str
    kind: str
    time: np.ndarray
    signal: np.ndarray
    signal_sigma: np.ndarray | None
    signal_kind: str
    temperature: float
    air_density: float
    bath_gas: str = ""
    species: str = ""
    cross_section: float | None = None
    cross_section_rel_sigma: float = 0.0
    path_length: float | None = None
    co_reactant: float | None = None
    first_data_line: int = 0

    @property
    def name(self) -> str:
        return Path(self.source).name


def _condition(problems: _Problems, line: int, key: str, value: str):
    try:
        if key == "T":
            t = parse_quantity(value, "temperature", where=key)
            if t <= 0:
                raise UnitError(f"{value!r} is not a positive absolute temperature")
            return t
        if key == "p":
            return parse_quantity(value, "pressure", where=key)
        if key in ("M", "co_reactant"):
            number, kind = parse_amount(value, where=key)
            if kind != "number_density":
                raise UnitError(f"{value!r} must be a number density such as '1.2e14 cm-3'")
            return number
        if key == "cross_section":
            m = re.match(r"^\s*(\S+)\s*cm\^?2\s*$", value)
            if not m or _number(m.group(1)) is None:
                raise UnitError(f"{value!r} is not a cross section; write e.g. '6.5e-18 cm2'")
            return _number(m.group(1))
        if key == "cross_section_uncertainty":
            m = re.match(r"^\s*(\S+)\s*%\s*$", value)
            if not m or _number(m.group(1)) is None:
                raise UnitError(f"{value!r} is not a relative uncertainty; write e.g. '5 %'")
            return _number(m.group(1)) / 100.0
        if key == "path_length":
            m = re.match(r"^\s*(\S+)\s*(cm|m)\s*$", value)
            if not m or _number(m.group(1)) is None:
                raise UnitError(f"{value!r} is not a length; write e.g. '80 cm' or '1.2 m'")
            return _number(m.group(1)) * (100.0 if m.group(2) == "m" else 1.0)
        if key == "kind":
            if value.strip() not in TRACE_KINDS:
                hint = difflib.get_close_matches(value.strip(), TRACE_KINDS, n=1)
                raise UnitError(f"unknown kind {value.strip()!r}" + (f" - did you mean '{hint[0]}'?" if hint
                                else "") + f"; valid: {', '.join(TRACE_KINDS)}")
            return value.strip()
        return value.strip()
    except UnitError as exc:
        problems.add(line, None, f"{key} = {value.strip()}: {exc}")
        return None


def read_trace(path: str | Path, *, text: str | None = None) -> Trace:
    """Read one kinetic trace: ``key = value`` condition lines, then a header and rows.

    Columns: ``t [s|ms|us|ns]`` and one signal column, ``absorbance [base e]``
    (or ``[base 10]``), ``concentration [cm-3]`` or ``signal [arb]``;
    optionally its noise ``sigma [same unit]``.  Condition keys: see
    :data:`TRACE_KEYS`.
    """
    source = str(path)
    lines = _text_lines(path, text)
    problems = _Problems(source)
    conditions: dict[str, object] = {}
    h = None
    for i, raw in enumerate(lines):
        body = _strip_comment(raw).strip()
        if not body:
            continue
        if "=" in body:
            key, _, value = body.partition("=")
            key = TRACE_KEY_ALIASES.get(key.strip(), key.strip())
            if key not in TRACE_KEYS:
                hint = difflib.get_close_matches(key, list(TRACE_KEYS) + list(TRACE_KEY_ALIASES), n=1)
                problems.add(i + 1, None, f"unknown condition '{key}'" + (f" - did you mean '{hint[0]}'?"
                             if hint else "") + f"; valid: {', '.join(TRACE_KEYS)}")
                continue
            if key in conditions:
                problems.add(i + 1, None, f"'{key}' given twice")
                continue
            conditions[key] = _condition(problems, i + 1, key, value)
            continue
        h = i
        break
    if h is None:
        problems.add(len(lines) or 1, None, "no column header and no data; expected e.g. "
                     "'t [ms], absorbance [base e]' followed by one row per time")
    problems.raise_if_any()
    for key in ("kind", "T"):
        if key not in conditions:
            problems.add(h + 1, None, f"missing condition '{key} = ...' before the header "
                         f"({TRACE_KEYS[key]})")
    if "p" not in conditions and "M" not in conditions:
        problems.add(h + 1, None, "missing condition 'p = ...' or 'M = ...' before the header")
    problems.raise_if_any()

    header_line = _strip_comment(lines[h])
    sep = _separator(header_line)
    header = _split(header_line, sep, header=True)
    parsed = [_name_and_unit(f.text) for f in header]
    t_col = s_col = e_col = None
    t_factor = 1.0
    signal_kind, signal_scale = "", 1.0
    for j, (name, unit) in enumerate(parsed):
        low = name.lower()
        col = header[j].column
        if low in ("t", "time"):
            if unit is None or unit.strip() not in _TIME_UNITS:
                problems.add(h + 1, col, f"time column '{header[j].text}' needs a unit: "
                             f"{', '.join(_TIME_UNITS)} (e.g. 't [ms]')")
            else:
                t_col, t_factor = j, _TIME_UNITS[unit.strip()]
        elif low in _SIGNAL_COLUMNS:
            valid = _SIGNAL_COLUMNS[low]
            u = (unit or "").strip().lower().replace("molecule cm-3", "cm-3")
            if u not in valid:
                problems.add(h + 1, col, f"column '{header[j].text}' needs the unit "
                             + " or ".join(f"[{v}]" for v in valid)
                             + (" (natural-log ln(I0/I) or decadic log10(I0/I) absorbance)"
                                if low == "absorbance" else ""))
            else:
                s_col, signal_kind = j, low
                signal_scale = 1.0 / math.log10(math.e) if u == "base 10" else 1.0
        elif low in ("sigma", "noise", "err"):
            e_col = j
        else:
            problems.add(h + 1, col, f"unknown column '{name}'; valid: t, absorbance, concentration or "
                         "signal, sigma")
    if t_col is None or s_col is None:
        problems.add(h + 1, None, "a trace needs a time column 't [ms]' and one signal column "
                     "(absorbance [base e], concentration [cm-3] or signal [arb])")
    problems.raise_if_any()
    kind = conditions["kind"]
    if kind == "second-order" and signal_kind == "signal":
        problems.add(h + 1, header[s_col].column, "a second-order fit needs absolute concentrations: "
                     "give 'concentration [cm-3]' or 'absorbance [base e]' with cross_section and "
                     "path_length")
    if signal_kind == "absorbance" and kind == "second-order":
        for key in ("cross_section", "path_length"):
            if key not in conditions:
                problems.add(h + 1, None, f"an absorbance trace of a second-order decay needs "
                             f"'{key} = ...' ({TRACE_KEYS[key]})")
    if kind == "pseudo-first-order" and "co_reactant" not in conditions:
        problems.add(h + 1, None, "a pseudo-first-order trace needs 'co_reactant = ...' "
                     f"({TRACE_KEYS['co_reactant']})")
    problems.raise_if_any()

    times, values, sigmas, first = [], [], [], None
    for i in range(h + 1, len(lines)):
        body = _strip_comment(lines[i])
        if not body.strip():
            continue
        fields = _split(body, sep)
        if len(fields) != len(header):
            problems.add(i + 1, None, f"{len(fields)} values, expected {len(header)}")
            continue
        row = []
        for j in (t_col, s_col) + ((e_col,) if e_col is not None else ()):
            v = _number(fields[j].text)
            if v is None:
                problems.add(i + 1, fields[j].column, f"'{fields[j].text}' in column '{header[j].text}' "
                             "is not a finite number")
            row.append(v)
        if None in row:
            continue
        if e_col is not None and row[2] <= 0:
            problems.add(i + 1, fields[e_col].column, f"noise {fields[e_col].text} must be positive")
            continue
        first = first or i + 1
        times.append(row[0] * t_factor)
        values.append(row[1] * signal_scale)
        if e_col is not None:
            sigmas.append(row[2] * signal_scale)
    problems.raise_if_any()
    t = np.asarray(times)
    if t.size < 5:
        raise DataFileError(f"{source}: {t.size} data rows; a trace fit needs at least 5")
    if np.any(np.diff(t) <= 0):
        bad = int(np.flatnonzero(np.diff(t) <= 0)[0]) + 1
        raise DataFileError(f"{source}: times must increase; row {bad + 1} of the data "
                            f"(t = {t[bad] / t_factor:g}) is not after the one before")
    T = float(conditions["T"])
    if "M" in conditions:
        M = float(conditions["M"])
    else:
        from ..environment.atmosphere import air_number_density
        M = float(air_number_density(float(conditions["p"]), T))
    return Trace(source=source, kind=kind, time=t, signal=np.asarray(values),
                 signal_sigma=np.asarray(sigmas) if e_col is not None else None,
                 signal_kind=signal_kind, temperature=T, air_density=M,
                 bath_gas=str(conditions.get("bath", "")), species=str(conditions.get("species", "")),
                 cross_section=conditions.get("cross_section"),
                 cross_section_rel_sigma=float(conditions.get("cross_section_uncertainty") or 0.0),
                 path_length=conditions.get("path_length"), co_reactant=conditions.get("co_reactant"),
                 first_data_line=first or 0)
