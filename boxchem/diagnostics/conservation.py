"""Conservation guard: element totals and fixed mixing ratios checked at the end of a run.

An element is *conserved by the mechanism* when every reaction leaves the
number of its atoms on the integrated species unchanged (net stoichiometry
times atom counts, summed over integrated species, is zero for every
reaction; fixed species are reservoirs and lumped species have no formula,
so a reaction that moves atoms to or from them breaks conservation and the
element is not checked).  For such an element E the total mole fraction

    T_E(t) = sum_i a_iE x_i(t)          (a_iE atoms of E in species i)

is an exact invariant of the ODE: Rosenbrock methods keep linear invariants
to rounding and the solver's dilution step keeps mole fractions of linear
invariants (DEVELOPERS.md, "Solver").  A drift of T_E therefore measures
mass the numerics created or destroyed (in practice: negative values clipped
to zero under loose absolute tolerances).  The relative drift
max_t |T_E(t) - T_E(0)| / T_E(0) is compared with :data:`ELEMENT_DRIFT_BOUND`
(documented in docs/guards.md, measured there), and the mole fraction of
every fixed species other than M with :data:`FIXED_DRIFT_BOUND` of its
prescribed value.

``conservation_report(ds, mechanism, expected_fixed)`` returns a
:class:`ConservationReport`; ``annotate(ds, report)`` writes it to the
result's attributes (``conservation_check`` = "passed"/"failed", ...).
"""
from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from .stoichiometry import net_stoichiometry_matrix

__all__ = ["ELEMENT_DRIFT_BOUND", "FIXED_DRIFT_BOUND", "ConservationReport",
           "conserved_elements", "element_matrix", "conservation_report", "annotate",
           "expected_fixed_fractions", "guard_run",
           "CONSERVATION_ATTRIBUTES"]

#: relative drift of a conserved element's total mole fraction that fails the check
#: (1e-3: far above what the solver's rounding and normal clipping give - measured below
#: 1e-6 for the shipped scenarios at their tolerances, docs/guards.md - and below the
#: 1 % level at which a budget or an ozone-loss figure would be visibly wrong)
ELEMENT_DRIFT_BOUND = 1.0e-3
#: relative deviation of a fixed species' mole fraction from its prescribed value
FIXED_DRIFT_BOUND = 1.0e-6
#: attributes :func:`annotate` writes
CONSERVATION_ATTRIBUTES = ("conservation_check", "conservation_message",
                           "conservation_element_drift", "conservation_fixed_drift",
                           "conservation_bound")


@dataclass(frozen=True)
class ConservationReport:
    """Result of the guard.  Drifts are relative (1 = 100 %)."""

    element_drift: Mapping[str, float] = field(default_factory=dict)
    element_initial: Mapping[str, float] = field(default_factory=dict)   # mol mol-1
    fixed_drift: Mapping[str, float] = field(default_factory=dict)
    not_conserved: tuple[str, ...] = ()
    element_bound: float = ELEMENT_DRIFT_BOUND
    fixed_bound: float = FIXED_DRIFT_BOUND

    @property
    def failures(self) -> list[str]:
        out = [f"{e} total {_signed_percent(d)} (bound {self.element_bound:.0e})"
               for e, d in self.element_drift.items() if not abs(d) <= self.element_bound]
        out += [f"fixed {s} mole fraction {_signed_percent(d)} (bound {self.fixed_bound:.0e})"
                for s, d in self.fixed_drift.items() if not abs(d) <= self.fixed_bound]
        return out

    @property
    def passed(self) -> bool:
        return not self.failures

    def message(self) -> str:
        checked = ", ".join(self.element_drift) or "no element"
        if self.passed:
            worst = max((abs(d) for d in self.element_drift.values()), default=0.0)
            return (f"element totals conserved ({checked}; largest drift {worst:.1e}); "
                    f"fixed mixing ratios kept")
        return ("conservation guard: " + "; ".join(self.failures)
                + ". Mass was created or lost by the numerics (typically clipping of negative "
                  "values under a loose [solver].atol): tighten atol (see docs/guards.md)")


def _signed_percent(d: float) -> str:
    if not np.isfinite(d):
        return "created from zero"
    return f"{100 * d:+.3g} %"


def element_matrix(mechanism, species: tuple[str, ...]) -> tuple[tuple[str, ...], np.ndarray]:
    """Elements present and atom counts a[i, e] (species in ``species`` order) [1]."""
    by_name = {s.name: s for s in mechanism.species}
    elements = sorted({e for name in species for e in (by_name[name].formula or {})})
    a = np.array([[by_name[name].atoms(e) for e in elements] for name in species], dtype=float)
    return tuple(elements), a.reshape(len(species), len(elements))


def conserved_elements(mechanism) -> tuple[tuple[str, ...], tuple[str, ...], np.ndarray]:
    """(conserved elements, integrated species, their atom matrix a[i, e] for those elements).

    An element is conserved when no reaction changes its atom count on the
    integrated, non-lumped species (module docstring).
    """
    variable = tuple(s.name for s in mechanism.species if not s.fixed)
    elements, a = element_matrix(mechanism, variable)
    if not elements:
        return (), variable, np.zeros((len(variable), 0))
    nu = net_stoichiometry_matrix(mechanism, species=variable)        # (species, reactions)
    lumped = np.array([mechanism.species_by_name(n).formula is None for n in variable])
    change = nu.T @ a                                                  # (reactions, elements)
    # a reaction that makes or consumes a lumped species may move atoms we cannot count
    touches_lumped = np.any(nu[lumped] != 0, axis=0) if lumped.any() else np.zeros(nu.shape[1], bool)
    keep = np.all(np.abs(change) < 1e-9, axis=0) & ~(touches_lumped[:, None]
                                                     & (np.abs(a).sum(axis=0) > 0)).any(axis=0)
    chosen = tuple(e for e, k in zip(elements, keep) if k)
    return chosen, variable, a[:, keep]


def conservation_report(ds, mechanism, expected_fixed: Mapping[str, float] | None = None, *,
                        element_bound: float = ELEMENT_DRIFT_BOUND,
                        fixed_bound: float = FIXED_DRIFT_BOUND) -> ConservationReport:
    """Check a run's Dataset (``mole_fraction`` (time, species)) against its mechanism.

    ``expected_fixed``: fixed species -> prescribed mole fraction (the
    mechanism's or the scenario's); M is never checked (it is the air).
    Times with non-finite values (a failed run's tail) are left out.
    """
    chosen, variable, a = conserved_elements(mechanism)
    every = sorted({e for s in mechanism.species if not s.fixed for e in (s.formula or {})})
    x = np.asarray(ds["mole_fraction"].sel(species=list(variable)).values, dtype=float)
    finite = np.all(np.isfinite(x), axis=1)
    drift: dict[str, float] = {}
    initial: dict[str, float] = {}
    if finite.any() and chosen:
        totals = x[finite] @ a                                       # (time, elements)
        t0 = totals[0]
        for j, e in enumerate(chosen):
            initial[e] = float(t0[j])
            deviation = float(np.max(np.abs(totals[:, j] - t0[j])))
            if t0[j] > 0:
                drift[e] = deviation / float(t0[j])
            elif deviation > 0:
                drift[e] = float("inf")
            else:
                drift[e] = 0.0
    fixed_drift: dict[str, float] = {}
    for name, value in (expected_fixed or {}).items():
        if name == "M" or name not in ds["species"].values or not value:
            continue
        xs = np.asarray(ds["mole_fraction"].sel(species=name).values, dtype=float)
        xs = xs[np.isfinite(xs)]
        if xs.size:
            fixed_drift[name] = float(np.max(np.abs(xs - value)) / value)
    return ConservationReport(drift, initial, fixed_drift,
                              tuple(e for e in every if e not in chosen), element_bound, fixed_bound)


def expected_fixed_fractions(mechanism, scenario) -> dict[str, float]:
    """Prescribed mole fractions of the fixed species: the scenario's [initial], else the mechanism's."""
    out: dict[str, float] = {}
    initial = dict(getattr(scenario, "initial", {}) or {})
    for sp in mechanism.species:
        if not sp.fixed or sp.is_air:
            continue
        given = initial.get(sp.name)
        if given is not None and given[1] == "mole_fraction":
            out[sp.name] = float(given[0])
        elif sp.mole_fraction is not None:
            out[sp.name] = float(sp.mole_fraction)
    return out


def guard_run(ds, mechanism, scenario) -> ConservationReport:
    """Check ``ds`` and write the report to its attributes (the call the runner makes)."""
    report = conservation_report(ds, mechanism, expected_fixed_fractions(mechanism, scenario))
    annotate(ds, report)
    return report


def annotate(ds, report: ConservationReport) -> None:
    """Write the report to ``ds.attrs`` (see :data:`CONSERVATION_ATTRIBUTES`), in place."""
    ds.attrs["conservation_check"] = "passed" if report.passed else "failed"
    ds.attrs["conservation_message"] = report.message()
    ds.attrs["conservation_element_drift"] = json.dumps(
        {e: (d if np.isfinite(d) else "inf") for e, d in report.element_drift.items()})
    ds.attrs["conservation_fixed_drift"] = json.dumps(dict(report.fixed_drift))
    ds.attrs["conservation_bound"] = (f"element totals {report.element_bound:g} relative; fixed "
                                      f"mole fractions {report.fixed_bound:g} relative; elements "
                                      f"not conserved by the mechanism (not checked): "
                                      f"{', '.join(report.not_conserved) or 'none'}")
