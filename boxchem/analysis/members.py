"""Member tables: one row per run of an ensemble, one column per changed quantity.

A grid sweep, a Monte Carlo sample, a finite-difference stencil and a SALib
design are all ways of making this table; :func:`boxchem.ensemble` runs it.
Columns (DEVELOPERS.md, "Ensemble engine"):

* ``scale.<reaction id>``: factor [1] on that reaction's k (thermal k, J or
  surface gamma), multiplied onto the scenario's own ``[scale]``;
* ``initial.<species>``: initial amount replacing the scenario's value - a
  number is a mole fraction [mol mol-1], a text value carries its unit
  (``"2 ppbv"``, ``"1e9 cm-3"``);
* ``environment.temperature_offset`` [K] and any other ``section.key`` of the
  scenario format: members that differ in these get their own *setup group*
  (their own environment, J and k(t) tables);
* ``member_label`` (optional, text): how the member is named in the file.

Only ``scale.*`` and ``initial.*`` of integrated species vary *within* a
group: they are a column offset ln f on the shared k(t) tables and a row of
initial values.  ``initial.*`` of a fixed species changes the fixed
densities, so it is a setup key like the others.
"""
from __future__ import annotations

import csv
import difflib
import io
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from ..errors import BoxchemError

__all__ = ["MemberTable", "MemberTableError", "SetupGroup", "read_member_csv", "member_table",
           "LABEL_COLUMN", "TEMPERATURE_OFFSET_KEY"]

LABEL_COLUMN = "member_label"
TEMPERATURE_OFFSET_KEY = "environment.temperature_offset"


class MemberTableError(BoxchemError):
    """A member table that cannot be run: unknown columns, bad values (says where and what)."""


@dataclass(frozen=True)
class SetupGroup:
    """Members that share one setup: the same values in every setup column.

    ``overrides`` (section.key -> value) is applied to the scenario with
    ``Scenario.with_overrides``; ``members`` are row indices of the table, ascending.
    """

    index: int
    overrides: tuple[tuple[str, Any], ...]
    members: np.ndarray


@dataclass
class MemberTable:
    """A validated member table (see the module docstring).

    ``numeric`` (n_members, n_factors) float64 with column names ``factors``;
    ``text`` (n_members, n_text) object with names ``text_factors`` (values
    that are not numbers, e.g. ``run.start`` dates or ``initial.X = "2 ppbv"``);
    ``labels`` (n_members,) str; ``source`` names where the table came from
    (a CSV path or "<table>") for error messages.
    """

    factors: tuple[str, ...]
    numeric: np.ndarray
    text_factors: tuple[str, ...]
    text: np.ndarray
    labels: np.ndarray
    source: str = "<table>"
    #: 1-based line of each row in the source file (CSV), for error messages
    lines: np.ndarray | None = None
    #: optional ``origin(row, column) -> str``: how errors in a setup value name it
    #: (a sweep says ``--vary location.latitude=-95``); default :meth:`where` = value
    origin: Any = None
    #: extra global attributes for the member file (a sweep records its grid here)
    attrs: dict | None = None

    def __len__(self) -> int:
        return int(self.labels.size)

    @property
    def columns(self) -> tuple[str, ...]:
        return self.factors + self.text_factors

    def value(self, row: int, column: str) -> Any:
        if column in self.factors:
            return float(self.numeric[row, self.factors.index(column)])
        return self.text[row, self.text_factors.index(column)]

    def origin_of(self, row: int, column: str) -> str:
        """How errors in one setup value name it (see ``origin``)."""
        if self.origin is not None:
            return self.origin(row, column)
        return f"{self.where(row, column)} = {self.value(row, column)!r}"

    def where(self, row: int, column: str) -> str:
        """How errors name one cell: ``table.csv:4: column scale.x`` or ``member 3, column scale.x``."""
        if self.lines is not None:
            col = self.columns.index(column) + 1 if column in self.columns else 0
            return f"{self.source}:{int(self.lines[row])}: column {col} ({column})"
        return f"{self.source}: member {row}, column {column}"

    # -- columns by role -------------------------------------------------------------
    def scale_columns(self) -> list[str]:
        return [c for c in self.factors if c.startswith("scale.")]

    def initial_columns(self, variable_species: Sequence[str]) -> list[str]:
        """``initial.*`` columns of integrated species (per-member initial values)."""
        return [c for c in self.columns if c.startswith("initial.")
                and c.split(".", 1)[1] in variable_species]

    def setup_columns(self, variable_species: Sequence[str]) -> list[str]:
        per_member = set(self.scale_columns()) | set(self.initial_columns(variable_species))
        return [c for c in self.columns if c not in per_member]

    def groups(self, variable_species: Sequence[str]) -> list[SetupGroup]:
        """Members grouped by their values in the setup columns, in order of first appearance."""
        columns = self.setup_columns(variable_species)
        keyed: dict[tuple, list[int]] = {}
        for row in range(len(self)):
            key = tuple((c, _plain(self.value(row, c))) for c in columns)
            keyed.setdefault(key, []).append(row)
        return [SetupGroup(i, key, np.asarray(rows, dtype=np.int64))
                for i, (key, rows) in enumerate(keyed.items())]

    def scale_factors(self, rows: np.ndarray, reaction_ids: Sequence[str]) -> np.ndarray:
        """(len(rows), n_reactions) factors on k of ``rows`` (1 where no column names a reaction)."""
        out = np.ones((len(rows), len(reaction_ids)))
        position = {rid: i for i, rid in enumerate(reaction_ids)}
        for column in self.scale_columns():
            out[:, position[column.split(".", 1)[1]]] = self.numeric[rows, self.factors.index(column)]
        return out

    def equals(self, other: "MemberTable") -> bool:
        """Same columns, same values (NaN equal to NaN), same labels."""
        return (self.factors == other.factors and self.text_factors == other.text_factors
                and self.numeric.shape == other.numeric.shape
                and bool(np.all((self.numeric == other.numeric)
                                | (np.isnan(self.numeric) & np.isnan(other.numeric))))
                and np.array_equal(self.text.astype(str), other.text.astype(str))
                and np.array_equal(self.labels.astype(str), other.labels.astype(str)))


def _plain(value: Any) -> Any:
    """A hashable, comparable form of a cell (numpy scalars -> Python)."""
    if isinstance(value, np.generic):
        return value.item()
    return value


def _number(value: Any) -> float | None:
    """The cell as a float, or None when it is text that is not a number."""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float, np.integer, np.floating)):
        return float(value)
    if isinstance(value, str):
        try:
            return float(value.strip())
        except ValueError:
            return None
    return None


def member_table(members: Any, *, source: str = "<table>") -> MemberTable:
    """A :class:`MemberTable` from a pandas DataFrame, a dict of equal-length arrays, or a table.

    Column names are only checked for form here (``section.key``); the
    names of reactions, species and keys are checked against a scenario by
    :func:`validate_table`.
    """
    if isinstance(members, MemberTable):
        return members
    lines = None
    if hasattr(members, "columns") and hasattr(members, "to_dict"):      # pandas DataFrame
        columns = {str(c): list(members[c].to_numpy()) for c in members.columns}
    elif isinstance(members, Mapping):
        columns = {}
        for name, values in members.items():
            arr = np.asarray(values, dtype=object).ravel() if not np.isscalar(values) else None
            if arr is None:
                raise MemberTableError(f"{source}: column {name!r}: expected a sequence of values "
                                       f"(one per member), got {values!r}")
            columns[str(name)] = list(arr)
    else:
        raise MemberTableError(f"{source}: members: expected a pandas DataFrame or a dict of "
                               f"equal-length arrays (column name -> values), got "
                               f"{type(members).__name__}")
    return _from_columns(columns, source=source, lines=lines)


def _from_columns(columns: Mapping[str, list], *, source: str,
                  lines: np.ndarray | None) -> MemberTable:
    if not columns:
        raise MemberTableError(f"{source}: the member table has no columns; give at least one "
                               f"column such as scale.<reaction id> or initial.<species>")
    sizes = {name: len(v) for name, v in columns.items()}
    n = max(sizes.values())
    if len(set(sizes.values())) != 1:
        short = min(sizes, key=sizes.get)
        raise MemberTableError(f"{source}: columns differ in length: {short!r} has {sizes[short]} "
                               f"values, others {n}; give one value per member in every column")
    if n == 0:
        raise MemberTableError(f"{source}: the member table has no rows (members)")
    labels = np.array([str(v) for v in columns.get(LABEL_COLUMN, range(n))], dtype=object)
    factors, numeric, text_factors, text = [], [], [], []
    for name, values in columns.items():
        if name == LABEL_COLUMN:
            continue
        if "." not in name or not name.split(".", 1)[1]:
            where = f"{source}:{int(lines[0]) - 1 if lines is not None else 1}: column " \
                    f"{list(columns).index(name) + 1} ({name!r})" if lines is not None \
                else f"{source}: column {name!r}"
            raise MemberTableError(f"{where}: expected section.key, e.g. scale.clo_clo_m, "
                                   f"initial.HNO3, {TEMPERATURE_OFFSET_KEY}, location.latitude "
                                   f"(or {LABEL_COLUMN})")
        numbers = [_number(v) for v in values]
        if all(x is not None for x in numbers):
            factors.append(name)
            numeric.append(numbers)
        else:
            if name.startswith("scale."):
                row = next(i for i, x in enumerate(numbers) if x is None)
                where = (f"{source}:{int(lines[row])}: column {list(columns).index(name) + 1} "
                         f"({name})" if lines is not None else f"{source}: member {row}, column {name}")
                raise MemberTableError(f"{where}: got {values[row]!r}; valid: a finite factor >= 0")
            text_factors.append(name)
            text.append([str(v) for v in values])
    numeric_arr = np.array(numeric, dtype=float).T.reshape(n, len(factors))
    text_arr = np.array(text, dtype=object).T.reshape(n, len(text_factors))
    return MemberTable(tuple(factors), numeric_arr, tuple(text_factors), text_arr, labels,
                       source=source, lines=lines)


def read_member_csv(path: str | Path) -> MemberTable:
    """A member table from a CSV file: a header line of column names, then one line per member.

    Lines starting with ``#`` and empty lines are skipped.  Errors name the
    file, line and column.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise MemberTableError(f"{path}: cannot read the member table: {exc.strerror or exc}") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise MemberTableError(f"{path}:{line}: not UTF-8 text (byte 0x{raw[exc.start]:02x}); save "
                               f"the table as UTF-8 CSV") from None
    rows: list[tuple[int, list[str]]] = []
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        for fields in reader:
            line = reader.line_num
            if not fields or all(not f.strip() for f in fields) or fields[0].lstrip().startswith("#"):
                continue
            rows.append((line, [f.strip() for f in fields]))
    except csv.Error as exc:
        raise MemberTableError(f"{path}:{reader.line_num}: {exc}") from None
    if not rows:
        raise MemberTableError(f"{path}: empty member table; expected a header line of column "
                               f"names (e.g. scale.clo_clo_m,initial.HNO3) and one line per member")
    header_line, header = rows[0]
    for col, name in enumerate(header, start=1):
        if not name:
            raise MemberTableError(f"{path}:{header_line}: column {col} has no name")
        if header.index(name) != col - 1:
            raise MemberTableError(f"{path}:{header_line}: column {col} ({name}) repeats column "
                                   f"{header.index(name) + 1}; every column name once")
    body = rows[1:]
    if not body:
        raise MemberTableError(f"{path}: only a header line; add one line per member")
    for line, fields in body:
        if len(fields) != len(header):
            raise MemberTableError(f"{path}:{line}: {len(fields)} values, the header has "
                                   f"{len(header)} columns ({', '.join(header)})")
        for col, value in enumerate(fields, start=1):
            if value == "":
                raise MemberTableError(f"{path}:{line}: column {col} ({header[col - 1]}) is empty; "
                                       f"give a value for every member")
    columns = {name: [fields[i] for _, fields in body] for i, name in enumerate(header)}
    lines = np.array([line for line, _ in body], dtype=np.int64)
    table = _from_columns(columns, source=str(path), lines=lines)
    table.header_line = header_line  # type: ignore[attr-defined]
    return table


def validate_table(table: MemberTable, scenario) -> None:
    """Refuse unknown columns and bad per-member values before anything runs.

    Checks every column name against the scenario's mechanism (reaction ids,
    species) and the scenario format's keys (with a did-you-mean), and the
    values of ``scale.*`` (finite, >= 0) and numeric ``initial.*`` (finite,
    >= 0) columns.  Values of setup keys are validated per group by the
    scenario loader (an invalid one fails only its group's members).
    """
    from ..scenario import SCENARIO_KEYS

    mechanism = scenario.mechanism
    reactions = tuple(mechanism.reaction_ids)
    species = tuple(mechanism.species_names)
    keys = [f"{s}.{k}" for s, ks in SCENARIO_KEYS.items() for k in ks]
    header_line = getattr(table, "header_line", 1)

    def column_where(column: str) -> str:
        if table.lines is not None:
            return f"{table.source}:{header_line}: column {table.columns.index(column) + 1} ({column})"
        return f"{table.source}: column {column!r}"

    for column in table.columns:
        section, name = column.split(".", 1)
        if section == "scale":
            if name not in reactions:
                close = difflib.get_close_matches(name, reactions, n=3)
                hint = f" - did you mean {', '.join(repr(c) for c in close)}?" if close else ""
                raise MemberTableError(f"{column_where(column)}: no reaction {name!r} in "
                                       f"{mechanism.source or 'the mechanism'}{hint}")
        elif section == "initial":
            if name not in species:
                close = difflib.get_close_matches(name, species, n=3)
                hint = f" - did you mean {', '.join(repr(c) for c in close)}?" if close else ""
                raise MemberTableError(f"{column_where(column)}: no species {name!r} in "
                                       f"{mechanism.source or 'the mechanism'}{hint}")
        elif column not in keys:
            close = difflib.get_close_matches(column, keys + ["scale.", "initial."], n=1)
            hint = f" - did you mean {close[0]!r}?" if close else ""
            raise MemberTableError(f"{column_where(column)}: unknown column{hint}; valid: "
                                   f"scale.<reaction id>, initial.<species>, {', '.join(keys)}, "
                                   f"{LABEL_COLUMN}")
    from ..units import parse_amount
    for column in table.text_factors:
        if column.startswith("initial."):
            for row in range(len(table)):
                cell = table.value(row, column)
                try:
                    float(cell)
                    continue          # a number: a mole fraction, checked below
                except ValueError:
                    pass
                try:
                    value, _ = parse_amount(cell, where=table.where(row, column))
                except BoxchemError as exc:
                    raise MemberTableError(str(exc)) from None
                if not math.isfinite(value) or value < 0:
                    raise MemberTableError(f"{table.where(row, column)}: got {cell!r}; valid: a "
                                           f"finite amount >= 0 (e.g. 2 ppbv, 1e9 cm-3)")
    for column in table.factors:
        if column.startswith(("scale.", "initial.")):
            values = table.numeric[:, table.factors.index(column)]
            bad = ~np.isfinite(values) | (values < 0)
            if bad.any():
                row = int(np.argmax(bad))
                raise MemberTableError(f"{table.where(row, column)}: got {float(values[row])!r}; valid: "
                                       f"a finite {'factor' if column.startswith('scale.') else 'mole fraction'} >= 0")


def initial_number_densities(table: MemberTable, rows: np.ndarray, base_y0: np.ndarray,
                             variable_species: Sequence[str], air_density: float) -> np.ndarray:
    """(len(rows), n_variable) initial number densities [cm-3]: the group's y0 with the
    rows' ``initial.*`` values (mole fractions times ``air_density``, or amounts with units)."""
    from ..units import parse_amount
    y0 = np.repeat(np.asarray(base_y0, dtype=float)[None, :], len(rows), axis=0)
    for column in table.initial_columns(variable_species):
        j = list(variable_species).index(column.split(".", 1)[1])
        for out_row, row in enumerate(rows):
            value = table.value(int(row), column)
            if isinstance(value, float):
                y0[out_row, j] = value * air_density
                continue
            try:
                amount, kind = parse_amount(value, where=table.where(int(row), column))
            except BoxchemError as exc:
                raise MemberTableError(str(exc)) from None
            y0[out_row, j] = amount * air_density if kind == "mole_fraction" else amount
            if not math.isfinite(y0[out_row, j]) or y0[out_row, j] < 0:
                raise MemberTableError(f"{table.where(int(row), column)}: got {value!r}; valid: a "
                                       f"finite amount >= 0")
    return y0


def toml_value(text: Any) -> Any:
    """A text cell read as a TOML value (number, bool, date) where it is one, else kept as text."""
    import tomllib
    if not isinstance(text, str):
        return text
    stripped = text.strip()
    try:
        return tomllib.loads(f"v = {stripped}")["v"]
    except tomllib.TOMLDecodeError:
        return stripped


def apply_setup_overrides(scenario, overrides: Mapping[str, Any], origins: Mapping[str, str]):
    """The scenario with a group's setup values applied (validated like the file).

    ``initial.X`` values that are numbers are mole fractions; other
    ``section.key`` values go through :meth:`Scenario.with_overrides` (text read
    as TOML first, as on the command line).
    """
    initial = {}
    other = {}
    for key, value in overrides.items():
        section, name = key.split(".", 1)
        if section == "initial":
            initial[name] = f"{value!r} mol/mol" if isinstance(value, float) else str(value)
        else:
            other[key] = toml_value(value)
    if initial:
        other["initial"] = initial
    return scenario.with_overrides(origins=dict(origins), **other)
