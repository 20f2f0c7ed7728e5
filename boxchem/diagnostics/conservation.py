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

import dataclasses
import json
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from .stoichiometry import net_stoichiometry_matrix

__all__ = ["ELEMENT_DRIFT_BOUND", "FIXED_DRIFT_BOUND", "ConservationReport", "ConservationCheck",
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


@dataclass(frozen=True)
class ConservationCheck:
    """The guard for one mechanism and its prescribed fixed mole fractions, on arrays.

    The one implementation of the check: :func:`conservation_report` (single
    runs) and the ensemble engine (every member of a batch at once) call
    :meth:`drifts` on mole fractions with any leading dimensions.
    """

    elements: tuple[str, ...]            # conserved by the mechanism
    variable: tuple[str, ...]            # integrated species (rows of ``atoms``)
    atoms: np.ndarray                    # (n_variable, n_elements) [1]
    fixed: tuple[str, ...]               # fixed species checked (not M)
    fixed_expected: np.ndarray           # their prescribed mole fractions [mol mol-1]
    not_conserved: tuple[str, ...] = ()
    element_bound: float = ELEMENT_DRIFT_BOUND
    fixed_bound: float = FIXED_DRIFT_BOUND

    @classmethod
    def for_mechanism(cls, mechanism, expected_fixed: Mapping[str, float] | None = None, *,
                      element_bound: float = ELEMENT_DRIFT_BOUND,
                      fixed_bound: float = FIXED_DRIFT_BOUND) -> "ConservationCheck":
        chosen, variable, a = conserved_elements(mechanism)
        every = sorted({e for s in mechanism.species if not s.fixed for e in (s.formula or {})})
        names = set(mechanism.species_names)
        fixed = {n: float(v) for n, v in (expected_fixed or {}).items()
                 if n != "M" and n in names and v}
        return cls(chosen, variable, a, tuple(fixed), np.array(list(fixed.values()), dtype=float),
                   tuple(e for e in every if e not in chosen), element_bound, fixed_bound)

    def drifts(self, variable_fraction: np.ndarray, fixed_fraction: np.ndarray | None = None
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Relative drifts from mole fractions [mol mol-1] at the output times.

        ``variable_fraction`` (..., time, n_variable) in ``variable`` order;
        ``fixed_fraction`` (..., time, n_fixed) in ``fixed`` order (or broadcastable).
        Returns (element drift (..., n_elements), element initial total (...,
        n_elements) [mol mol-1], fixed drift (..., n_fixed)): element drift =
        max over the times with all values finite of |T_E(t) - T_E(t0)| / T_E(t0)
        (t0 the first such time; inf when created from a zero total; NaN when no
        time is finite); fixed drift = max over finite values of |x - x_prescribed|
        / x_prescribed (NaN when none).
        """
        x = np.asarray(variable_fraction, dtype=float)
        lead = x.shape[:-2]
        finite = np.all(np.isfinite(x), axis=-1)                       # (..., time)
        any_finite = finite.any(axis=-1)
        with np.errstate(invalid="ignore", over="ignore"):
            totals = np.where(finite[..., None], x, 0.0) @ self.atoms   # (..., time, n_elements)
        first = np.argmax(finite, axis=-1)                              # first finite time
        t0 = np.take_along_axis(totals, first[..., None, None], axis=-2)[..., 0, :]
        deviation = np.max(np.where(finite[..., None], np.abs(totals - t0[..., None, :]), 0.0),
                           axis=-2) if totals.shape[-2] else np.zeros(lead + (len(self.elements),))
        with np.errstate(divide="ignore", invalid="ignore"):
            drift = np.where(t0 > 0, deviation / np.where(t0 > 0, t0, 1.0),
                             np.where(deviation > 0, np.inf, 0.0))
        drift = np.where(any_finite[..., None], drift, np.nan)
        t0 = np.where(any_finite[..., None], t0, np.nan)
        if fixed_fraction is None or not self.fixed:
            return drift, t0, np.full(lead + (len(self.fixed),), np.nan)
        f = np.asarray(fixed_fraction, dtype=float)
        ok = np.isfinite(f)
        with np.errstate(invalid="ignore"):
            dev = np.where(ok, np.abs(f - self.fixed_expected) / self.fixed_expected, -np.inf)
        fixed_drift = np.max(dev, axis=-2) if dev.shape[-2] else np.full(dev.shape[:-2] + dev.shape[-1:], -np.inf)
        fixed_drift = np.broadcast_to(np.where(np.isfinite(fixed_drift), fixed_drift, np.nan),
                                      lead + (len(self.fixed),))
        return drift, t0, fixed_drift

    def passed(self, element_drift: np.ndarray, fixed_drift: np.ndarray) -> np.ndarray:
        """True where every checked drift is within its bound (NaN: not checked, passes)."""
        e = np.asarray(element_drift, dtype=float)
        f = np.asarray(fixed_drift, dtype=float)
        with np.errstate(invalid="ignore"):
            bad_e = ~(np.abs(e) <= self.element_bound) & ~np.isnan(e)
            bad_f = ~(np.abs(f) <= self.fixed_bound) & ~np.isnan(f)
        return ~(bad_e.any(axis=-1) | bad_f.any(axis=-1))

    def report(self, element_drift: np.ndarray, element_initial: np.ndarray,
               fixed_drift: np.ndarray) -> ConservationReport:
        """The :class:`ConservationReport` of one run's drifts (1-D rows of :meth:`drifts`)."""
        drift = {e: float(d) for e, d in zip(self.elements, element_drift) if not np.isnan(d)}
        initial = {e: float(v) for e, v in zip(self.elements, element_initial) if not np.isnan(v)}
        fixed = {n: float(d) for n, d in zip(self.fixed, fixed_drift) if not np.isnan(d)}
        return ConservationReport(drift, initial, fixed, self.not_conserved,
                                  self.element_bound, self.fixed_bound)


def conservation_report(ds, mechanism, expected_fixed: Mapping[str, float] | None = None, *,
                        element_bound: float = ELEMENT_DRIFT_BOUND,
                        fixed_bound: float = FIXED_DRIFT_BOUND) -> ConservationReport:
    """Check a run's Dataset (``mole_fraction`` (time, species)) against its mechanism.

    ``expected_fixed``: fixed species -> prescribed mole fraction (the
    mechanism's or the scenario's); M is never checked (it is the air).
    Times with non-finite values (a failed run's tail) are left out.
    """
    check = ConservationCheck.for_mechanism(mechanism, expected_fixed, element_bound=element_bound,
                                            fixed_bound=fixed_bound)
    check = dataclasses.replace(check, fixed=tuple(n for n in check.fixed
                                                   if n in ds["species"].values),
                                fixed_expected=np.array([v for n, v in zip(check.fixed,
                                                                           check.fixed_expected)
                                                         if n in ds["species"].values]))
    x = np.asarray(ds["mole_fraction"].sel(species=list(check.variable)).values, dtype=float)
    xf = np.asarray(ds["mole_fraction"].sel(species=list(check.fixed)).values, dtype=float)
    drift, initial, fixed = check.drifts(x, xf)
    return check.report(drift, initial, fixed)


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


# ---------------------------------------------------------------------------
# member files: the same check for every member (docs/guards.md, docs/output-format.md)
# ---------------------------------------------------------------------------
#: ``member_conservation`` flag values
CHECK_NOT_RUN, CHECK_PASSED, CHECK_FAILED = 0, 1, 2
CHECK_MEANINGS = "not_checked passed failed"
#: dimensions of the per-member check variables
ELEMENT_DIM, FIXED_DIM = "conserved_element", "checked_fixed_species"


def member_check_layout(check: ConservationCheck) -> tuple[dict, dict]:
    """Coordinates and per-member variables of the guard in a member file.

    Returns (coords name -> (dim, values, attrs), variables name -> (dims, attrs,
    dtype)); the variables are written for every member that ran, failed ones included.
    """
    coords = {
        ELEMENT_DIM: (ELEMENT_DIM, np.array(check.elements, dtype=object),
                      {"long_name": "element whose total the conservation guard checks (conserved "
                                    "by the mechanism)"}),
        FIXED_DIM: (FIXED_DIM, np.array(check.fixed, dtype=object),
                    {"long_name": "fixed species whose mole fraction the conservation guard checks"}),
    }
    variables = {
        "member_element_drift": (("member", ELEMENT_DIM), {
            "units": "1", "long_name": "largest relative drift of each conserved element total "
                                       "over the output times, max |T(t) - T(t0)| / T(t0)",
            "comment": f"fails above {check.element_bound:g}; inf: created from a zero total; "
                       f"NaN: not run (docs/guards.md)"}, "f8"),
        "member_fixed_drift": (("member", FIXED_DIM), {
            "units": "1", "long_name": "largest relative deviation of each fixed species' mole "
                                       "fraction from its prescribed value",
            "comment": f"fails above {check.fixed_bound:g}; NaN: not run"}, "f8"),
        "member_conservation": (("member",), {
            "long_name": "conservation guard of each member (element totals and fixed mixing "
                         "ratios, as for a single run)",
            "flag_values": np.array([CHECK_NOT_RUN, CHECK_PASSED, CHECK_FAILED], "i1"),
            "flag_meanings": CHECK_MEANINGS}, "i1"),
    }
    return coords, variables


def member_checks(check: ConservationCheck, variable_fraction: np.ndarray,
                  fixed_fraction: np.ndarray) -> dict[str, np.ndarray]:
    """The guard on a batch: (members, time, n_variable) and (..., time, n_fixed) mole
    fractions -> the per-member variables of :func:`member_check_layout` (one call, no
    loop over members)."""
    drift, _, fixed = check.drifts(variable_fraction, fixed_fraction)
    ran = np.any(np.all(np.isfinite(variable_fraction), axis=-1), axis=-1)
    flag = np.where(~ran, CHECK_NOT_RUN,
                    np.where(check.passed(drift, fixed), CHECK_PASSED, CHECK_FAILED)).astype("i1")
    return {"member_element_drift": drift, "member_fixed_drift": fixed, "member_conservation": flag}


def member_failure_messages(check: ConservationCheck, arrays: Mapping[str, np.ndarray]) -> dict[int, str]:
    """Position in the batch -> the single-run guard's message, for members that failed it."""
    failed = np.nonzero(np.asarray(arrays["member_conservation"]) == CHECK_FAILED)[0]
    nan = np.full(len(check.elements), np.nan)
    return {int(i): check.report(arrays["member_element_drift"][i], nan,
                                 arrays["member_fixed_drift"][i]).message() for i in failed}


#: failed members named in :func:`member_summary`
SUMMARY_MEMBERS = 5


def member_summary(ds) -> str | None:
    """One paragraph on the guard over a member file's members, or None (no check stored)."""
    if "member_conservation" not in ds.variables:
        return None
    flag = np.asarray(ds["member_conservation"].values, dtype=int)
    checked = int(np.sum(flag != CHECK_NOT_RUN))
    failed = np.nonzero(flag == CHECK_FAILED)[0]
    elements = [str(e) for e in ds[ELEMENT_DIM].values] if ELEMENT_DIM in ds.coords else []
    drift = (np.asarray(ds["member_element_drift"].values, dtype=float)
             if "member_element_drift" in ds else np.zeros((flag.size, 0)))
    fixed = ([str(s) for s in ds[FIXED_DIM].values] if FIXED_DIM in ds.coords else [])
    fdrift = (np.asarray(ds["member_fixed_drift"].values, dtype=float)
              if "member_fixed_drift" in ds else np.zeros((flag.size, 0)))
    if not failed.size:
        finite = drift[np.isfinite(drift)]
        worst = f"; largest element drift {finite.max():.1e}" if finite.size else ""
        return (f"conservation: all {checked} members that ran passed ({', '.join(elements) or 'no element'}"
                f" checked{worst})")
    labels = ds["member_label"].values
    parts = []
    for i in failed[:SUMMARY_MEMBERS]:
        bad = [f"{e} total {_signed_percent(d)}" for e, d in zip(elements, drift[i])
               if not abs(d) <= ELEMENT_DRIFT_BOUND and not np.isnan(d)]
        bad += [f"fixed {s} {_signed_percent(d)}" for s, d in zip(fixed, fdrift[i])
                if not abs(d) <= FIXED_DRIFT_BOUND and not np.isnan(d)]
        parts.append(f"member {int(i)} ({labels[i]}) {', '.join(bad)}")
    more = f"; ... and {failed.size - SUMMARY_MEMBERS} more" if failed.size > SUMMARY_MEMBERS else ""
    return (f"{failed.size} of {checked} members failed the conservation check: {'; '.join(parts)}"
            f"{more} (member_conservation, member_element_drift; docs/guards.md)")


def member_report(ds, i: int) -> ConservationReport | None:
    """Member ``i``'s stored check of a member file as a :class:`ConservationReport` (None
    when the file has none or the member was not checked)."""
    if "member_conservation" not in ds.variables or \
            int(ds["member_conservation"].values[i]) == CHECK_NOT_RUN:
        return None
    def row(name, dim):
        if name not in ds.variables or dim not in ds.coords:
            return {}
        values = np.asarray(ds[name].values[i], dtype=float)
        return {str(k): float(v) for k, v in zip(ds[dim].values, values) if not np.isnan(v)}
    skipped = str(ds.attrs.get("conservation_elements_not_checked", ""))
    return ConservationReport(row("member_element_drift", ELEMENT_DIM), {},
                              row("member_fixed_drift", FIXED_DIM),
                              tuple(e for e in skipped.split() if e))
