"""The parsed mechanism: species, families, reactions and catalytic cycles.

This is the data model everything downstream compiles from (rate evaluation,
the solver's kinetics, diagnostics, output coordinates).  Objects are frozen;
a Mechanism is built by :mod:`boxchem.mechanism.parser` and never mutated.

Conventions
-----------
* Reaction order in ``Mechanism.reactions`` is file order after extends /
  changed / dropped reactions (a changed reaction keeps its place); this is
  the order of the ``reaction`` output dimension.
* Species order in ``Mechanism.species`` is declaration order; the variable
  (integrated) species are those with ``fixed == False``.
* ``M`` (the third body) and ``hv`` never appear in ``reactants``/``products``.
  ``Reaction.third_body`` records that M was written on the left.
* Rate coefficients are in molecule cm-3 based units.  Whether the law already
  contains [M] is given by ``Reaction.rate_includes_air``:  for ``falloff`` and
  ``chemact`` (and ``reverse`` of either) k already contains [M]; for every
  other law with M on the left, the rate is k [M] [A] [B]....
"""
from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

from ..errors import SourceLocation

#: laws whose k(T, [M]) already contains the third-body density
LAWS_WITH_AIR_DENSITY = frozenset({"falloff", "chemact"})
#: every rate law name the mechanism language knows
RATE_LAWS = ("constant", "arrhenius", "falloff", "chemact", "reverse", "photolysis", "surface", "uptake")
#: laws of uptake on particle surfaces: k = gamma v S / 4, first order in the first reactant
#: (``surface``: constant gamma; ``uptake``: gamma from a parameterization or a T table)
SURFACE_LAWS = frozenset({"surface", "uptake"})


@dataclass(frozen=True)
class Species:
    name: str
    formula: Mapping[str, int] | None  # element -> atom count; None for lumped species
    fixed: bool = False
    mole_fraction: float | None = None  # fixed species that follow the air (O2 0.2095)
    lumped: bool = False
    molar_mass: float | None = None     # g mol-1, from the formula; None when lumped
    location: SourceLocation | None = field(default=None, compare=False, repr=False)

    @property
    def is_air(self) -> bool:
        """True for the third body M: its number density is the air number density."""
        return self.name == "M"

    def atoms(self, element: str) -> int:
        return 0 if self.formula is None else int(self.formula.get(element, 0))


@dataclass(frozen=True)
class Term:
    """A species with its stoichiometric coefficient in an equation."""

    species: str
    coefficient: float = 1.0


@dataclass(frozen=True)
class Reaction:
    id: str
    reactants: tuple[Term, ...]          # without M and hv
    products: tuple[Term, ...]           # without M
    law: str                             # one of RATE_LAWS
    parameters: Mapping[str, float | str] = field(default_factory=lambda: MappingProxyType({}))
    third_body: bool = False             # M written on the left-hand side
    photolysis: bool = False             # hv written on the left-hand side
    f298: float | None = None            # uncertainty factor at 298 K (evaluated-table convention)
    g: float | None = None               # temperature coefficient of the uncertainty factor
    ref: str = ""
    unbalanced: bool = False
    equation: str = ""                   # the equation as written, normalised spacing
    location: SourceLocation | None = field(default=None, compare=False, repr=False)
    #: the law and its KEY=VALUE parameters as written on the line (comment removed)
    definition: str = field(default="", compare=False)

    @property
    def rate_includes_air(self) -> bool:
        """True when k(T, [M]) already contains [M] (falloff, chemact, reverse of those).

        For ``reverse`` this is resolved by the parser into the parameter
        ``_of_law`` (the law of the forward reaction).
        """
        law = self.parameters.get("_of_law", self.law) if self.law == "reverse" else self.law
        return law in LAWS_WITH_AIR_DENSITY

    @property
    def air_multiplies_rate(self) -> bool:
        """True when the rate is k [M] [reactants...] (M on the left, law without [M])."""
        return self.third_body and not self.rate_includes_air

    @property
    def order(self) -> float:
        """Kinetic order of the rate expression k * prod(c): sets the unit of k."""
        n = sum(t.coefficient for t in self.reactants)
        return n + (1 if self.air_multiplies_rate else 0)

    @property
    def rate_coefficient_units(self) -> str:
        """UDUNITS string of k: s-1, cm3 s-1, cm6 s-1 (molecule-based)."""
        if self.law == "photolysis" or self.law in SURFACE_LAWS:
            return "s-1"
        n = self.order
        if n <= 1:
            return "s-1"
        return f"cm{3 * (int(round(n)) - 1)} s-1"


@dataclass(frozen=True)
class Family:
    """A named sum of species: ``Ox = O3 + O + O1D`` or ``Cly = atoms(Cl)``."""

    name: str
    members: Mapping[str, float]         # species -> weight
    element: str | None = None           # set for atoms(ELEMENT) families
    location: SourceLocation | None = field(default=None, compare=False, repr=False)


@dataclass(frozen=True)
class Cycle:
    """A catalytic cycle: destroys ``family`` at sum(coef * rate of reaction)."""

    name: str
    family: str
    terms: Mapping[str, float]           # reaction id -> coefficient
    location: SourceLocation | None = field(default=None, compare=False, repr=False)


@dataclass(frozen=True)
class MechanismFile:
    """One file read for a mechanism: its path, its text, and how it was reached.

    ``parent`` is the index (in ``Mechanism.files``) of the file whose
    ``extends`` line named this one, -1 for the top-level file; ``reference``
    is the name as written on that line (``"stratosphere"``, ``"../base.mech"``).
    """

    path: str
    text: str
    parent: int = -1
    reference: str = ""


@dataclass(frozen=True)
class MechanismChange:
    """A reaction a file changed, dropped or added on top of the mechanism it extends.

    ``kind`` is ``"changed"``, ``"dropped"`` or ``"added"``; ``before`` and
    ``after`` are the reaction definitions (law and parameters as written),
    empty where there is none; ``location`` is the line that made the change,
    ``base_location`` the line of the reaction in the base file.
    """

    kind: str
    reaction_id: str
    location: SourceLocation | None = None
    before: str = ""
    after: str = ""
    base_location: SourceLocation | None = None

    def describe(self) -> str:
        """One line: ``changed clo_dimer (lab.mech:6): falloff ... (was: falloff ... at base.mech:12)``."""
        where = f" ({self.location.file}:{self.location.line})" if self.location else ""
        base = f" at {self.base_location.file}:{self.base_location.line}" if self.base_location else ""
        if self.kind == "changed":
            return f"changed {self.reaction_id}{where}: {self.after} (was: {self.before}{base})"
        if self.kind == "dropped":
            return f"dropped {self.reaction_id}{where} (was: {self.before}{base})"
        return f"added {self.reaction_id}{where}: {self.after}"


@dataclass(frozen=True)
class Mechanism:
    species: tuple[Species, ...]
    reactions: tuple[Reaction, ...]
    families: tuple[Family, ...] = ()
    cycles: tuple[Cycle, ...] = ()
    source: str = ""                     # path of the top-level file
    text: str = ""                       # full text of all files read, in read order (for the hash)
    warnings: tuple = ()                 # Problem objects with severity "warning"
    files: tuple = ()                    # MechanismFile of every file read, top-level first
    changes: tuple = ()                  # MechanismChange made by files that extend another

    # -- lookups -------------------------------------------------------------
    @property
    def species_names(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.species)

    @property
    def variable_species(self) -> tuple[Species, ...]:
        return tuple(s for s in self.species if not s.fixed)

    @property
    def fixed_species(self) -> tuple[Species, ...]:
        return tuple(s for s in self.species if s.fixed)

    @property
    def reaction_ids(self) -> tuple[str, ...]:
        return tuple(r.id for r in self.reactions)

    def species_by_name(self, name: str) -> Species:
        for s in self.species:
            if s.name == name:
                return s
        raise KeyError(name)

    def reaction(self, reaction_id: str) -> Reaction:
        for r in self.reactions:
            if r.id == reaction_id:
                return r
        raise KeyError(reaction_id)

    def family(self, name: str) -> Family:
        for f in self.families:
            if f.name == name:
                return f
        raise KeyError(name)

    @property
    def text_sha256(self) -> str:
        import hashlib
        return hashlib.sha256(self.text.encode("utf-8")).hexdigest()
