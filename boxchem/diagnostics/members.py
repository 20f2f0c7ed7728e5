"""Result files with a ``member`` dimension (sweeps, ensembles): select, summarise, build.

The layout is the team's member-file contract (DEVELOPERS.md, "Member files"):
dimension ``member`` (coordinate 0..M-1), auxiliary coordinate ``member_label``,
``member_table`` (member, factor), ``member_status`` (member; 0 pending,
1 success, 2 failed), ``member_message``, ``member_failure_time``, and the data
variables of a single run with a leading ``member`` dimension.  Members whose
status is not success hold NaN.

* :func:`select_member` turns a member file into a single-run-like Dataset
  (by index or label), refusing a member that did not succeed.
* :func:`summarize_members` gives the median and the 5-95 % range across the
  successful members of any array (NaN-aware quantiles).
* :func:`members_dataset` builds the layout from single-run Datasets (tests,
  small studies); :func:`from_sweep_layout` converts the older sweep layout
  (one dimension per varied key) so those files read the same way.
"""
from __future__ import annotations

from typing import Any, Mapping, Sequence

import numpy as np
import xarray as xr

from .result import ResultError

__all__ = ["MEMBER_DIM", "STATUS_PENDING", "STATUS_SUCCESS", "STATUS_FAILED", "is_members",
           "member_labels", "member_index", "select_member", "successful_members",
           "summarize_members", "members_dataset", "from_sweep_layout", "SUMMARY_QUANTILES",
           "DEFAULT_MEMBER_VARIABLES", "member_overview", "rows_across_members", "MemberError"]

MEMBER_DIM = "member"
STATUS_PENDING, STATUS_SUCCESS, STATUS_FAILED = 0, 1, 2
#: the summary across members: median and the 5-95 % range (common practice, no source)
SUMMARY_QUANTILES = (0.05, 0.5, 0.95)
#: variables a member file holds by default (contract); the rest must be asked for
DEFAULT_MEMBER_VARIABLES = ("mole_fraction", "family_number_density", "cycle_rate", "temperature",
                            "pressure", "air_number_density", "solar_zenith_angle")


class MemberError(ResultError):
    """A member that does not exist or did not succeed was asked for."""


def is_members(ds: xr.Dataset) -> bool:
    """True for a member file (sweep or ensemble): it has the ``member`` dimension."""
    return MEMBER_DIM in ds.dims


def member_labels(ds: xr.Dataset) -> list[str]:
    if "member_label" in ds.coords or "member_label" in ds.variables:
        return [str(v) for v in ds["member_label"].values]
    return [str(i) for i in range(ds.sizes[MEMBER_DIM])]


def _source(ds: xr.Dataset) -> str:
    return str(ds.attrs.get("source_file", "the member file"))


def member_index(ds: xr.Dataset, key: int | str) -> int:
    """Position of a member given by index (``3``, ``"3"``) or by its ``member_label``."""
    n = ds.sizes[MEMBER_DIM]
    labels = member_labels(ds)
    if isinstance(key, str) and key in labels:
        return labels.index(key)
    try:
        i = int(key)
    except (TypeError, ValueError):
        shown = ", ".join(labels[:8]) + (", ..." if n > 8 else "")
        raise MemberError(f"{_source(ds)}: no member {key!r}; give an index 0..{n - 1} or a label "
                          f"({shown})") from None
    if not 0 <= i < n:
        raise MemberError(f"{_source(ds)}: member index {i} out of range; the file has {n} members "
                          f"(0..{n - 1})")
    return i


def successful_members(ds: xr.Dataset) -> np.ndarray:
    """Boolean (member,) mask of members whose status is success (all, if no status is stored)."""
    if "member_status" not in ds.variables:
        return np.ones(ds.sizes[MEMBER_DIM], dtype=bool)
    return np.asarray(ds["member_status"].values) == STATUS_SUCCESS


def select_member(ds: xr.Dataset, key: int | str) -> xr.Dataset:
    """One member as a single-run-like Dataset (it may hold fewer variables than a run).

    A member that failed or is still pending is an error that carries its message.
    """
    i = member_index(ds, key)
    if not successful_members(ds)[i]:
        status = int(ds["member_status"].values[i])
        word = {STATUS_PENDING: "has not run yet (pending)", STATUS_FAILED: "failed"}.get(status, f"has status {status}")
        msg = str(ds["member_message"].values[i]) if "member_message" in ds.variables else ""
        raise MemberError(f"{_source(ds)}: member {i} ({member_labels(ds)[i]}) {word}"
                          + (f": {msg}" if msg else "") + "; choose another with --member")
    one = ds.isel({MEMBER_DIM: i})
    one = one.drop_vars([v for v in one.variables if v.startswith("member_") or v == MEMBER_DIM])
    one = _with_member_scale(one, ds, i)
    one.attrs = dict(ds.attrs, member_index=i, member_label=member_labels(ds)[i],
                     member_settings=_member_settings(ds, i))
    from .conservation import annotate, member_report
    report = member_report(ds, i)
    if report is not None:         # the member's own guard, as a run file carries it
        annotate(one, report)
    return one


def _scale_columns(ds: xr.Dataset) -> dict[str, int]:
    """reaction id -> column of member_table for the ``scale.<reaction id>`` columns."""
    if "member_table" not in ds.variables:
        return {}
    return {str(f)[6:]: j for j, f in enumerate(ds["factor"].values) if str(f).startswith("scale.")}


def _with_member_scale(one: xr.Dataset, ds: xr.Dataset, i: int) -> xr.Dataset:
    """The member's total [scale] factor per reaction: the file's rate_scale_factor (the scenario's
    own [scale]) times the member's ``scale.<id>`` factors (contract: multiplied onto [scale])."""
    cols = _scale_columns(ds)
    if "rate_scale_factor" not in one.variables or not cols:
        return one
    factor = one["rate_scale_factor"].values.astype(float).copy()
    ids = [str(r) for r in one["reaction"].values]
    table = ds["member_table"].values[i]
    for rid, j in cols.items():
        if rid in ids:
            factor[ids.index(rid)] *= float(table[j])
    return one.assign_coords(rate_scale_factor=("reaction", factor, one["rate_scale_factor"].attrs))


def _member_settings(ds: xr.Dataset, i: int) -> str:
    """'scale.clo_clo_m=1.2, run.start=...' from the member table (what this member changed)."""
    parts = []
    if "member_table" in ds.variables:
        for f, v in zip(ds["factor"].values, ds["member_table"].values[i]):
            parts.append(f"{f}={float(v):g}")
    if "member_table_text" in ds.variables:
        for f, v in zip(ds["text_factor"].values, ds["member_table_text"].values[i]):
            parts.append(f"{f}={v}")
    return ", ".join(parts)


def summarize_members(da: xr.DataArray, quantiles: Sequence[float] = SUMMARY_QUANTILES) -> xr.Dataset:
    """Median and range across members: variables ``p05``, ``median``, ``p95`` (and ``n_members``).

    NaN members (failed or pending) are left out of the quantiles.
    """
    q = da.quantile(list(quantiles), dim=MEMBER_DIM, skipna=True)
    names = {0.05: "p05", 0.5: "median", 0.95: "p95"}
    out = xr.Dataset({names.get(float(v), f"q{float(v):g}"): q.sel(quantile=v, drop=True)
                      for v in q["quantile"].values})
    out["n_members"] = da.notnull().any([d for d in da.dims if d != MEMBER_DIM]).sum(MEMBER_DIM) \
        if da.ndim > 1 else da.notnull().sum(MEMBER_DIM)
    for v in out.data_vars:
        if v != "n_members":
            out[v].attrs.update(da.attrs)
    return out


def member_overview(ds: xr.Dataset) -> list[dict]:
    """One row per member: index, label, status word, settings, message (for printed tables)."""
    words = {STATUS_PENDING: "pending", STATUS_SUCCESS: "success", STATUS_FAILED: "failed"}
    status = ds["member_status"].values if "member_status" in ds.variables else \
        np.full(ds.sizes[MEMBER_DIM], STATUS_SUCCESS)
    messages = ds["member_message"].values if "member_message" in ds.variables else [""] * len(status)
    return [{"member": i, "label": lab, "status": words.get(int(s), str(s)),
             "settings": _member_settings(ds, i), "message": str(m)}
            for i, (lab, s, m) in enumerate(zip(member_labels(ds), status, messages))]


# ---------------------------------------------------------------------------
# building member files
# ---------------------------------------------------------------------------
def members_dataset(runs: Sequence[xr.Dataset | None], table: Mapping[str, Sequence[Any]], *,
                    labels: Sequence[str] | None = None, messages: Sequence[str] | None = None,
                    variables: Sequence[str] | None = DEFAULT_MEMBER_VARIABLES) -> xr.Dataset:
    """Concatenate single-run Datasets along ``member`` in the member-file layout.

    ``runs[i]`` is None for a failed member (its data are NaN, status failed).
    ``table`` maps column names (``scale.clo_clo_m``, ``run.start``, ...) to one
    value per member; numeric columns go to ``member_table``, others to
    ``member_table_text``.  ``variables`` selects the data variables with a
    time dimension to keep (None: all); the matrices and coordinates of a
    single run are kept once.
    """
    ok = [r for r in runs if r is not None]
    if not ok:
        raise MemberError("members_dataset: every member failed; nothing to combine")
    template = ok[0]
    timed = [v for v in template.data_vars if "time" in template[v].dims
             and (variables is None or v in variables)]
    static = [v for v in template.data_vars if "time" not in template[v].dims]
    nan_run = template[timed].copy(deep=True)
    for v in timed:
        nan_run[v] = nan_run[v].astype(float) * np.nan
    stacked = xr.concat([(r if r is not None else nan_run)[timed] for r in runs], dim=MEMBER_DIM,
                        coords="minimal", compat="override", join="override", combine_attrs="override")
    out = stacked.assign(template[static])
    m = len(runs)
    out = out.assign_coords({MEMBER_DIM: (MEMBER_DIM, np.arange(m), {"long_name": "member index"})})
    labels = list(labels) if labels is not None else [f"member {i}" for i in range(m)]
    out = out.assign_coords(member_label=(MEMBER_DIM, np.array(labels, dtype=object),
                                          {"long_name": "member label"}))
    numeric = {k: v for k, v in table.items() if _all_numbers(v)}
    text = {k: v for k, v in table.items() if k not in numeric}
    out["member_table"] = ((MEMBER_DIM, "factor"),
                           np.array([list(map(float, numeric[k])) for k in numeric]).T.reshape(m, len(numeric)),
                           {"long_name": "value of each member-table column for each member"})
    out = out.assign_coords(factor=("factor", np.array(list(numeric), dtype=object),
                                    {"long_name": "member-table column name"}))
    if text:
        out["member_table_text"] = ((MEMBER_DIM, "text_factor"),
                                    np.array([[str(x) for x in text[k]] for k in text], dtype=object).T,
                                    {"long_name": "value of each non-numeric member-table column"})
        out = out.assign_coords(text_factor=("text_factor", np.array(list(text), dtype=object),
                                             {"long_name": "non-numeric member-table column name"}))
    status = np.array([STATUS_SUCCESS if r is not None else STATUS_FAILED for r in runs], dtype=np.int8)
    out["member_status"] = (MEMBER_DIM, status, {
        "long_name": "status of each member", "flag_values": np.array([0, 1, 2], dtype=np.int8),
        "flag_meanings": "pending success failed"})
    msgs = list(messages) if messages is not None else ["" if r is not None else "failed" for r in runs]
    out["member_message"] = (MEMBER_DIM, np.array(msgs, dtype=object), {"long_name": "member message"})
    out["member_failure_time"] = (MEMBER_DIM, np.full(m, np.nan), {
        "units": "s", "long_name": "time of failure since the run start (NaN when none)"})
    # rate_scale_factor of a member file is the scenario's own [scale]; the template run had its
    # member's scale.<id> factors multiplied in, which are taken out again here
    if "rate_scale_factor" in out.variables:
        base_scale = out["rate_scale_factor"].values.astype(float).copy()
        ids = [str(r) for r in out["reaction"].values]
        first = runs.index(template)
        for key, vals in numeric.items():
            if key.startswith("scale.") and key[6:] in ids and float(vals[first]) != 0:
                base_scale[ids.index(key[6:])] /= float(vals[first])
        out = out.assign_coords(rate_scale_factor=("reaction", base_scale, out["rate_scale_factor"].attrs))
    out.attrs = dict(template.attrs, boxchem_result_kind="members")
    return out


def _all_numbers(values) -> bool:
    return all(isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)
               for v in values)


def from_sweep_layout(ds: xr.Dataset) -> xr.Dataset:
    """Convert a file of today's ``boxchem sweep`` (one dimension per varied key) to the member layout.

    Members are numbered in the sweep's own order (the first key varies slowest).
    """
    dims = [d for d in ds["member_status"].dims]
    if "time" not in ds.dims:
        raise MemberError(f"{_source(ds)}: this sweep varied the start date and is stored on elapsed "
                          "time; it cannot be read as a member file (re-run it with the ensemble engine)")
    keys = [str(ds[d].attrs.get("sweep_key", d)) for d in dims]
    stacked = ds.stack({MEMBER_DIM: dims})
    values = {k: [v[j] for v in stacked[MEMBER_DIM].values] for j, k in enumerate(keys)}
    labels = [", ".join(f"{k}={v[j]}" for j, k in enumerate(keys)) for v in stacked[MEMBER_DIM].values]
    status = np.where(stacked["member_status"].values == "ok", STATUS_SUCCESS, STATUS_FAILED).astype(np.int8)
    messages = stacked["member_error"].values
    out = stacked.drop_vars(["member_status", "member_error", MEMBER_DIM, *dims], errors="ignore")
    out = out.assign_coords({MEMBER_DIM: np.arange(len(labels))})
    # variables that did not vary with the sweep (matrices) lose the member dimension
    for v in list(out.data_vars):
        if MEMBER_DIM in out[v].dims and "time" not in out[v].dims:
            out[v] = out[v].isel({MEMBER_DIM: 0}, drop=True)
    out = out.transpose(MEMBER_DIM, ...)
    out = out.assign_coords(member_label=(MEMBER_DIM, np.array(labels, dtype=object)))
    numeric = {k: v for k, v in values.items() if _all_numbers(v)}
    text = {k: v for k, v in values.items() if k not in numeric}
    out["member_table"] = ((MEMBER_DIM, "factor"),
                           np.array([[float(x) for x in numeric[k]] for k in numeric]).T.reshape(len(labels), -1))
    out = out.assign_coords(factor=("factor", np.array(list(numeric), dtype=object)))
    if text:
        out["member_table_text"] = ((MEMBER_DIM, "text_factor"),
                                    np.array([[str(x) for x in text[k]] for k in text], dtype=object).T)
        out = out.assign_coords(text_factor=("text_factor", np.array(list(text), dtype=object)))
    out["member_status"] = (MEMBER_DIM, status, {"flag_values": np.array([0, 1, 2], dtype=np.int8),
                                                  "flag_meanings": "pending success failed"})
    out["member_message"] = (MEMBER_DIM, np.array([str(m) for m in messages], dtype=object))
    out.attrs["boxchem_result_kind"] = "members"
    return out


# ---------------------------------------------------------------------------
# table rows across members
# ---------------------------------------------------------------------------
def rows_across_members(ds: xr.Dataset, make_rows, *, key_fields=("section", "period", "time", "term")) -> list[dict]:
    """Run ``make_rows(member_dataset) -> list[dict]`` on every successful member; aggregate.

    Rows are matched by ``key_fields``; each numeric field becomes the median
    over members, with ``FIELD_p05`` and ``FIELD_p95`` beside it and
    ``n_members`` the count.  Text fields keep the members' common value, or
    say "(differs between members)".
    The loop runs once per member over reductions already made (a table of
    rows), not inside a computation over time.
    """
    per_member = [make_rows(select_member(ds, i)) for i in np.flatnonzero(successful_members(ds))]
    if not per_member:
        raise MemberError(f"{_source(ds)}: no member succeeded; nothing to summarise")
    order: dict[tuple, dict] = {}
    values: dict[tuple, dict[str, list]] = {}
    for rows in per_member:
        for row in rows:
            key = tuple(row.get(k) for k in key_fields)
            first = order.setdefault(key, dict(row))
            for f, v in row.items():
                if isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool):
                    values.setdefault(key, {}).setdefault(f, []).append(float(v))
                elif first.get(f) != v:
                    first[f] = "(differs between members)"
    out = []
    for key, first in order.items():
        row = dict(first)
        for f, vs in values.get(key, {}).items():
            arr = np.asarray(vs)
            lo, med, hi = np.nanquantile(arr, SUMMARY_QUANTILES) if np.isfinite(arr).any() else (np.nan,) * 3
            row[f], row[f"{f}_p05"], row[f"{f}_p95"] = float(med), float(lo), float(hi)
        row["n_members"] = max((len(v) for v in values.get(key, {}).values()), default=0)
        out.append(row)
    return out
