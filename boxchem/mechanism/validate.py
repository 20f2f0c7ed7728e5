"""Checks on an assembled mechanism: names, balance, parameters, warnings.

:func:`validate_mechanism` returns every finding as a :class:`Problem`
(severity ``"error"`` or ``"warning"``) with the file, line and the column of
the offending word, so that the parser can raise them together.
"""
from __future__ import annotations

import difflib
import math
import re
from collections import Counter
from dataclasses import replace as dc_replace
from typing import Iterable

from ..errors import Problem, SourceLocation
from .formula import is_element
from .model import SURFACE_LAWS, Mechanism, Reaction

__all__ = ["validate_mechanism", "SURFACE_TARGETS"]

#: values of the surface law's ``on=`` key
#: ("all" = psc + sulfate + ice, the sum of the three areas)
SURFACE_TARGETS = ("psc", "sulfate", "ice", "all")

# (key, lower bound, lower bound inclusive, upper bound or None, what is valid)
_BOUNDS = {
    "k": (0.0, True, None, "k >= 0"),
    "A": (0.0, True, None, "A >= 0 (a negative pre-exponential factor has no meaning)"),
    "k0": (0.0, False, None, "k0 > 0"),
    "kinf": (0.0, False, None, "kinf > 0"),
    "Fc": (0.0, False, 1.0, "0 < Fc <= 1"),
    "Tref": (0.0, False, None, "Tref > 0 K"),
    "K": (0.0, False, None, "K > 0"),
    "gamma": (0.0, False, 1.0, "0 < gamma <= 1 (a reaction probability)"),
    "scale": (0.0, True, None, "scale >= 0"),
    "l": (0.0, True, None, "l >= 0 s-1"),
    "qy": (0.0, True, None, "qy >= 0"),
}


def _suggest(word: str, options: Iterable[str]) -> str:
    hint = difflib.get_close_matches(word, list(options), n=1, cutoff=0.5)
    return f" - did you mean {hint[0]!r}?" if hint else ""


def _at(loc: SourceLocation | None, word: str | None = None, *, suffix: str = "") -> SourceLocation | None:
    """Location of ``word`` (a whole word, optionally followed by ``suffix``) in the line."""
    if loc is None or not word or not loc.text:
        return loc
    pattern = r"(?<![A-Za-z0-9_/])" + re.escape(word) + (re.escape(suffix) if suffix else r"(?![A-Za-z0-9_])")
    # search after the item's own name so that e.g. a reaction id equal to a species is skipped
    start = max(loc.column, 1) - 1
    first = re.match(r"\S+", loc.text[start:])
    offset = start + (first.end() if first else 0)
    m = re.search(pattern, loc.text[offset:])
    if m is None:
        m = re.search(pattern, loc.text)
        return loc if m is None else dc_replace(loc, column=m.start() + 1)
    return dc_replace(loc, column=offset + m.start() + 1)


def validate_mechanism(mechanism: Mechanism, *, ignore_species: frozenset = frozenset(),
                       ignore_reactions: frozenset = frozenset(),
                       names_only: tuple[Reaction, ...] = ()) -> list[Problem]:
    """All errors and warnings of a mechanism, in file order of the items.

    ``ignore_species`` / ``ignore_reactions`` are names whose definitions
    already failed to parse; references to them raise no follow-on errors.
    ``names_only`` are reactions left out of the mechanism because their
    parameters had errors: only their species names are checked, so that a
    line with an unknown key and an unknown species reports both.
    """
    out: list[Problem] = []

    def err(msg: str, loc, severity: str = "error") -> None:
        out.append(Problem(msg, loc, severity))

    species = {s.name: s for s in mechanism.species}
    known = set(species) | {"M"} | set(ignore_species)

    for s in mechanism.species:
        if s.mole_fraction is not None and not (math.isfinite(s.mole_fraction) and 0 < s.mole_fraction <= 1):
            err(f"species {s.name!r}: fixed mole fraction must be in (0, 1], found {s.mole_fraction:g}",
                _at(s.location, "fixed"))

    reactions = {r.id: r for r in mechanism.reactions}
    for r in names_only:
        _check_species_names(r, species, known, err)
    for r in mechanism.reactions:
        _check_reaction(r, species, known, reactions, ignore_reactions, err)

    _check_duplicates(mechanism.reactions, err)
    _check_production_and_loss(mechanism, err)

    families = {f.name for f in mechanism.families}
    for f in mechanism.families:
        if f.element is not None:
            if not is_element(f.element):
                err(f"family {f.name!r}: {f.element!r} is not an element symbol", _at(f.location, f.element))
            elif not f.members:
                err(f"family {f.name!r}: no species contains {f.element}", f.location, "warning")
            continue
        for name, weight in f.members.items():
            if name not in known:
                err(f"family {f.name!r}: unknown species {name!r}{_suggest(name, species)}",
                    _at(f.location, name))
            if not math.isfinite(weight):
                err(f"family {f.name!r}: weight of {name!r} is not a finite number", _at(f.location, name))

    for c in mechanism.cycles:
        if c.family not in families:
            err(f"cycle {c.name!r}: unknown family {c.family!r}{_suggest(c.family, families)}",
                _at(c.location, c.family))
        for rid, coef in c.terms.items():
            if rid not in reactions and rid not in ignore_reactions:
                err(f"cycle {c.name!r}: unknown reaction {rid!r}{_suggest(rid, reactions)}",
                    _at(c.location, rid))
            if not math.isfinite(coef):
                err(f"cycle {c.name!r}: coefficient of {rid!r} is not a finite number", _at(c.location, rid))
    return out


def _check_species_names(r: Reaction, species, known, err) -> bool:
    """Report every unknown species of a reaction; True if there was one."""
    unknown = False
    for name in dict.fromkeys(t.species for t in (*r.reactants, *r.products)):
        if name not in known:
            unknown = True
            err(f"reaction {r.id!r}: unknown species {name!r}{_suggest(name, species)}",
                _at(r.location, name))
    return unknown


def _check_reaction(r: Reaction, species, known, reactions, ignore_reactions, err) -> None:
    loc = r.location
    unknown = _check_species_names(r, species, known, err)
    if not r.third_body and _m_on_right(r):
        err(f"reaction {r.id!r}: M on the right needs M on the left (a third-body reaction)",
            _at(loc, "M"))

    # law-specific structure
    if r.law == "photolysis" and not r.photolysis:
        err(f"reaction {r.id!r}: a photolysis reaction needs hv on the left, e.g. 'O3 + hv -> O + O2'",
            _at(loc, "photolysis"))
    if r.photolysis and r.law != "photolysis":
        err(f"reaction {r.id!r}: hv on the left needs the photolysis law, found {r.law!r}", _at(loc, r.law))
    if r.law == "photolysis" and r.photolysis and (len(r.reactants) != 1 or r.reactants[0].coefficient != 1):
        err(f"reaction {r.id!r}: photolysis takes exactly one molecule besides hv", _at(loc, "hv"))
    if r.law in SURFACE_LAWS:
        on = r.parameters.get("on")
        if on not in SURFACE_TARGETS:
            err(f"reaction {r.id!r}: on={on} is not a surface; valid: on=psc, on=sulfate, on=ice, on=all",
                _at(loc, "on", suffix="="))
        if r.reactants:
            first = species.get(r.reactants[0].species)
            if first is not None and first.molar_mass is None:
                err(f"reaction {r.id!r}: surface uptake needs the molar mass of {first.name!r}, which "
                    f"has no formula (give it formula=...)", _at(loc, first.name))
        if r.third_body:
            err(f"reaction {r.id!r}: a surface reaction takes no third body M", _at(loc, "M"))
    if r.law == "uptake":
        _check_uptake(r, loc, err)
    if not r.reactants:
        err(f"reaction {r.id!r}: no reactants", loc)

    # parameter sanity
    for key, value in r.parameters.items():
        if key.startswith("_") or isinstance(value, str):
            continue
        if not math.isfinite(value):
            err(f"reaction {r.id!r}: {key}={value} is not a finite number", _at(loc, key, suffix="="))
            continue
        bound = _BOUNDS.get(key)
        if bound is None or (r.law == "reverse" and key == "B"):
            continue
        lo, inclusive, hi, valid = bound
        if (value < lo if inclusive else value <= lo) or (hi is not None and value > hi):
            err(f"reaction {r.id!r}: {key}={value:g} makes no physical sense; valid: {valid}",
                _at(loc, key, suffix="="))
    for key, value, lo, valid in (("f298", r.f298, 1.0, "f298 >= 1"), ("g", r.g, 0.0, "g >= 0")):
        if value is None:
            continue
        if not math.isfinite(value) or value < lo:
            err(f"reaction {r.id!r}: {key}={value:g} is not an uncertainty factor; valid: {valid}",
                _at(loc, key, suffix="="))

    if r.law == "reverse":
        _check_reverse(r, reactions, ignore_reactions, err)

    # element balance
    if not r.unbalanced and not unknown:
        _check_balance(r, species, err)


def _check_uptake(r: Reaction, loc, err) -> None:
    """gamma_from= must name a parameterization; gamma_table= must parse (docs/heterogeneous.md)."""
    from .liquid_aerosol import LIQUID_GAMMA_MODELS
    from .ratelaws import parse_gamma_table

    name = r.parameters.get("gamma_from")
    if name is not None and name not in LIQUID_GAMMA_MODELS:
        err(f"reaction {r.id!r}: gamma_from={name} is not a known parameterization"
            f"{_suggest(str(name), tuple(LIQUID_GAMMA_MODELS))}; valid: {', '.join(LIQUID_GAMMA_MODELS)}",
            _at(loc, "gamma_from", suffix="="))
    table = r.parameters.get("gamma_table")
    if table is not None:
        try:
            parse_gamma_table(str(table))
        except ValueError as exc:
            err(f"reaction {r.id!r}: gamma_table: {exc}", _at(loc, "gamma_table", suffix="="))
    if name is not None and r.parameters.get("on") not in ("sulfate",):
        err(f"reaction {r.id!r}: gamma_from={name} is a liquid sulfate parameterization; valid: on=sulfate",
            _at(loc, "on", suffix="="))
    radius = r.parameters.get("radius_um", 0.1)
    if not (isinstance(radius, float) and math.isfinite(radius) and radius > 0):
        err(f"reaction {r.id!r}: radius_um={radius} is not a droplet radius > 0 [um]",
            _at(loc, "radius_um", suffix="="))
    radius_from = r.parameters.get("radius_from", "droplets")
    if radius_from not in ("droplets", "line"):
        err(f"reaction {r.id!r}: radius_from={radius_from!r} is not valid; expected 'droplets' (the droplet "
            "radius of the STS rule when the sulfate area comes from it, else radius_um) or 'line' "
            "(always radius_um)", _at(loc, "radius_from", suffix="="))


def _m_on_right(r: Reaction) -> bool:
    eq = r.equation.split("->", 1)
    return len(eq) == 2 and re.search(r"(?<![A-Za-z0-9_])M(?![A-Za-z0-9_])", eq[1]) is not None


def _check_reverse(r: Reaction, reactions, ignore_reactions, err) -> None:
    of = str(r.parameters.get("of"))
    fwd = reactions.get(of)
    loc = _at(r.location, "of", suffix="=")
    if fwd is None:
        if of not in ignore_reactions:
            err(f"reaction {r.id!r}: reverse of={of}: no reaction with that id{_suggest(of, reactions)}", loc)
        return
    if fwd.law == "reverse":
        err(f"reaction {r.id!r}: of={of} is itself a reverse reaction; name the forward reaction", loc)
        return
    if fwd.law == "photolysis" or fwd.law in SURFACE_LAWS:
        err(f"reaction {r.id!r}: of={of} is a {fwd.law} reaction; reverse needs a thermal forward reaction",
            loc)
        return
    if fwd.photolysis or fwd.law in SURFACE_LAWS:
        return
    same = (_stoich(r.reactants) == _stoich(fwd.products) and _stoich(r.products) == _stoich(fwd.reactants)
            and r.third_body == fwd.third_body)
    if not same:
        err(f"reaction {r.id!r}: '{r.equation}' is not the reverse of {of} ('{fwd.equation}'); write "
            f"the forward equation's products as reactants and its reactants as products"
            f"{' (with M on both if the forward has M)' if r.third_body != fwd.third_body else ''}",
            _at(r.location, r.reactants[0].species if r.reactants else None))


def _stoich(terms) -> dict[str, float]:
    out: dict[str, float] = {}
    for t in terms:
        out[t.species] = round(out.get(t.species, 0.0) + t.coefficient, 9)
    return out


def _check_balance(r: Reaction, species, err) -> None:
    totals: dict[str, list[float]] = {}
    for side, terms in ((0, r.reactants), (1, r.products)):
        for t in terms:
            s = species.get(t.species)
            if s is None or s.formula is None:
                return  # lumped species: no balance check
            for el, n in s.formula.items():
                totals.setdefault(el, [0.0, 0.0])[side] += t.coefficient * n
    diffs = [f"{el} {a:g} -> {b:g}" for el, (a, b) in sorted(totals.items())
             if abs(a - b) > 1e-9 * max(1.0, abs(a), abs(b))]
    if diffs:
        err(f"reaction {r.id!r} is not balanced: {', '.join(diffs)}; fix the equation or add the flag "
            f"'unbalanced' if products are left out on purpose", _arrow(r.location))


def _arrow(loc: SourceLocation | None) -> SourceLocation | None:
    if loc is None or "->" not in loc.text:
        return loc
    return dc_replace(loc, column=loc.text.index("->") + 1)


def _check_duplicates(reactions, err) -> None:
    seen: dict[tuple, Reaction] = {}
    for r in reactions:
        key = (frozenset(_stoich(r.reactants).items()), frozenset(_stoich(r.products).items()),
               r.law, r.third_body, r.photolysis,
               r.parameters.get("on") if r.law in SURFACE_LAWS else None)
        if key in seen:
            first = seen[key]
            err(f"reactions {first.id!r} and {r.id!r} have the same equation and law ({r.law}); "
                f"the rate is counted twice", _arrow(r.location), "warning")
        else:
            seen[key] = r


def _check_production_and_loss(mechanism: Mechanism, err) -> None:
    produced: Counter = Counter()
    lost: Counter = Counter()
    for r in mechanism.reactions:
        net = _stoich(r.products)
        for name, c in _stoich(r.reactants).items():
            net[name] = net.get(name, 0.0) - c
        for name, c in net.items():
            if c > 0:
                produced[name] += 1
            elif c < 0:
                lost[name] += 1
    from .condensed import CONDENSED_PHASE_SPECIES
    for s in mechanism.species:
        if s.fixed:
            continue
        if s.name in CONDENSED_PHASE_SPECIES and not produced[s.name] and not lost[s.name]:
            continue   # moved by the phase equilibrium, not by reactions (mechanism/condensed.py)
        if not produced[s.name] and not lost[s.name]:
            err(f"species {s.name!r} takes part in no reaction", s.location, "warning")
        elif not produced[s.name]:
            err(f"species {s.name!r} is never produced (only lost)", s.location, "warning")
        elif not lost[s.name]:
            err(f"species {s.name!r} is never lost (only produced)", s.location, "warning")
