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
from .model import RATE_LAWS, Cycle, Family, Mechanism, Reaction, Species, Term

__all__ = ["parse_mechanism", "load_mechanism", "LAW_KEYS", "SECTIONS"]

SECTIONS = ("species", "families", "reactions", "cycles", "replace", "remove")

#: keys each law takes: required keys, and defaults the parser stores explicitly
LAW_KEYS: dict[str, dict[str, object]] = {
    "constant": {"required": ("k",), "defaults": {}},
    "arrhenius": {"required": ("A",), "defaults": {"E/R": 0.0, "n": 0.0, "Tref": 300.0}},
    "falloff": {"required": ("k0", "n", "kinf", "m"), "defaults": {"Fc": 0.6, "Tref": 300.0}},
    "chemact": {"required": ("k0", "n", "kinf", "m"), "defaults": {"Fc": 0.6, "Tref": 300.0}},
    "reverse": {"required": ("of", "K", "B"), "defaults": {}},
    "photolysis": {"required": (), "defaults": {"qy": 1.0, "scale": 1.0},
                   "optional": ("data", "l", "m", "n")},
    "surface": {"required": ("gamma", "on"), "defaults": {}},
    # gamma from a named parameterization (gamma_from=) or a table in T (gamma_table=)
    "uptake": {"required": ("on",), "defaults": {"scale": 1.0, "radius_um": 0.1},
               "optional": ("gamma_from", "gamma_table")},
}
#: keys whose values are text, not numbers
STRING_KEYS = frozenset({"of", "data", "on", "gamma_from", "gamma_table"})
#: keys every reaction may carry (stored on the Reaction, not in parameters)
COMMON_KEYS = ("f298", "g", "ref")
#: words that cannot name a species
RESERVED = frozenset({"hv", *RATE_LAWS, "include", "atoms", "destroys"})

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
    folder of the mechanism file that says it, like ``include`` paths, so that
    a ``[replace]`` line in a user's file finds the user's lab spectrum from
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
    """Accumulates the contents of a mechanism and of every file it includes."""

    def __init__(self):
        self.problems: list[Problem] = []
        self.species: dict[str, Species] = {}
        self.families: dict[str, tuple[Family, str | None]] = {}
        self.cycles: dict[str, Cycle] = {}
        self.reactions: dict[str, Reaction] = {}
        self.broken_species: set[str] = set()
        self.broken_ids: set[str] = set()
        self.texts: list[str] = []
        self.stack: list[Path] = []
        #: an include could not be read: the mechanism is incomplete, so unknown names are
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
    def read_file(self, path: Path, include_loc: SourceLocation | None) -> None:
        resolved = path.resolve()
        if resolved in self.stack:
            chain = " -> ".join(p.name for p in [*self.stack, resolved])
            self.problems.append(Problem(f"include loop: {chain}", include_loc))
            self.include_failed = True
            return
        try:
            text = path.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            msg = f"cannot read mechanism file {str(path)!r}: {exc}"
            self.problems.append(Problem(msg, include_loc))
            self.include_failed = include_loc is not None
            return
        self.stack.append(resolved)
        try:
            self.read_text(text, str(path), path.parent)
        finally:
            self.stack.pop()

    def read_text(self, text: str, source: str, base_dir: Path) -> None:
        outer_dir = getattr(self, "base_dir", None)
        self.base_dir = base_dir      # data=/qy= file paths are relative to this file's folder
        try:
            self._read_lines(text, source, base_dir)
        finally:
            self.base_dir = outer_dir

    def _read_lines(self, text: str, source: str, base_dir: Path) -> None:
        self.texts.append(text)
        section: str | None = None
        for lineno, raw in enumerate(text.splitlines(), start=1):
            raw = raw.rstrip("\r\n")
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
                elif stripped.startswith("include") and re.match(r"include(\s|\"|\Z)", stripped):
                    if section is not None:
                        raise _LineError("include lines must come before the first section", col0)
                    self._include(line, loc, base_dir)
                elif section is None:
                    raise _LineError("expected a section header such as [species] or [reactions] "
                                     "(or an include \"file.mech\" line) before this line", col0)
                else:
                    getattr(self, f"_line_{section}")(line, loc)
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
        m = re.fullmatch(r"\[\s*([A-Za-z_]*)\s*\]", stripped)
        if m is None:
            raise _LineError("a section header is a name in brackets, e.g. [reactions]", col0)
        name = m.group(1)
        if name not in SECTIONS:
            raise _LineError(f"unknown section [{name}]{_suggest(name, SECTIONS)}; valid sections: "
                             f"{', '.join(f'[{s}]' for s in SECTIONS)}", col0 + 1)
        return name

    def _include(self, line: str, loc: SourceLocation, base_dir: Path) -> None:
        m = re.fullmatch(r'(\s*)include\s+"([^"]+)"\s*', line)
        if m is None:
            raise _LineError('an include line reads: include "relative/path.mech"', loc.column)
        from ..resources import resolve
        try:
            path = resolve(m.group(2), "mechanisms", relative_to=base_dir)
        except BoxchemError as exc:
            self.include_failed = True
            raise _LineError(f"include: {exc} (names it would define are not checked until it "
                             f"is found)", line.index('"') + 2) from None
        self.read_file(path, dc_replace(loc, column=line.index('"') + 2))

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

    def _line_replace(self, line: str, loc: SourceLocation) -> None:
        self._reaction(line, loc, replace=True)

    def _line_remove(self, line: str, loc: SourceLocation) -> None:
        for m in re.finditer(r"\S+", line):
            rid = m.group(0)
            if rid in self.reactions:
                del self.reactions[rid]
            elif rid in self.broken_ids or self.include_failed:
                continue
            else:
                self.error(f"[remove]: no reaction with id {rid!r}"
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
                raise _LineError(f"[replace]: no reaction with id {rid!r} to replace"
                                 f"{_suggest(rid, self.reactions)}; new reactions go in [reactions]",
                                 id_col)
            self.reactions[rid] = reaction
        else:
            if rid in self.reactions:
                first = self.reactions[rid].location
                raise _LineError(f"duplicate reaction id {rid!r} (first defined at {first}); "
                                 f"use [replace] to change a reaction", id_col)
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
        while cur.peek() is not None:
            tok = cur.take()
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
                unbalanced=unbalanced, equation=equation, location=loc)

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
                     source=source, text="".join(reader.texts))
    if reader.include_failed:
        found = []      # names from the missing file would all be reported as unknown
    else:
        found = validate_mechanism(mech, ignore_species=frozenset(reader.broken_species),
                                   ignore_reactions=frozenset(reader.broken_ids),
                                   names_only=tuple(reader.partial_reactions))
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
    """Read mechanism text; ``include`` paths are read relative to ``base_dir`` (default cwd).

    Raises MechanismError with every problem found (warnings too when ``strict``).
    """
    reader = _Reader()
    reader.read_text(text, source, Path(base_dir) if base_dir is not None else Path.cwd())
    return _finish(reader, source, strict)


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
