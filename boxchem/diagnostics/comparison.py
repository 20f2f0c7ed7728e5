"""What changed between two results ("what did my number change"): the one implementation.

Used by ``boxchem compare``, the comparison figure and the accessor.  Rows are
plain dicts with a ``section`` key (rendered by the command as text or CSV).

* :func:`run_differences` - warnings when the runs differ in scenario, place,
  period or mechanism (a comparison of unlike runs is flagged, not refused).
* :func:`changed_reactions` - the reactions whose law, parameters or [scale]
  factor differ, read from the files (``reaction_definition``,
  ``rate_scale_factor``); for older files without them, reactions whose rate
  coefficient differs at output times where both runs had the same
  temperature and air density.
* :func:`largest_difference_time` - when OTHER - BASE of a species (O3) is largest.
* :func:`species_changes`, :func:`loss_changes` - species and accumulated loss
  by cycle at chosen times.
* :func:`rate_changes` - reactions ranked by their net effect on budgets
  (see its docstring and docs/diagnostics.md): exact reverse pairs (the fast
  ClO + ClO + M <-> Cl2O2 + M or O3 + hv <-> O + O2 + M cycling) are netted
  first, so they do not crowd the table.
"""
from __future__ import annotations

import numpy as np
import xarray as xr

from .budget import time_mean
from .ozone_loss import accumulated_loss, has_total_loss
from .result import ResultError, family_weights, is_family, names_or_error, stoichiometry

__all__ = ["DEFAULT_SPECIES", "pick_time", "run_differences", "changed_reactions",
           "largest_difference_time", "largest_difference_time_members", "species_changes", "loss_changes", "rate_changes",
           "compare_results", "spread_beside", "percent_change", "touched_species", "reverse_pairs"]

DEFAULT_SPECIES = ("O3", "ClO", "Cl2O2", "HCl", "ClONO2", "HOCl", "BrO", "NO2", "HNO3")
#: relative tolerance for "same temperature / air density / k" in the fallback test
SAME_RELATIVE = 1e-9
#: a k ratio further from 1 than this counts as a changed reaction in the fallback
K_CHANGED_RELATIVE = 1e-6


def percent_change(new, old):
    """100 (new - old) / old; 0 when both are 0, inf when only old is 0."""
    new, old = np.asarray(new, dtype=float), np.asarray(old, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(old != 0, 100.0 * (new - old) / np.where(old != 0, old, 1.0),
                       np.where(new == 0, 0.0, np.inf))
    return float(out) if out.ndim == 0 else out


def pick_time(ds: xr.Dataset, when, where: str) -> np.datetime64:
    """Output time nearest ``when`` ('start', 'end', ISO text or datetime64), inside the run."""
    t = ds["time"].values
    if isinstance(when, str) and when == "start":
        return t[0]
    if isinstance(when, str) and when == "end":
        return t[-1]
    try:
        value = np.datetime64(when.rstrip("Z") if isinstance(when, str) else when, "ns")
    except ValueError:
        raise ResultError(f"{where}: cannot read time {when!r}; write e.g. 2026-10-01, "
                          f"2026-09-15T12:00, start or end") from None
    if value < t[0] or value > t[-1]:
        raise ResultError(f"{where}: time {when} is outside the run ({np.datetime_as_string(t[0], 's')} "
                          f"to {np.datetime_as_string(t[-1], 's')})")
    return t[int(np.argmin(np.abs(t - value)))]


# ---------------------------------------------------------------------------
# are the two runs alike?
# ---------------------------------------------------------------------------
def _first(ds: xr.Dataset, name: str):
    if name in ds.variables:
        v = np.asarray(ds[name].values, dtype=float).ravel()
        return float(v[0]) if v.size else None
    return None


def run_differences(base: xr.Dataset, other: xr.Dataset) -> list[str]:
    """Plain-text warnings: scenario, place, altitude, period, output times or mechanism differ."""
    notes = []
    sb, so = base.attrs.get("scenario_source"), other.attrs.get("scenario_source")
    if sb and so and sb != so:
        notes.append(f"different scenarios: BASE ran {sb}, OTHER ran {so}")
    for name, unit, tol in (("latitude", "deg", 1e-6), ("longitude", "deg", 1e-6), ("altitude", "m", 1e-3)):
        vb, vo = _first(base, name), _first(other, name)
        if vb is not None and vo is not None and abs(vb - vo) > tol:
            notes.append(f"different place: {name} {vb:g} {unit} (BASE) vs {vo:g} {unit} (OTHER)")
    tb, to = base["time"].values, other["time"].values
    if tb[0] != to[0] or tb[-1] != to[-1]:
        span = (lambda t: f"{np.datetime_as_string(t[0], 'm')} to {np.datetime_as_string(t[-1], 'm')}")
        notes.append(f"different periods: BASE {span(tb)}, OTHER {span(to)}; values are taken at the "
                     "nearest output time of each run")
    elif tb.shape != to.shape or not np.array_equal(tb, to):
        notes.append("different output times (same start and end); values at the nearest output time of each")
    mb, mo = base.attrs.get("mechanism_sha256"), other.attrs.get("mechanism_sha256")
    if mb and mo and mb != mo:
        notes.append("different mechanism texts (mechanism_sha256 differs): see the changed reactions")
    rb, ro = set(base["reaction"].values.tolist()), set(other["reaction"].values.tolist())
    if rb != ro:
        only_b, only_o = sorted(rb - ro), sorted(ro - rb)
        notes.append("reactions not in both runs: "
                     + ", ".join([f"{r} (BASE only)" for r in only_b[:5]] + [f"{r} (OTHER only)" for r in only_o[:5]]))
    if base.attrs.get("integration_status", "success") != "success" or \
            other.attrs.get("integration_status", "success") != "success":
        notes.append("one of the runs did not finish (integration_status is not success)")
    return notes


# ---------------------------------------------------------------------------
# which reactions did the user change?
# ---------------------------------------------------------------------------
def _common_reactions(base, other) -> list[str]:
    other_ids = set(other["reaction"].values.tolist())
    return [str(r) for r in base["reaction"].values.tolist() if r in other_ids]


def changed_reactions(base: xr.Dataset, other: xr.Dataset) -> list[dict]:
    """Reactions whose law/parameters or [scale] factor differ between the runs (read from the files).

    Rows: ``reaction``, ``equation``, ``base`` and ``other`` (definition text and
    scale), ``how`` = "parameters", "[scale]" or "k at equal T" (the fallback
    for files without ``reaction_definition``: k differs by more than 1e-6
    relative at an output time where T and [M] agree to 1e-9).
    """
    common = _common_reactions(base, other)
    eq = base["equation"].sel(reaction=common).values if "equation" in base.coords else [""] * len(common)
    rows = []
    have_text = "reaction_definition" in base.variables and "reaction_definition" in other.variables
    if have_text:
        db = base["reaction_definition"].sel(reaction=common).values
        do = other["reaction_definition"].sel(reaction=common).values
        sb = base["rate_scale_factor"].sel(reaction=common).values if "rate_scale_factor" in base.variables \
            else np.ones(len(common))
        so = other["rate_scale_factor"].sel(reaction=common).values if "rate_scale_factor" in other.variables \
            else np.ones(len(common))
        for j, r in enumerate(common):
            if str(db[j]) != str(do[j]):
                rows.append({"section": "changed_reaction", "term": r, "equation": str(eq[j]), "how": "parameters",
                             "base": str(db[j]), "other": str(do[j])})
            if sb[j] != so[j]:
                rows.append({"section": "changed_reaction", "term": r, "equation": str(eq[j]), "how": "[scale]",
                             "base": f"x {sb[j]:g}", "other": f"x {so[j]:g}",
                             "change_percent": percent_change(so[j], sb[j])})
        return rows
    return _changed_by_rate_coefficient(base, other, common, eq)


def _changed_by_rate_coefficient(base, other, common, eq) -> list[dict]:
    if "rate_coefficient" not in base.variables or "rate_coefficient" not in other.variables:
        return []
    tb, to = base["time"].values, other["time"].values
    shared = np.intersect1d(tb, to)
    if shared.size == 0:
        return []
    b, o = base.sel(time=shared), other.sel(time=shared)
    same = np.ones(shared.size, dtype=bool)
    for name in ("temperature", "air_number_density"):
        if name in b and name in o:
            vb, vo = b[name].values, o[name].values
            same &= np.abs(vb - vo) <= SAME_RELATIVE * np.abs(vb)
    if not same.any():
        return []
    kb = b["rate_coefficient"].sel(reaction=common).values[same]
    ko = o["rate_coefficient"].sel(reaction=common).values[same]
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where((kb > 0) & (ko > 0), ko / kb, np.where(kb == ko, 1.0, np.inf))
    worst = np.nanmax(np.abs(ratio - 1.0), axis=0)
    rows = []
    for j in np.flatnonzero(worst > K_CHANGED_RELATIVE):
        both = (kb[:, j] > 0) & (ko[:, j] > 0)     # photolysis k is 0 at night in both runs
        med = float(np.nanmedian(ratio[both, j])) if both.any() else float("inf")
        rows.append({"section": "changed_reaction", "term": common[j], "equation": str(eq[j]),
                     "how": "k at equal T", "base": "k", "other": f"k x {med:.4g} (median at equal T, [M])",
                     "change_percent": 100.0 * (med - 1.0)})
    return rows


# ---------------------------------------------------------------------------
# species and loss at times
# ---------------------------------------------------------------------------
def largest_difference_time_members(base: xr.Dataset, members: xr.Dataset, species: str = "O3"):
    """Time where the median over members of |OTHER - BASE| of ``species`` is largest (None if 0)."""
    shared = np.intersect1d(base["time"].values, members["time"].values)
    if shared.size == 0:
        return None
    xb = base["mole_fraction"].sel(species=species, time=shared)
    xo = members["mole_fraction"].sel(species=species, time=shared)
    d = np.abs(xo - xb).median("member", skipna=True).values
    if not np.isfinite(d).any() or not np.nanmax(d) > 0:
        return None
    return shared[int(np.nanargmax(d))]


def largest_difference_time(base: xr.Dataset, other: xr.Dataset, species: str = "O3") -> np.datetime64 | None:
    """Output time (of both runs) where |OTHER - BASE| of ``species``' mole fraction is largest."""
    shared = np.intersect1d(base["time"].values, other["time"].values)
    if shared.size == 0 or species not in set(base["species"].values.tolist()):
        return None
    xb = base["mole_fraction"].sel(species=species, time=shared).values
    xo = other["mole_fraction"].sel(species=species, time=shared).values
    d = np.abs(xo - xb)
    if not np.isfinite(d).any() or not np.nanmax(d) > 0:
        return None
    return shared[int(np.nanargmax(d))]


def _label(t) -> str:
    return str(np.datetime_as_string(np.datetime64(t, "m"), "m"))


def species_changes(base, other, times, species, notes=None) -> list[dict]:
    rows = []
    for when, note in zip(times, notes or [""] * len(times)):
        tb, to = pick_time(base, when, "--at (BASE)"), pick_time(other, when, "--at (OTHER)")
        xb = base["mole_fraction"].sel(species=species, time=tb).values
        xo = other["mole_fraction"].sel(species=species, time=to).values
        for s, vb, vo in zip(species, xb, xo):
            rows.append({"section": "species", "time": _label(tb), "note": note, "term": s,
                         "base": float(vb), "other": float(vo), "change_percent": percent_change(vo, vb),
                         "units": "mol mol-1"})
    return rows


def loss_changes(base, other, times, family: str, notes=None) -> list[dict]:
    """Accumulated loss by cycle at the times (cycles only when a file lacks reaction rates)."""
    cycles_only = not (has_total_loss(base) and has_total_loss(other))
    ab = accumulated_loss(base, family, cycles_only=cycles_only)
    ao = accumulated_loss(other, family, cycles_only=cycles_only)
    terms = [str(t) for t in ab["term"].values if t in set(ao["term"].values.tolist())]
    rows = []
    for when, note in zip(times, notes or [""] * len(times)):
        tb, to = pick_time(base, when, "--at (BASE)"), pick_time(other, when, "--at (OTHER)")
        vb = ab["loss_percent"].sel(term=terms, time=tb).values
        vo = ao["loss_percent"].sel(term=terms, time=to).values
        for term, b, o in zip(terms, vb, vo):
            rows.append({"section": "accumulated_loss", "time": _label(tb), "note": note, "term": term,
                         "base": float(b), "other": float(o), "change_points": float(o - b),
                         "units": "% of initial O3"})
    return rows


# ---------------------------------------------------------------------------
# reactions ranked by net effect
# ---------------------------------------------------------------------------
def reverse_pairs(nu: np.ndarray) -> list[tuple[int, int]]:
    """Pairs (a, b), a < b, of reactions with exactly opposite net stoichiometry (nu_a = -nu_b != 0)."""
    nonzero = np.any(nu != 0, axis=0)
    opposite = np.all(nu[:, :, None] == -nu[:, None, :], axis=0) & nonzero[:, None] & nonzero[None, :]
    a, b = np.nonzero(np.triu(opposite, k=1))
    pairs, used = [], set()
    for i, j in zip(a.tolist(), b.tolist()):
        if i not in used and j not in used:
            pairs.append((i, j))
            used.update((i, j))
    return pairs


def rate_changes(base: xr.Dataset, other: xr.Dataset, top: int, family: str = "Ox",
                 species=()) -> list[dict]:
    """Reactions ranked by the change of their net effect on the budgets of ``family`` and ``species``.

    Exact reverse pairs (nu_a = -nu_b) become one entry with the net rate
    R_a - R_b.  For each entry j and each budget X (the family, then each
    species), the effect is the change of its time-mean contribution
    nu_Xj R_j, in percent of X's base turnover (half the time-mean sum of
    |nu_Xj R_j| over all entries).  Rows are sorted by the largest effect over
    the budgets; each row names that budget.  Needs ``reaction_rate`` in both.
    """
    for ds, which in ((base, "BASE"), (other, "OTHER")):
        if "reaction_rate" not in ds.variables:
            from .result import how_to_save
            return [{"section": "note", "term": f"{which} has no reaction_rate: reaction-rate changes are not "
                                                f"shown{how_to_save(ds, ['reaction_rate'])}"}]
    common = _common_reactions(base, other)
    nu = stoichiometry(base).sel(reaction=common)
    budgets, rows_nu = [], []
    if is_family(base, family):
        budgets.append(family)
        rows_nu.append((family_weights(base).sel(family=family) * nu).sum("species").values)
    for s in species:
        if s in set(nu["species"].values.tolist()) and s not in budgets:
            budgets.append(s)
            rows_nu.append(nu.sel(species=s).values)
    if not budgets:
        return []
    key = np.array(rows_nu)                       # (budget, reaction)
    mb = time_mean(base["reaction_rate"].sel(reaction=common)).values
    mo = time_mean(other["reaction_rate"].sel(reaction=common)).values
    # entries: single reactions and netted reverse pairs
    pairs = reverse_pairs(nu.values)
    paired = {i for p in pairs for i in p}
    entries = [(j,) for j in range(len(common)) if j not in paired] + [tuple(p) for p in pairs]
    net_b = np.array([mb[e[0]] - (mb[e[1]] if len(e) == 2 else 0.0) for e in entries])
    net_o = np.array([mo[e[0]] - (mo[e[1]] if len(e) == 2 else 0.0) for e in entries])
    coef = key[:, [e[0] for e in entries]]        # the pair's net uses the first reaction's coefficients
    turnover = 0.5 * np.sum(np.abs(coef * net_b), axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        effect = np.where(turnover[:, None] > 0, 100.0 * coef * (net_o - net_b) / turnover[:, None], 0.0)
    best = np.argmax(np.abs(effect), axis=0)
    score = np.abs(effect[best, np.arange(len(entries))])
    eq = base["equation"].sel(reaction=common).values if "equation" in base.coords else [""] * len(common)
    rows = []
    for k in np.argsort(-score, kind="stable")[:top]:
        if score[k] == 0:
            break
        e = entries[k]
        name = common[e[0]] if len(e) == 1 else f"{common[e[0]]} - {common[e[1]]}"
        rows.append({"section": "reaction_rate", "time": "run mean", "term": name,
                     "equation": str(eq[e[0]]) + ("  (net of the reverse pair)" if len(e) == 2 else ""),
                     "base": float(net_b[k]), "other": float(net_o[k]),
                     "change_percent": percent_change(net_o[k], net_b[k]),
                     "effect_percent": float(effect[best[k], k]), "budget": budgets[best[k]],
                     "units": "cm-3 s-1"})
    return rows


def spread_beside(rows: list[dict], members: xr.Dataset, family: str = "Ox") -> list[dict]:
    """Set the change beside the spread of a member file (e.g. an uncertainty ensemble of BASE).

    For every species row and accumulated-loss row, adds ``spread_percent``
    (species: half the 5-95 % range of the members in % of their median) or
    ``spread_points`` (loss: half the 5-95 % range in % points), at the same time.
    """
    from .members import successful_members
    ok = xr.DataArray(successful_members(members), dims="member")
    x = members["mole_fraction"].where(ok)
    acc = None
    if "cycle_rate" in members.variables:
        acc = accumulated_loss(members, family, cycles_only=not has_total_loss(members))["loss_percent"].where(ok)
    out = []
    for r in rows:
        r = dict(r)
        if r["section"] in ("species", "accumulated_loss"):
            t = pick_time(members, np.datetime64(r["time"]), "--spread")
            if r["section"] == "species" and r["term"] in set(members["species"].values.tolist()):
                v = x.sel(species=r["term"], time=t)
                lo, med, hi = (float(q) for q in v.quantile([0.05, 0.5, 0.95], dim="member", skipna=True))
                r["spread_percent"] = 50.0 * (hi - lo) / med if med else float("nan")
            elif r["section"] == "accumulated_loss" and acc is not None and r["term"] in set(acc["term"].values.tolist()):
                v = acc.sel(term=r["term"], time=t)
                lo, hi = (float(q) for q in v.quantile([0.05, 0.95], dim="member", skipna=True))
                r["spread_points"] = 0.5 * (hi - lo)
        out.append(r)
    return out


def touched_species(base: xr.Dataset, changed: list[dict]) -> tuple[str, ...]:
    """Variable species whose net stoichiometry the changed reactions involve (budgets to rank by)."""
    if not changed or "stoichiometry" not in base.variables:
        return ()
    nu = stoichiometry(base)
    fixed = (set(nu["species"].values[base["species_is_fixed"].values == 1].tolist())
             if "species_is_fixed" in base.coords else set())
    out: list[str] = []
    for r in dict.fromkeys(c["term"] for c in changed):
        if r in set(nu["reaction"].values.tolist()):
            col = nu.sel(reaction=r).values
            out += [str(s) for s, v in zip(nu["species"].values, col) if v != 0 and s not in fixed]
    return tuple(dict.fromkeys(out))


def compare_results(base: xr.Dataset, other: xr.Dataset, *, times=None, at=(), species=None,
                    family: str = "Ox", top: int = 10, time_notes=None) -> list[dict]:
    """Every comparison row: notes, changed reactions, species and loss by cycle at times, rate changes.

    ``times`` (default: the time of the largest O3 difference, then the end)
    plus ``at`` (user dates) are the times of the species and loss tables.
    """
    if species is None:
        species = [s for s in DEFAULT_SPECIES
                   if s in set(base["species"].values.tolist()) and s in set(other["species"].values.tolist())]
    else:
        names_or_error(base, "species", species, "species (--species, BASE)")
        names_or_error(other, "species", species, "species (--species, OTHER)")
    if top < 1:
        raise ResultError(f"--top must be at least 1, got {top}")
    rows = [{"section": "note", "term": n} for n in run_differences(base, other)]
    changed = changed_reactions(base, other)
    rows += changed
    if times is None:
        largest = largest_difference_time(base, other, "O3")
        times, notes = (["end"], ["end"]) if largest is None else ([largest, "end"], ["largest |dO3|", "end"])
    else:
        notes = list(time_notes) if time_notes is not None else [""] * len(times)
    times, notes = list(times) + list(at), list(notes) + ["--at"] * len(at)
    rows += species_changes(base, other, times, species, notes)
    if "cycle_rate" in base and "cycle_rate" in other:
        rows += loss_changes(base, other, times, family, notes)
    touched = touched_species(base, changed)
    rows += rate_changes(base, other, top, family, touched)
    return rows
