"""Laboratory cross-section files as labs write them -> SpectralData.

The layouts read (docs/spectral-data.md, "Lab files"):

* columns separated by commas, tabs or white space (one separator per file,
  taken from the first data row);
* comment lines starting with ``#``, ``!``, ``%``, ``;`` or ``//`` anywhere,
  and free-text lines before the header line or (without digits) after the
  table (kept as notes);
* one header line naming the columns with their units: the wavelength first
  (``nm`` or Angstrom: ``A``, ``Å``, ``angstrom``), then one cross-section
  column per temperature (``sigma_298K (1e-20 cm2)``, ``298 K [cm^2]``) in
  ``cm2`` with an optional power-of-ten factor (``1e-20 cm2``,
  ``10^-20 cm^2``, ``cm2 molecule-1``), and optional uncertainty columns
  (``uncertainty (%)``, ``error (1e-20 cm2)``) that belong to the
  cross-section column before them;
* rows in increasing or decreasing wavelength.

Several temperature columns become a ``table`` temperature dependence
(interpolated linearly in T between the columns, clamped at the ends), so a
run evaluates the spectrum at each temperature node of its J table.
Everything is converted once, here: the result holds nm and cm2 only.
"""
from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..errors import DataFileError

__all__ = ["read_lab_file", "is_comment", "COMMENT_PREFIXES"]

COMMENT_PREFIXES = ("#", "!", "%", ";", "//")
_WAVELENGTH_FACTORS = {"nm": 1.0, "a": 0.1, "å": 0.1, "angstrom": 0.1, "angstroms": 0.1,
                       "ang": 0.1, "um": 1000.0, "µm": 1000.0, "micron": 1000.0}
_WAVELENGTH_NAMES = ("wavelength", "wavelengths", "lambda", "wl", "λ", "wave")
_UNCERTAINTY_WORDS = ("uncert", "error", "err", "unc", "sd", "std", "stdev", "sigma_err",
                      "±", "+/-", "+-", "delta")
_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_FACTOR = rf"(?:(?:{_NUMBER})|(?:10\s*(?:\^|\*\*)\s*\(?[-+]?\d+\)?)|(?:e[-+]?\d+))"
_PER_MOLECULE = re.compile(r"\s*(?:/\s*molec(?:ule)?s?|molec(?:ule)?s?\s*(?:\^\s*)?-1|"
                           r"molec(?:ule)?s?\s*\*\*\s*-1|molec(?:ule)?s?\s*⁻¹)\s*")
_CM2 = r"(?:cm\s*(?:\^\s*2|\*\*\s*2|2|²))"
_XS_UNIT = re.compile(rf"^(?:x\s*)?(?P<f1>{_FACTOR})?\s*(?:\*|x|×)?\s*{_CM2}\s*(?:(?:\*|x|×)\s*(?P<f2>{_FACTOR}))?$")
_TEMPERATURE = re.compile(r"(?<![\d.eE-])(\d+(?:\.\d+)?)\s*K(?![a-zA-Z])")


def is_comment(line: str) -> bool:
    s = line.strip()
    return any(s.startswith(p) for p in COMMENT_PREFIXES)


def _err(path: Path, line: int, found: str, expected: str) -> DataFileError:
    return DataFileError(f"{path}:{line}: {found}; expected {expected}")


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _separator(row: str) -> str | None:
    """',' or '\\t' when the row uses it, else None (white space)."""
    if "," in row:
        return ","
    if "\t" in row:
        return "\t"
    return None


def _split(line: str, sep: str | None) -> list[str]:
    """Cells of a line; white space splits outside brackets (``sigma (1e-20 cm2)`` is one cell)."""
    if sep is not None:
        return [c.strip() for c in line.strip().split(sep)]
    cells, depth, current = [], 0, ""
    for ch in line.strip():
        if ch in "([":
            depth += 1
        elif ch in ")]":
            depth = max(depth - 1, 0)
        if ch.isspace() and depth == 0:
            if current:
                cells.append(current)
            current = ""
            continue
        current += ch
    if current:
        cells.append(current)
    # a unit written apart from its name ("sigma (cm2)") belongs to the cell before it
    merged: list[str] = []
    for c in cells:
        if merged and c[0] in "([":
            merged[-1] = f"{merged[-1]} {c}"
        else:
            merged.append(c)
    return merged


def _unit_and_name(cell: str) -> tuple[str, str | None]:
    """('sigma_298K', '1e-20 cm2') from 'sigma_298K (1e-20 cm2)'; unit None when none is written."""
    s = cell.strip()
    m = re.search(r"[\(\[]\s*([^\)\]]*?)\s*[\)\]]\s*$", s)
    if m:
        return s[:m.start()].strip(), m.group(1)
    m = re.match(r"^(.*?)\s*/\s*([^/]+)$", s)          # 'lambda/nm', 'sigma/cm2'
    if m and m.group(1):
        return m.group(1), m.group(2)
    parts = re.split(r"[_ ]", s)
    if len(parts) > 1:
        tail = parts[-1]
        unit_like = (re.fullmatch(r"[A-Za-zµÅå]+[\^*²0-9-]+[0-9]*", tail) is not None
                     and re.fullmatch(r"\d+(?:\.\d+)?K", tail) is None)   # m2, cm-1; not 298K
        if tail.lower() in _WAVELENGTH_FACTORS or _cross_section_factor(tail) is not None \
                or tail == "%" or unit_like:
            return s[: len(s) - len(tail)].rstrip("_ "), tail
    return s, None


def _factor_value(text: str | None) -> float:
    if not text:
        return 1.0
    t = text.replace(" ", "")
    m = re.fullmatch(r"10(?:\^|\*\*)\(?([-+]?\d+)\)?", t)
    if m:
        return 10.0 ** int(m.group(1))
    if t.lower().startswith("e"):
        return 10.0 ** int(t[1:])
    return float(t)


def _cross_section_factor(unit: str) -> float | None:
    """cm2 per unit of the column (1e-20 for '1e-20 cm2'), or None for anything else."""
    u = _PER_MOLECULE.sub("", unit.strip().lower())
    m = _XS_UNIT.match(u.strip())
    if m is None:
        return None
    factor = _factor_value(m.group("f1")) * _factor_value(m.group("f2"))
    return factor if np.isfinite(factor) and factor > 0 else None


def _is_uncertainty(name: str) -> bool:
    n = name.strip().lower()
    return any(n.startswith(w) or f"_{w}" in n or f" {w}" in n for w in _UNCERTAINTY_WORDS)


def _classify_columns(path: Path, lineno: int, cells: list[str]):
    """Wavelength factor, and per value column (kind, temperature, factor, name)."""
    name0, unit0 = _unit_and_name(cells[0])
    wl_factor = _WAVELENGTH_FACTORS.get((unit0 or "").lower().replace(" ", ""))
    if wl_factor is None:
        found = f"wavelength unit {unit0!r}" if unit0 else f"no unit in column {cells[0]!r}"
        raise _err(path, lineno, found, "the first column to be the wavelength in nm or Angstrom, "
                   "e.g. 'wavelength (nm)', 'wavelength_nm', 'lambda [A]'")
    if not any(w in name0.lower() for w in _WAVELENGTH_NAMES) and name0:
        raise _err(path, lineno, f"first column {cells[0]!r}",
                   "the wavelength first, named e.g. 'wavelength (nm)' or 'lambda [A]'")
    columns = []
    for cell in cells[1:]:
        name, unit = _unit_and_name(cell)
        if _is_uncertainty(name):
            if unit is not None and unit.strip() == "%":
                columns.append(("uncertainty_relative", None, 0.01, cell))
                continue
            factor = _cross_section_factor(unit) if unit else None
            if factor is None:
                found = f"uncertainty unit {unit!r}" if unit else f"no unit in column {cell!r}"
                raise _err(path, lineno, f"{found} of an uncertainty column",
                           "'%' (relative) or a cross-section unit such as '1e-20 cm2' (absolute), "
                           "e.g. 'uncertainty (%)'")
            columns.append(("uncertainty_absolute", None, factor, cell))
            continue
        factor = _cross_section_factor(unit) if unit else None
        if factor is None:
            found = f"cross-section unit {unit!r}" if unit else f"no unit in column {cell!r}"
            raise _err(path, lineno, found, "cross sections in cm2, optionally with a power of ten, "
                       "e.g. 'sigma (cm2)', 'sigma_298K (1e-20 cm2)', 'cross section [10^-20 cm^2]'")
        m = _TEMPERATURE.search(name)
        columns.append(("cross_section", float(m.group(1)) if m else None, factor, cell))
    n_xs = sum(1 for c in columns if c[0] == "cross_section")
    if n_xs == 0:
        raise _err(path, lineno, f"no cross-section column in {' | '.join(cells)!r}",
                   "at least one cross-section column after the wavelength")
    temps = [c[1] for c in columns if c[0] == "cross_section"]
    if n_xs > 1:
        if any(t is None for t in temps):
            bad = next(c[3] for c in columns if c[0] == "cross_section" and c[1] is None)
            raise _err(path, lineno, f"column {bad!r} names no temperature",
                       "one temperature per cross-section column when there are several, "
                       "e.g. 'sigma_200K (1e-20 cm2)', 'sigma_298K (1e-20 cm2)'")
        if len(set(temps)) != len(temps):
            raise _err(path, lineno, f"column temperatures {temps} K with repeats",
                       "each temperature once")
    if columns[0][0] != "cross_section":
        raise _err(path, lineno, f"uncertainty column {columns[0][3]!r} before any cross section",
                   "each uncertainty column right after the cross-section column it belongs to")
    return wl_factor, columns


def read_lab_file(path: Path, lines: list[str]):
    """A lab cross-section file (layouts in the module docstring) -> SpectralData [nm, cm2]."""
    from .crosssections import SpectralData, _check_values, _frozen

    content = [(i + 1, ln) for i, ln in enumerate(lines) if ln.strip() and not is_comment(ln)]
    first_row = next((k for k, (_, ln) in enumerate(content)
                      if all(_is_number(c) for c in _split(ln, _separator(ln)))), None)
    if first_row is None:
        raise _err(path, len(lines), "no rows of numbers",
                   "a header line naming the columns with units, then rows of numbers")
    if first_row == 0:
        lineno = content[0][0]
        raise _err(path, lineno, f"numbers {content[0][1].strip()!r} before any header line",
                   "a header line naming the columns and units first, e.g. "
                   "'wavelength (nm), sigma (1e-20 cm2)'")
    sep = _separator(content[first_row][1])
    head_lineno, head = content[first_row - 1]
    notes = " ".join(ln.strip() for _, ln in content[:first_row - 1])
    cells = _split(head, sep)
    wl_factor, columns = _classify_columns(path, head_lineno, cells)
    ncol = 1 + len(columns)
    rows, linenos = [], []
    body = content[first_row:]
    # free text after the table ("end of data", a note) holds no digit, so no row is lost to it
    last_digit = max(k for k, (_, ln) in enumerate(body) if any(ch.isdigit() for ch in ln))
    notes = " ".join([notes, *(ln.strip() for _, ln in body[last_digit + 1:])]).strip()
    for lineno, ln in body[:last_digit + 1]:
        row = _split(ln, sep)
        if len(row) != ncol:
            raise _err(path, lineno, f"{len(row)} values in {ln.strip()!r}",
                       f"{ncol} values ({' | '.join(cells)}) separated by "
                       f"{ {',': 'commas', chr(9): 'tabs'}.get(sep, 'white space')}")
        try:
            rows.append([float(c) for c in row])
        except ValueError:
            bad = next(c for c in row if not _is_number(c))
            raise _err(path, lineno, f"{bad!r} is not a number",
                       "decimal numbers like 1.5e-19 (comment lines start with #)") from None
        linenos.append(lineno)
    if len(rows) < 2:
        raise _err(path, len(lines), f"{len(rows)} data row(s)", "at least 2 rows")
    table = np.array(rows, dtype=float)
    wl = table[:, 0] * wl_factor
    if wl.size > 1 and np.all(np.diff(wl) < 0):        # descending files are common; read as given
        table, wl, linenos = table[::-1], wl[::-1], linenos[::-1]
    xs_cols = [j for j, c in enumerate(columns) if c[0] == "cross_section"]
    values = np.stack([table[:, 1 + j] * columns[j][2] for j in xs_cols], axis=1)   # (n_wl, n_T)
    uncertainty = np.full_like(values, np.nan)
    owner = -1
    for j, (kind, _, factor, _) in enumerate(columns):
        if kind == "cross_section":
            owner += 1
        elif kind == "uncertainty_relative":
            uncertainty[:, owner] = table[:, 1 + j] * factor * values[:, owner]
        else:
            uncertainty[:, owner] = table[:, 1 + j] * factor
    _check_values(path, wl, values, "cross_section", "table", linenos)
    unc_bad = ~np.isnan(uncertainty) & (~np.isfinite(uncertainty) | (uncertainty < 0))
    if unc_bad.any():
        k = int(np.argmax(unc_bad.any(axis=1)))
        raise _err(path, linenos[k], f"uncertainty {float(uncertainty[k][unc_bad[k]][0])!r}",
                   "finite non-negative uncertainties")
    temps = [columns[j][1] for j in xs_cols]
    if len(temps) > 1:
        order = np.argsort(temps)
        values, uncertainty = values[:, order], uncertainty[:, order]
        temps = [temps[i] for i in order]
        dependence = "table"
    else:
        dependence = "none"
    temperatures = np.array([t for t in temps if t is not None], dtype=float)
    factors = sorted({columns[j][2] for j in xs_cols})
    layout = {",": "comma", "\t": "tab"}.get(sep, "white-space")
    provenance = (f"lab file ({layout}-separated; wavelength "
                  f"{'in nm' if wl_factor == 1.0 else f'converted to nm (x{wl_factor:g})'}; "
                  f"cross sections {'in cm2' if factors == [1.0] else 'converted to cm2 from ' + ', '.join(f'{f:g} cm2' for f in factors)}"
                  + (f"; temperatures {', '.join(f'{t:g}' for t in temps)} K" if len(temps) > 1 else "")
                  + ("; with uncertainty" if np.isfinite(uncertainty).any() else "") + ")")
    return SpectralData(
        species=path.stem, channel="", quantity="cross_section", units="cm2",
        temperature_dependence=dependence, source=f"user file {path}", provenance=provenance,
        wavelength_nm=_frozen(wl), temperatures=_frozen(temperatures),
        values=_frozen(values.T.copy()), outside_range="zero", notes=notes, path=str(path),
        header={}, uncertainty=_frozen(uncertainty.T.copy()) if np.isfinite(uncertainty).any() else None)
