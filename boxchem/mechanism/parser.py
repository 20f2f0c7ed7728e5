"""Mechanism text -> :class:`~boxchem.mechanism.model.Mechanism`.

The language is described in docs/mechanism-language.md.  Reading happens in
two stages: this module turns lines into species, families, reactions and
cycles (syntax errors: bad tokens, unknown laws or keys, numbers that are not
numbers), then :mod:`boxchem.mechanism.validate` checks the assembled
mechanism (unknown names, element balance, parameter sanity, ...).  Problems
of both stages are collected and raised together as one MechanismError.
"""
from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, replace as dc_replace
from pathlib import Path
from types import MappingProxyType

from ..errors import BoxchemError, MechanismError, Problem, SourceLocation
from .formula import FormulaError, molar_mass, parse_formula
from .model import (RATE_LAWS, Cycle, Family, Mechanism, MechanismChange, MechanismFile, Reaction,
                    Species, Term)
from ..textio import read_text_file, split_lines, strip_bom

__all__ = ["parse_mechanism", "load_mechanism", "parse_stored_mechanism", "LAW_KEYS", "SECTIONS",
           "EXTENDS_WORD"]

SECTIONS = ("species", "families", "reactions", "cycles", "changed reactions", "dropped reactions")
#: first word of the line that builds a mechanism on another (as scenarios do with extends = "...")
EXTENDS_WORD = "extends"
#: spellings of earlier versions of the language -> what to write now (docs/mechanism-language.md)
_OLD_SECTIONS = {"replace": "changed reactions", "remove": "dropped reactions"}

#: keys each law takes: required keys, and defaults the parser stores explicitly
LAW_KEYS: dict[str, dict[str, object]] = {
    "constant": {"required": ("k",), "defaults": {}},
    "arrhenius": {"required": ("A",), "defaults": {"E/R": 0.0, "n": 0.0, "Tref": 300.0}},
    "falloff": {"required": ("k0", "n", "kinf", "m"), "defaults": {"Fc": 0.6, "Tref": 300.0}},
    "chemact": {"required": ("k0", "n", "kinf", "m"), "defaults": {"Fc": 0.6, "Tref": 300.0}},
    "reverse": {"required": ("of", "K", "B"), "defaults": {}},
    "photolysis": {"required": (), "defaults": {"qy": 1.0, "scale": 1.0},
                   "optional": ("data", "l", "m", "n", "outside")},
    "surface": {"required": ("gamma", "on"), "defaults": {}},
    # gamma from a named parameterization (gamma_from=) or a table in T (gamma_table=)
    "uptake": {"required": ("on",), "defaults": {"scale": 1.0, "radius_um": 0.1, "radius_from": "droplets"},
               "optional": ("gamma_from", "gamma_table")},
}
#: keys whose values are text, not numbers
STRING_KEYS = frozenset({"of", "data", "on", "outside", "gamma_from", "gamma_table", "radius_from"})
#: keys every reaction may carry (stored on the Reaction, not in parameters)
COMMON_KEYS = ("f298", "g", "ref")
#: deepest chain of include lines (a file including a file including ...)
MAX_INCLUDE_DEPTH = 64
#: words that cannot name a species
RESERVED = frozenset({"hv", *RATE_LAWS, EXTENDS_WORD, "include", "atoms", "destroys"})

_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*\Z")
_TOKEN = re.compile(r"""
    (?P<ws>\s+)
  | (?P<keyval>(?P<key>[A-Za-z][A-Za-z0-9_/]*)=(?P<val>"[^"]*"|[^\s"]*))
  | (?P<arrow>->)
  | (?P<plus>\+)
  | (?P<star>\*)
  | (?P<eq>=)
  | (?P<number>(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)
  | (?P<name>[A-Za-z][A-Za-z0-9_]*)
  | (?P<lparen>\()
  | (?P<rparen>\))
""", re.VERBOSE)


@dataclass(frozen=True)
class _Token:
    kind: str
    text: str
    column: int          # 1-based column in the original line
    key: str = ""        # keyval tokens only
    value: str = ""      # keyval tokens only (quotes removed)
    value_column: int = 0


def _relative_data_path(value: str, base_dir: Path | None) -> str:
    """A ``data=``/``qy=`` value that is a relative file path, made absolute against ``base_dir``.

    A value with a file suffix or a path separator is a path (the rule of
    ``photolysis.crosssections``); a relative one is read relative to the
    folder of the mechanism file that says it, like ``extends`` paths, so that
    a ``[changed reactions]`` line in a user's file finds the user's lab spectrum from
    any working directory.  Bare names (shipped data sets) are kept as given.
    """
    looks_like_path = Path(value).suffix != "" or "/" in value or "\\" in value
    path = Path(value).expanduser()
    if not looks_like_path or path.is_absolute() or base_dir is None:
        return value
    return str((base_dir / path).resolve())


_UNKNOWN_SECTION = "?"      # lines under a bad section header are skipped


class _LineError(Exception):
    """A syntax error at a column of the current line (caught per line)."""

    def __init__(self, message: str, column: int):
        super().__init__(message)
        self.message = message
        self.column = column


class _KeyErrors(Exception):
    """Errors in the KEY=VALUE part of a reaction line whose equation and law were read."""

    def __init__(self, errors: list[_LineError], reaction: Reaction):
        super().__init__(errors[0].message)
        self.errors = errors
        self.reaction = reaction


def _strip_comment(line: str) -> str:
    in_quote = False
    for i, ch in enumerate(line):
        if ch == '"':
            in_quote = not in_quote
        elif ch == "#" and not in_quote:
            return line[:i]
    return line


def _lex(line: str, start: int = 0, end: int | None = None) -> list[_Token]:
    end = len(line) if end is None else end
    tokens: list[_Token] = []
    pos = start
    while pos < end:
        m = _TOKEN.match(line, pos, end)
        if m is None or m.end() == pos:
            ch = line[pos]
            if ch == '"':
                raise _LineError('unterminated or misplaced quoted string: quotes belong to '
                                 'values such as ref="JPL 19-5"', pos + 1)
            raise _LineError(f"unexpected character {ch!r}", pos + 1)
        kind = "keyval" if m.group("keyval") is not None else m.lastgroup
        if kind == "keyval":
            val = m.group("val")
            vcol = m.start("val") + 1
            if m.end() < end and line[m.end()] == '"':
                raise _LineError(f"unterminated quoted string after {m.group('key')}=: "
                                 f"close it with a \"", m.end() + 1)
            if val.startswith('"'):
                val = val[1:-1]
            tokens.append(_Token("keyval", m.group(0), pos + 1, m.group("key"), val, vcol))
        elif kind != "ws":
            tokens.append(_Token(kind, m.group(0), pos + 1))
        pos = m.end()
    return tokens


def _suggest(word: str, options) -> str:
    hint = difflib.get_close_matches(word, list(options), n=1, cutoff=0.5)
    return f" - did you mean {hint[0]!r}?" if hint else ""


def _parse_number(text: str, what: str, column: int) -> float:
    try:
        return float(text)
    except ValueError:
        raise _LineError(f"{what}: {text!r} is not a number (write e.g. 1.2e-11)", column) from None


class _Cursor:
    def __init__(self, tokens: list[_Token], line_end_col: int):
        self.tokens = tokens
        self.i = 0
        self.end_col = line_end_col

    def peek(self, offset: int = 0) -> _Token | None:
        j = self.i + offset
        return self.tokens[j] if j < len(self.tokens) else None

    def take(self) -> _Token:
        tok = self.tokens[self.i]
        self.i += 1
        return tok

    def col(self) -> int:
        tok = self.peek()
        return tok.column if tok else self.end_col


def _parse_term(cur: _Cursor, what: str) -> tuple[float, _Token, str]:
    """[COEF [*]] NAME -> (coefficient, name token, text as written)."""
    tok = cur.peek()
    coef = 1.0
    first = tok
    if tok is not None and tok.kind == "number":
        coef = _parse_number(cur.take().text, "coefficient", tok.column)
        if cur.peek() is not None and cur.peek().kind == "star":
            cur.take()
        tok = cur.peek()
    if tok is None or tok.kind != "name":
        found = f"{tok.text!r}" if tok else "end of line"
        raise _LineError(f"expected a {what} name (optionally after a coefficient such as 2 or 0.5), "
                         f"found {found}", cur.col())
    cur.take()
    if not (math.isfinite(coef) and coef > 0):
        raise _LineError(f"stoichiometric coefficient must be a positive number, found {first.text!r}",
                         first.column)
    text = tok.text if first is tok else f"{_fmt(coef)} {tok.text}"
    return coef, tok, text


def _parse_weighted_sum(cur: _Cursor, what: str, between: str) -> dict[str, float]:
    """Read ``[COEF*]NAME + [COEF*]NAME ...`` to the end of the line; repeated names add up."""
    total: dict[str, float] = {}
    while True:
        coef, tok, _ = _parse_term(cur, what)
        total[tok.text] = total.get(tok.text, 0.0) + coef
        nxt = cur.peek()
        if nxt is None:
            return total
        if nxt.kind != "plus":
            raise _LineError(f"expected '+' between {between}, found {nxt.text!r}", nxt.column)
        cur.take()


def _fmt(x: float) -> str:
    return f"{x:g}"


@dataclass
class _Side:
    terms: list[tuple[float, _Token]]
    texts: list[str]


class _Reader:
    """Accumulates the contents of a mechanism and of every file it extends.

    ``stored`` (a sequence of MechanismFile, as a result file records them)
    makes ``extends`` lines read the stored texts instead of the disk, so a
    run can be repeated from its result file alone.
    """

    def __init__(self, stored=None):
        self.problems: list[Problem] = []
        self.species: dict[str, Species] = {}
        self.families: dict[str, tuple[Family, str | None]] = {}
        self.cycles: dict[str, Cycle] = {}
        self.reactions: dict[str, Reaction] = {}
        self.broken_species: set[str] = set()
        self.broken_ids: set[str] = set()
        self.texts: list[str] = []
        self.files: list[MechanismFile] = []
        self.changes: list[MechanismChange] = []
        self.stored = tuple(stored) if stored is not None else None
        self.stored_current = 0           # index in self.stored of the file being read
        self.current_file = -1            # index in self.files of the file being read
        #: files (indices) that have read their extends line: new reactions there are "added"
        self.extending: set[int] = set()
        self.stack: list[Path] = []
        #: a base (extends) could not be read: the mechanism is incomplete, so unknown names are
        #: follow-on errors of that one problem and are not reported
        self.include_failed = False
        #: reactions whose equation was read but whose keys had errors: their species are
        #: still checked, so that one line reports its independent problems together
        self.partial_reactions: list[Reaction] = []

    # -- problems ------------------------------------------------------------
    def error(self, message: str, loc: SourceLocation, column: int | None = None) -> None:
        if column is not None:
            loc = dc_replace(loc, column=column)
        self.problems.append(Problem(message, loc))

    # -- files -----------------------------------------------------------------
    def read_file(self, path: Path, include_loc: SourceLocation | None, reference: str = "") -> None:
        resolved = path.resolve()
        if resolved in self.stack:
            chain = " -> ".join(p.name for p in [*self.stack, resolved])
            self.problems.append(Problem(f"{EXTENDS_WORD} loop: {chain}", include_loc))
            self.include_failed = True
            return
        if len(self.stack) >= MAX_INCLUDE_DEPTH:
            chain = " -> ".join(p.name for p in [*self.stack[:3], Path("..."), *self.stack[-2:]])
            self.problems.append(Problem(
                f"extends chain deeper than {MAX_INCLUDE_DEPTH} files ({chain}); "
                f"build on fewer levels of files", include_loc))
            self.include_failed = True
            return
        try:
            text = read_text_file(path, MechanismError, "mechanism file")
        except MechanismError as exc:
            detail = exc.problems[0].message
            detail = detail[len(str(path)) + 1:].lstrip() if detail.startswith(f"{path}:") else detail
            msg = f"cannot read mechanism file {str(path)!r}: {detail}"
            self.problems.append(Problem(msg, include_loc))
            self.include_failed = include_loc is not None
            return
        self.stack.append(resolved)
        try:
            self.read_text(text, str(path), path.parent, reference)
        finally:
            self.stack.pop()

    def read_text(self, text: str, source: str, base_dir: Path, reference: str = "") -> None:
        outer_dir = getattr(self, "base_dir", None)
        outer_file = self.current_file
        self.base_dir = base_dir      # data=/qy= file paths are relative to this file's folder
        self.files.append(MechanismFile(source, text, outer_file, reference))
        self.current_file = len(self.files) - 1
        try:
            self._read_lines(text, source, base_dir)
        finally:
            self.base_dir = outer_dir
            self.current_file = outer_file

    def _read_lines(self, text: str, source: str, base_dir: Path) -> None:
        self.texts.append(text)
        section: str | None = None
        # lines end at \n, \r\n or \r only (form feed, U+2028 ... are not line breaks)
        for lineno, raw in enumerate(split_lines(strip_bom(text)), start=1):
            line = _strip_comment(raw).rstrip()
            if not line.strip():
                continue
            col0 = len(line) - len(line.lstrip()) + 1
            loc = SourceLocation(source, lineno, col0, raw.replace("\t", " "))
            # tabs are shown as spaces so that the caret lines up
            line = line.replace("\t", " ")
            try:
                stripped = line.strip()
                if stripped.startswith("["):
                    section = _UNKNOWN_SECTION      # until the header is read
                    section = self._section(stripped, col0)
                elif section == _UNKNOWN_SECTION:
                    self._skip_line(line)
                elif re.match(r"include(\s|\"|\Z)", stripped):
                    self.include_failed = True      # its names are unknown: no follow-on errors
                    raise _LineError(_old_include_message(stripped), col0)
                elif re.match(rf"{EXTENDS_WORD}(\s|\"|=|\Z)", stripped):
                    if section is not None:
                        raise _LineError(f"the {EXTENDS_WORD} line must come before the first "
                                         f"section", col0)
                    self._extends(line, loc, base_dir)
                elif section is None:
                    raise _LineError("expected a section header such as [species] or [reactions] "
                                     f"(or an {EXTENDS_WORD} \"base.mech\" line) before this line",
                                     col0)
                else:
                    getattr(self, f"_line_{section.replace(' ', '_')}")(line, loc)
            except _LineError as exc:
                self.error(exc.message, loc, exc.column)

    # -- sections ----------------------------------------------------------------
    def _skip_line(self, line: str) -> None:
        """A line under a bad section header: already reported once, so skipped silently.

        Its first word may name a species or reaction that other lines use; those
        names raise no follow-on "unknown ..." errors.
        """
        word = line.split(None, 1)[0]
        if _NAME.match(word):
            self.broken_species.add(word)
            self.broken_ids.add(word)

    def _section(self, stripped: str, col0: int) -> str | None:
        m = re.fullmatch(r"\[\s*([A-Za-z_]*(?:\s+[A-Za-z_]+)*)\s*\]", stripped)
        if m is None:
            raise _LineError("a section header is a name in brackets, e.g. [reactions]", col0)
        name = " ".join(m.group(1).split())
        if name in _OLD_SECTIONS:
            raise _LineError(f"[{name}] is the old spelling of this section: write "
                             f"[{_OLD_SECTIONS[name]}] (see docs/mechanism-language.md, "
                             f"\"Building on a mechanism\")", col0 + 1)
        if name not in SECTIONS:
            raise _LineError(f"unknown section [{name}]{_suggest(name, SECTIONS)}; valid sections: "
                             f"{', '.join(f'[{s}]' for s in SECTIONS)}", col0 + 1)
        return name

    def _extends(self, line: str, loc: SourceLocation, base_dir: Path) -> None:
        """``extends "NAME_OR_PATH"`` (or ``extends NAME``): read the base mechanism first."""
        # 'extends = "x"', as scenarios write it, reads the same
        m = re.fullmatch(rf'(\s*){EXTENDS_WORD}(?:\s*=\s*|\s+)(?:"([^"]+)"|([^\s"=]+))\s*', line)
        if m is None:
            raise _LineError(f'an {EXTENDS_WORD} line reads: {EXTENDS_WORD} "stratosphere" '
                             f'(a shipped name) or {EXTENDS_WORD} "relative/path.mech"', loc.column)
        if self.current_file in self.extending:
            raise _LineError(f"a mechanism {EXTENDS_WORD} one base (which may itself extend "
                             f"another); this file already has an {EXTENDS_WORD} line", loc.column)
        self.extending.add(self.current_file)
        reference = m.group(2) or m.group(3)
        col = m.start(2) + 1 if m.group(2) else m.start(3) + 1
        if self.stored is not None:
            self._extends_stored(reference, dc_replace(loc, column=col))
            return
        from ..resources import resolve
        try:
            path = resolve(reference, "mechanisms", relative_to=base_dir)
        except BoxchemError as exc:
            self.include_failed = True
            raise _LineError(f"{EXTENDS_WORD}: {exc} (names it would define are not checked "
                             f"until it is found)", col) from None
        self.read_file(path, dc_replace(loc, column=col), reference)

    def _extends_stored(self, reference: str, loc: SourceLocation) -> None:
        """The base named by ``reference`` from the stored files (a re-run of a result file)."""
        for index, f in enumerate(self.stored):
            if f.parent == self.stored_current and f.reference == reference:
                outer, self.stored_current = self.stored_current, index
                try:
                    self.read_text(f.text, f.path, Path(f.path).parent, reference)
                finally:
                    self.stored_current = outer
                return
        self.include_failed = True
        raise _LineError(f"{EXTENDS_WORD} {reference!r}: the stored mechanism holds no such file",
                         loc.column)

    def _line_species(self, line: str, loc: SourceLocation) -> None:
        name_tok, rest = self._head_word(line, loc, "species")
        name = name_tok.text
        if name in RESERVED:
            raise _LineError(f"{name!r} is a reserved word of the mechanism language and cannot name "
                             f"a species", name_tok.column)
        if name in self.species or name in self.broken_species:
            first = self.species.get(name)
            where = f" (first declared at {first.location})" if first and first.location else ""
            raise _LineError(f"species {name!r} is declared twice{where}", name_tok.column)
        self.broken_species.add(name)  # until it is fully read
        cur = _Cursor(rest, len(line) + 1)
        formula_text = None
        formula_col = name_tok.column
        fixed = lumped = False
        mole_fraction = None
        while cur.peek() is not None:
            tok = cur.take()
            if tok.kind == "keyval" and tok.key == "formula":
                formula_text, formula_col = tok.value, tok.value_column
            elif tok.kind == "name" and tok.text == "fixed":
                fixed = True
                if cur.peek() is not None and cur.peek().kind == "number":
                    num = cur.take()
                    mole_fraction = _parse_number(num.text, "mole fraction", num.column)
            elif tok.kind == "name" and tok.text == "lumped":
                lumped = True
            else:
                what = tok.key + "=" if tok.kind == "keyval" else tok.text
                raise _LineError(f"unknown species option {what!r}; valid options: formula=FORMULA, "
                                 f"fixed [MOLE_FRACTION], lumped", tok.column)
        if lumped and formula_text is not None:
            raise _LineError(f"species {name!r} is marked lumped and also given a formula; use one",
                             formula_col)
        if name == "M":
            if not fixed or formula_text is not None or lumped or mole_fraction is not None:
                raise _LineError("M is the third body (the air number density): declare it as "
                                 "'M fixed' with no formula or mole fraction", name_tok.column)
            formula = None
        elif lumped:
            formula = None
        else:
            text = formula_text if formula_text is not None else name
            try:
                formula = parse_formula(text)
            except FormulaError as exc:
                if formula_text is None:
                    raise _LineError(f"species name {name!r} is not a chemical formula ({exc}); give "
                                     f"formula=... (e.g. formula=O for O1D) or mark it lumped",
                                     name_tok.column) from None
                raise _LineError(f"formula={formula_text}: {exc}", formula_col) from None
        self.broken_species.discard(name)
        self.species[name] = Species(
            name=name,
            formula=MappingProxyType(formula) if formula is not None else None,
            fixed=fixed, mole_fraction=mole_fraction, lumped=lumped,
            molar_mass=molar_mass(formula) if formula else None,
            location=dc_replace(loc, column=name_tok.column))

    def _head_word(self, line: str, loc: SourceLocation, what: str) -> tuple[_Token, list[_Token]]:
        m = re.match(r"\s*(\S+)", line)
        word, col = m.group(1), m.start(1) + 1
        # a name ends at the first character that is not a letter, digit or '_'
        nm = re.match(r"[A-Za-z][A-Za-z0-9_]*", word)
        if nm is None or nm.end() != len(word):
            bad = col + (nm.end() if nm else 0)
            raise _LineError(f"a {what} name starts with a letter and holds only letters, digits "
                             f"and '_', found {word!r}", bad)
        return _Token("name", word, col), _lex(line, m.end())

    def _line_families(self, line: str, loc: SourceLocation) -> None:
        eq = line.find("=")
        if eq < 0:
            raise _LineError("a family reads NAME = SPECIES + SPECIES ... or NAME = atoms(ELEMENT)",
                             loc.column)
        lhs = _lex(line, 0, eq)
        if len(lhs) != 1 or lhs[0].kind != "name":
            raise _LineError("expected one family name before '='", lhs[0].column if lhs else loc.column)
        name = lhs[0].text
        if name in self.families:
            raise _LineError(f"family {name!r} is defined twice", lhs[0].column)
        rhs_text = line[eq + 1:]
        m = re.fullmatch(r"\s*atoms\s*\(\s*([A-Za-z]+)\s*\)\s*", rhs_text)
        floc = dc_replace(loc, column=lhs[0].column)
        if m:
            self.families[name] = (Family(name, MappingProxyType({}), m.group(1), floc),
                                   m.group(1))
            return
        cur = _Cursor(_lex(line, eq + 1), len(line) + 1)
        members = _parse_weighted_sum(cur, "species", "family members")
        self.families[name] = (Family(name, MappingProxyType(members), None, floc), None)

    def _line_cycles(self, line: str, loc: SourceLocation) -> None:
        eq = line.find("=")
        lhs = _lex(line, 0, eq if eq >= 0 else len(line))
        kinds = [t.kind for t in lhs]
        if eq < 0 or kinds != ["name", "name", "name"] or lhs[1].text != "destroys":
            raise _LineError("a cycle reads NAME destroys FAMILY = COEF*REACTION_ID + ...",
                             lhs[0].column if lhs else loc.column)
        name, family = lhs[0].text, lhs[2].text
        if name in self.cycles:
            raise _LineError(f"cycle {name!r} is defined twice", lhs[0].column)
        cur = _Cursor(_lex(line, eq + 1), len(line) + 1)
        terms = _parse_weighted_sum(cur, "reaction id", "cycle terms")
        self.cycles[name] = Cycle(name, family, MappingProxyType(terms),
                                  dc_replace(loc, column=lhs[0].column))

    def _line_reactions(self, line: str, loc: SourceLocation) -> None:
        self._reaction(line, loc, replace=False)

    def _line_changed_reactions(self, line: str, loc: SourceLocation) -> None:
        self._reaction(line, loc, replace=True)

    def _line_dropped_reactions(self, line: str, loc: SourceLocation) -> None:
        for m in re.finditer(r"\S+", line):
            rid = m.group(0)
            if rid in self.reactions:
                old = self.reactions.pop(rid)
                self.changes.append(MechanismChange("dropped", rid, dc_replace(loc, column=m.start() + 1),
                                                    before=old.definition, base_location=old.location))
            elif rid in self.broken_ids or self.include_failed:
                continue
            else:
                self.error(f"[dropped reactions]: no reaction with id {rid!r}"
                           f"{_suggest(rid, self.reactions)}", loc, m.start() + 1)

    def _reaction(self, line: str, loc: SourceLocation, replace: bool) -> None:
        m = re.match(r"\s*(\S+)", line)
        rid, id_col = m.group(1), m.start(1) + 1
        if not _NAME.match(rid):
            raise _LineError(f"a reaction id starts with a letter and holds only letters, digits and "
                             f"'_', found {rid!r}", id_col)
        try:
            reaction = self._reaction_body(line, m.end(), rid, dc_replace(loc, column=id_col))
        except _KeyErrors as exc:
            self.broken_ids.add(rid)
            self.partial_reactions.append(exc.reaction)
            for e in exc.errors:
                self.error(e.message, loc, e.column)
            return
        except _LineError:
            self.broken_ids.add(rid)
            raise
        if replace:
            if rid not in self.reactions:
                if rid in self.broken_ids or self.include_failed:
                    return
                raise _LineError(f"[changed reactions]: no reaction with id {rid!r} to change"
                                 f"{_suggest(rid, self.reactions)}; new reactions go in [reactions]",
                                 id_col)
            old = self.reactions[rid]
            self.changes.append(MechanismChange("changed", rid, reaction.location, before=old.definition,
                                                after=reaction.definition, base_location=old.location))
            self.reactions[rid] = reaction
        else:
            if rid in self.reactions:
                first = self.reactions[rid].location
                raise _LineError(f"duplicate reaction id {rid!r} (first defined at {first}); "
                                 f"change a reaction of the base mechanism in [changed reactions]",
                                 id_col)
            if self.current_file in self.extending:
                self.changes.append(MechanismChange("added", rid, reaction.location,
                                                    after=reaction.definition))
            self.reactions[rid] = reaction

    def _reaction_body(self, line: str, start: int, rid: str, loc: SourceLocation) -> Reaction:
        cur = _Cursor(_lex(line, start), len(line) + 1)
        left = self._side(cur, left=True)
        if cur.peek() is None or cur.peek().kind != "arrow":
            raise _LineError("expected '->' between reactants and products", cur.col())
        cur.take()
        nxt = cur.peek()
        if nxt is not None and nxt.kind == "name" and nxt.text in RATE_LAWS:
            right = _Side([], [])
        else:
            right = self._side(cur, left=False)
        law_tok = cur.peek()
        if law_tok is None or law_tok.kind != "name":
            found = repr(law_tok.text) if law_tok else "end of line"
            raise _LineError(f"expected a rate law after the equation ({', '.join(RATE_LAWS)}), "
                             f"found {found}", cur.col())
        cur.take()
        law = law_tok.text
        if law not in RATE_LAWS:
            raise _LineError(f"unknown rate law {law!r}{_suggest(law, RATE_LAWS)}; valid laws: "
                             f"{', '.join(RATE_LAWS)}", law_tok.column)
        spec = LAW_KEYS[law]
        allowed = (*spec["required"], *spec["defaults"], *spec.get("optional", ()), *COMMON_KEYS)
        params: dict[str, float | str] = {}
        common: dict[str, float | str] = {}
        unbalanced = False
        key_errors: list[_LineError] = []     # independent of each other: all are reported
        written = [law_tok.text]              # the definition as written, spacing normalised
        while cur.peek() is not None:
            tok = cur.take()
            written.append(tok.text)
            if tok.kind == "name" and tok.text == "unbalanced":
                unbalanced = True
                continue
            try:
                self._key(tok, law, allowed, params, common)
            except _LineError as exc:
                key_errors.append(exc)

        third_body = any(t.text == "M" for _, t in left.terms)
        photolysis = any(t.text == "hv" for _, t in left.terms)
        reactants = _merge(left.terms)
        products = _merge(right.terms)
        equation = f"{' + '.join(left.texts)} -> {' + '.join(right.texts)}".rstrip()

        def build() -> Reaction:
            return Reaction(
                id=rid, reactants=reactants, products=products, law=law,
                parameters=MappingProxyType(params), third_body=third_body, photolysis=photolysis,
                f298=common.get("f298"), g=common.get("g"), ref=str(common.get("ref", "")),
                unbalanced=unbalanced, equation=equation, location=loc,
                definition=" ".join(written))

        if key_errors:
            # a missing required key is not reported: it may be the one written wrongly
            raise _KeyErrors(key_errors, build())
        missing = [k for k in spec["required"] if k not in params]
        if missing:
            raise _LineError(f"{law} needs {', '.join(k + '=' for k in missing)} "
                             f"(all of: {', '.join(k + '=' for k in spec['required'])})", cur.end_col)
        if law == "photolysis":
            lmn = [k for k in ("l", "m", "n") if k in params]
            if 0 < len(lmn) < 3:
                raise _LineError("the parametric photolysis form needs all three of l=, m=, n=",
                                 law_tok.column)
            if "data" not in params and not lmn:
                raise _LineError("photolysis needs data=NAME (cross-section data set) or the "
                                 "parametric form l= m= n=", law_tok.column)
        if law == "uptake" and ("gamma_from" in params) == ("gamma_table" in params):
            raise _LineError("uptake needs exactly one of gamma_from=NAME (a parameterization) or "
                             "gamma_table=\"T:gamma T:gamma ...\" (K and reaction probability)",
                             law_tok.column)
        for key, default in spec["defaults"].items():
            params.setdefault(key, default)
        return build()

    def _key(self, tok: _Token, law: str, allowed: tuple[str, ...], params: dict, common: dict) -> None:
        """Store one KEY=VALUE token of a reaction line in ``params`` or ``common``."""
        if tok.kind != "keyval":
            raise _LineError(f"expected KEY=VALUE parameters of {law} after the law, found "
                             f"{tok.text!r}; {law} takes: {', '.join(k + '=' for k in allowed)}",
                             tok.column)
        key, value = tok.key, tok.value
        if key not in allowed:
            raise _LineError(f"{law} takes no key {key!r}{_suggest(key, allowed)}; valid keys: "
                             f"{', '.join(allowed)}", tok.column)
        if key in params or key in common:
            raise _LineError(f"key {key!r} is given twice", tok.column)
        if key == "ref":
            common[key] = value
        elif key in STRING_KEYS:
            if not value:
                raise _LineError(f"{key}= needs a value", tok.value_column)
            params[key] = _relative_data_path(value, self.base_dir) if key == "data" else value
        elif key == "qy":
            try:
                params[key] = float(value)
            except ValueError:
                params[key] = _relative_data_path(value, self.base_dir)  # a data set name or path
            if value == "":
                raise _LineError("qy= needs a number or a data set name", tok.value_column)
        else:
            target = common if key in COMMON_KEYS else params
            target[key] = _parse_number(value, f"{key}=", tok.value_column)

    def _side(self, cur: _Cursor, left: bool) -> _Side:
        side = _Side([], [])
        has_m = False
        while True:
            start = cur.peek()
            coef, tok, text = _parse_term(cur, "species")
            if tok.text in ("M", "hv"):
                if start is not tok:
                    raise _LineError(f"{tok.text} takes no coefficient", start.column)
                if tok.text == "hv" and not left:
                    raise _LineError("hv can only stand on the left (photolysis)", tok.column)
                if tok.text == "M":
                    if has_m:
                        raise _LineError("M is written twice on one side", tok.column)
                    has_m = True
            side.terms.append((coef, tok))
            side.texts.append(text)
            nxt = cur.peek()
            if nxt is None or nxt.kind != "plus":
                return side
            cur.take()


def _merge(terms: list[tuple[float, _Token]]) -> tuple[Term, ...]:
    merged: dict[str, float] = {}
    for coef, tok in terms:
        if tok.text in ("M", "hv"):
            continue
        merged[tok.text] = merged.get(tok.text, 0.0) + coef
    return tuple(Term(name, coef) for name, coef in merged.items())


def _finish(reader: _Reader, source: str, strict: bool) -> Mechanism:
    """Resolve atoms() families and reverse reactions, validate, raise or return."""
    from .validate import validate_mechanism

    families = []
    for fam, element in reader.families.values():
        if element is not None:
            members = {s.name: float(s.atoms(element)) for s in reader.species.values()
                       if s.atoms(element) > 0}
            fam = dc_replace(fam, members=MappingProxyType(members))
        families.append(fam)
    reactions = []
    for r in reader.reactions.values():
        if r.law == "reverse":
            fwd = reader.reactions.get(str(r.parameters.get("of")))
            if fwd is not None:
                params = dict(r.parameters)
                params["_of_law"] = fwd.law
                r = dc_replace(r, parameters=MappingProxyType(params))
        reactions.append(r)
    mech = Mechanism(species=tuple(reader.species.values()), reactions=tuple(reactions),
                     families=tuple(families), cycles=tuple(reader.cycles.values()),
                     source=source, text="".join(reader.texts), files=tuple(reader.files),
                     changes=tuple(reader.changes))
    if reader.include_failed:
        found = []      # names from the missing file would all be reported as unknown
    else:
        found = validate_mechanism(mech, ignore_species=frozenset(reader.broken_species),
                                   ignore_reactions=frozenset(reader.broken_ids),
                                   names_only=tuple(reader.partial_reactions))
        # data=/qy= files: missing ones are errors, partial spectra are reported
        from ..photolysis.datacheck import photolysis_file_problems
        found += photolysis_file_problems(mech)
    errors = [p for p in reader.problems + found if p.severity == "error"]
    warnings = [p for p in found if p.severity == "warning"]
    if strict:
        errors += [dc_replace(w, severity="error", message=f"{w.message} (error under strict)")
                   for w in warnings]
        warnings = []
    if errors:
        raise MechanismError(_in_file_order(errors))
    return dc_replace(mech, warnings=tuple(warnings))


def _in_file_order(problems: list[Problem]) -> list[Problem]:
    """Problems by file (in order of first mention), line and column; unlocated ones last."""
    files: dict[str, int] = {}
    for p in problems:
        if p.location is not None:
            files.setdefault(p.location.file, len(files))

    def key(p: Problem) -> tuple:
        loc = p.location
        return (len(files), 0, 0) if loc is None else (files[loc.file], loc.line, loc.column)
    return sorted(problems, key=key)


def parse_mechanism(text: str, source: str = "<string>", *, base_dir: str | Path | None = None,
                    strict: bool = False) -> Mechanism:
    """Read mechanism text; ``extends`` paths are read relative to ``base_dir`` (default cwd).

    Raises MechanismError with every problem found (warnings too when ``strict``).
    """
    reader = _Reader()
    reader.read_text(text, source, Path(base_dir) if base_dir is not None else Path.cwd())
    return _finish(reader, source, strict)


def parse_stored_mechanism(files, *, strict: bool = False) -> Mechanism:
    """Read a mechanism from stored files (``Mechanism.files``, as a result file records them).

    ``files[0]`` is the top-level file; its ``extends`` lines are answered from
    ``files`` (by parent index and the name as written), never from the disk,
    so the mechanism is the one that ran even if the files were edited since.
    """
    files = tuple(files)
    if not files:
        raise MechanismError("no stored mechanism files")
    reader = _Reader(stored=files)
    top = files[0]
    reader.read_text(top.text, top.path, Path(top.path).parent)
    return _finish(reader, top.path, strict)


def load_mechanism(name_or_path: str | Path, *, strict: bool = False) -> Mechanism:
    """Read a mechanism file by path, or a shipped mechanism by bare name (``"stratosphere"``)."""
    from ..resources import resolve
    try:
        path = resolve(name_or_path, "mechanisms")
    except BoxchemError as exc:
        raise MechanismError(str(exc)) from None
    reader = _Reader()
    reader.read_file(path, None)
    return _finish(reader, str(path), strict)


def _old_include_message(stripped: str) -> str:
    """The error for an ``include`` line: what to write instead, with the file it named."""
    m = re.match(r'include\s+"([^"]*)"', stripped) or re.match(r"include\s+(\S+)", stripped)
    name = m.group(1) if m else "stratosphere"
    return (f"'include' is the old spelling: a mechanism builds on another with one line "
            f'before the first section, {EXTENDS_WORD} "{name}" (see docs/mechanism-language.md, '
            f'"Building on a mechanism")')
