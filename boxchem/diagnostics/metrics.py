"""Metrics: named scalar quantities of a run that analyses target.

A metric is written in a small syntax of our own (docs/sensitivity-uncertainty.md)::

    O3 at 2026-10-01                      mole fraction of a species at a time [1]
    mean ClO on 2026-09-15                daily mean (UTC day) of a species [1]
    mean O3 over 2026-09-01..2026-09-30   time mean over a period [1]
    noon ClO over start+1d..end           mean of the local-noon values in a period [1]
    max ClO on 2026-09-15                 maximum over a period [1]
    loss Ox over 2026-08-01..2026-10-01   accumulated chemical loss of a family [mol mol-1]
    loss Ox by clo_dimer over ...         ... of one catalytic cycle [mol mol-1]
    share clo_dimer over ...              a cycle's fraction of the family's total loss [1]

optionally prefixed by a label (``o3oct = O3 at 2026-10-01``); several
metrics are separated by ``;``.  Times are ISO dates or date-times (UTC),
``start`` / ``end`` of the run, or those with an offset (``start+10d``,
``end-6h``).  A period is ``TIME..TIME`` or a single date (that UTC day).

:func:`parse_metrics` reads the text once (syntax errors say where);
:meth:`Metric.check` resolves names and the period against a run (a
scenario or a result), with did-you-mean suggestions and the run's period
in the error; :func:`evaluate_metrics` evaluates on a single-run Dataset or
on a member file, vectorised over every leading dimension (``member``).

Definitions: values between output times are linear in time; time means and
accumulated loss use the trapezoid rule on the output times (as
``diagnostics.ozone_loss``); loss in mole fraction is the integral of
L / n_air, so compression of the box does not count as loss; the family's
total loss is on the "recycled" basis of ``diagnostics.ozone_loss`` (gross
loss minus production by reactions that consume a variable species); local
noon is 12:00 local mean solar time (UTC + longitude/15 h; the equation of
time, at most about 16 min, is ignored).
"""
from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field, replace
from typing import Iterable, Sequence

import numpy as np
import xarray as xr

from ..errors import BoxchemError

__all__ = ["MetricError", "Metric", "RunContext", "parse_metric", "parse_metrics",
           "context_from_scenario", "context_from_dataset", "evaluate_metric",
           "evaluate_metrics", "metric_series", "required_variables", "check_name", "AGGREGATES"]

#: reductions of a species over a period
AGGREGATES = ("mean", "noon", "max", "min")
_KINDS = ("at", *AGGREGATES, "loss", "share")
SECONDS = {"d": 86400.0, "h": 3600.0, "min": 60.0, "s": 1.0}


class MetricError(BoxchemError):
    """A metric that cannot be read, or that does not fit the run it is applied to."""


# ---------------------------------------------------------------------------
# times and periods
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class TimeSpec:
    """A time as written: an absolute UTC time, or ``start``/``end`` plus an offset [s]."""

    anchor: str                       # "absolute", "start" or "end"
    offset_s: float = 0.0
    absolute: np.datetime64 | None = None
    text: str = ""

    def resolve(self, start: np.datetime64, end: np.datetime64) -> np.datetime64:
        base = {"absolute": self.absolute, "start": start, "end": end}[self.anchor]
        return base + np.timedelta64(int(round(self.offset_s * 1e9)), "ns")


_RELATIVE = re.compile(r"^(start|end)(?:([+-])(\d+(?:\.\d*)?)(d|h|min|s))?$")
_DATE_ONLY = re.compile(r"^\d{4}-\d{2}-\d{2}$")


def _parse_time(text: str, where: str) -> TimeSpec:
    m = _RELATIVE.match(text)
    if m:
        offset = 0.0
        if m.group(2):
            offset = float(m.group(3)) * SECONDS[m.group(4)] * (1 if m.group(2) == "+" else -1)
        return TimeSpec(m.group(1), offset, None, text)
    raw = text[:-1] if text.endswith("Z") else text
    try:
        value = np.datetime64(raw, "ns")
    except ValueError:
        raise MetricError(f"{where}: {text!r} is not a time; write an ISO date or date-time in UTC "
                          f"(2026-10-01, 2026-10-01T12:00), 'start', 'end', or an offset such as "
                          f"'start+10d', 'end-6h'") from None
    return TimeSpec("absolute", 0.0, value, text)


@dataclass(frozen=True)
class PeriodSpec:
    first: TimeSpec
    last: TimeSpec
    text: str


def _parse_period(text: str, where: str) -> PeriodSpec:
    if ".." in text:
        a, _, b = text.partition("..")
        return PeriodSpec(_parse_time(a.strip(), where), _parse_time(b.strip(), where), text)
    if _DATE_ONLY.match(text):
        day = _parse_time(text, where)
        return PeriodSpec(day, replace(day, offset_s=86400.0), text)
    raise MetricError(f"{where}: {text!r} is not a period; write TIME..TIME "
                      f"(2026-09-01..2026-10-01, start+1d..end) or one date (2026-09-15, a UTC day)")


# ---------------------------------------------------------------------------
# the run a metric applies to
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class RunContext:
    """What a metric is checked against: names of a run and its period (UTC)."""

    species: tuple[str, ...]
    families: tuple[str, ...]
    cycles: tuple[str, ...]
    cycle_family: dict = field(default_factory=dict)
    start: np.datetime64 = np.datetime64("NaT")
    end: np.datetime64 = np.datetime64("NaT")
    source: str = "the run"
    longitude: float = 0.0            # degrees east, at the start (local noon)

    def period_text(self) -> str:
        return f"{_fmt(self.start)} to {_fmt(self.end)}"


def _fmt(t: np.datetime64) -> str:
    return str(np.datetime_as_string(np.datetime64(t, "s"), unit="m")) + "Z"


def context_from_scenario(scenario) -> RunContext:
    """The :class:`RunContext` of a :class:`~boxchem.scenario.Scenario` (before running it)."""
    mech = scenario.mechanism
    lon = scenario.longitude
    lon = float(np.ravel(lon.values)[0]) if hasattr(lon, "values") else float(lon or 0.0)
    return RunContext(tuple(mech.species_names), tuple(f.name for f in mech.families),
                      tuple(c.name for c in mech.cycles), {c.name: c.family for c in mech.cycles},
                      np.datetime64(scenario.start, "ns"), np.datetime64(scenario.end, "ns"),
                      str(scenario.source), lon)


def context_from_dataset(ds: xr.Dataset) -> RunContext:
    """The :class:`RunContext` of a run or member Dataset."""
    def names(dim):
        return tuple(str(v) for v in ds[dim].values) if dim in ds.coords else ()
    cycles = names("cycle")
    families = {}
    if "cycle_family" in ds.coords:
        families = dict(zip(cycles, (str(v) for v in ds["cycle_family"].values)))
    t = ds["time"].values.astype("datetime64[ns]")
    lon = float(ds["longitude"].values.ravel()[0]) if "longitude" in ds.variables else 0.0
    return RunContext(names("species"), names("family"), cycles, families, t[0], t[-1],
                      str(ds.attrs.get("source_file", ds.attrs.get("scenario_source", "the result"))),
                      lon)


# ---------------------------------------------------------------------------
# the metric
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Metric:
    """One parsed metric.  ``kind`` is ``at``, ``mean``, ``noon``, ``max``, ``min``,
    ``loss`` or ``share``; ``species`` (species metrics), ``family`` and ``cycle``
    (loss metrics; ``cycle`` None = total loss), ``time`` or ``period``."""

    kind: str
    text: str
    label: str
    species: str | None = None
    family: str | None = None
    cycle: str | None = None
    time: TimeSpec | None = None
    period: PeriodSpec | None = None

    @property
    def units(self) -> str:
        return "1" if self.kind == "share" else "mol mol-1"

    @property
    def long_name(self) -> str:
        return self.text

    def needs(self) -> tuple[str, ...]:
        """Result variables this metric reads."""
        if self.kind == "loss" and self.cycle is not None:
            return ("cycle_rate", "air_number_density")
        if self.kind in ("loss", "share"):
            return ("reaction_rate", "cycle_rate", "air_number_density")
        if self.kind == "noon":
            return ("mole_fraction", "longitude")
        return ("mole_fraction",)

    # -- checking against a run ------------------------------------------------
    def check(self, context: RunContext) -> "Metric":
        """Resolve names and times against a run; raise MetricError saying what is valid."""
        where = f"metric {self.text!r}"
        out = self
        if self.species is not None:
            out = replace(out, species=check_name(self.species, context.species, "species",
                                                      where, context))
        if self.cycle is not None:
            out = replace(out, cycle=check_name(self.cycle, context.cycles, "cycle", where,
                                                    context))
            if out.family is None:
                out = replace(out, family=context.cycle_family.get(out.cycle, "Ox"))
            elif context.cycle_family.get(out.cycle, out.family) != out.family:
                raise MetricError(f"{where}: cycle {out.cycle!r} destroys "
                                  f"{context.cycle_family[out.cycle]}, not {out.family}")
        if out.kind in ("loss", "share"):
            fam = out.family or "Ox"
            out = replace(out, family=check_name(fam, context.families, "family", where,
                                                     context))
        for t, label in self._times(context):
            if not (context.start <= t <= context.end):
                raise MetricError(f"{where}: {label} {_fmt(t)} is outside the run "
                                  f"({context.source} runs from {context.period_text()})")
        if out.period is not None:
            lo, hi = out.period.first.resolve(context.start, context.end), \
                out.period.last.resolve(context.start, context.end)
            if not hi > lo:
                raise MetricError(f"{where}: the period {out.period.text!r} ends before it starts "
                                  f"({_fmt(lo)} to {_fmt(hi)})")
            if out.kind == "noon" and _noon_times(context.start, context.longitude, lo, hi).size == 0:
                raise MetricError(f"{where}: no local noon (12:00 mean solar time at longitude "
                                  f"{context.longitude:g}, i.e. "
                                  f"{_fmt(_noon_times(context.start, context.longitude, lo, lo + np.timedelta64(1, 'D'))[0])} "
                                  f"and daily) falls inside {_fmt(lo)} to {_fmt(hi)}")
        return out

    def _times(self, context: RunContext):
        if self.time is not None:
            yield self.time.resolve(context.start, context.end), "time"
        if self.period is not None:
            yield self.period.first.resolve(context.start, context.end), "period start"
            yield self.period.last.resolve(context.start, context.end), "period end"


def check_name(name: str, valid: Sequence[str], what: str, where: str, context) -> str:
    """``name`` if it is in ``valid``, else MetricError with did-you-mean and the valid names."""
    if name in valid:
        return name
    # names are case-sensitive (CO is not Co): a case-only difference is suggested, not taken
    folded = {v.lower(): v for v in valid}
    close = ([folded[name.lower()]] if name.lower() in folded else []) + \
        difflib.get_close_matches(name, list(valid), n=3, cutoff=0.5)
    close = list(dict.fromkeys(close))[:3]
    hint = f" - did you mean {' or '.join(repr(c) for c in close)}?" if close else ""
    listing = ", ".join(valid) if len(valid) <= 60 else ", ".join(valid[:60]) + ", ..."
    raise MetricError(f"{where}: unknown {what} {name!r}{hint} ({context.source} has: "
                      f"{listing or '(none)'})")


# ---------------------------------------------------------------------------
# parsing
# ---------------------------------------------------------------------------
_SYNTAX = ("SPECIES at TIME | mean|noon|max|min SPECIES on DATE | mean|noon|max|min SPECIES "
           "over TIME..TIME | loss [FAMILY] [by CYCLE] over PERIOD | share CYCLE over PERIOD")
_LABEL = re.compile(r"^([A-Za-z_][A-Za-z0-9_.-]*)\s*=\s*(.+)$")


def parse_metric(text: str) -> Metric:
    """Read one metric (syntax only; names are checked by :meth:`Metric.check`)."""
    raw = " ".join(str(text).split())
    where = f"metric {raw!r}"
    label = None
    m = _LABEL.match(raw)
    if m:
        label, raw = m.group(1), m.group(2).strip()
    words = raw.split(" ")
    if not raw:
        raise MetricError(f"empty metric; write one of: {_SYNTAX}")

    def expect(i, word):
        if len(words) <= i or words[i] != word:
            found = repr(words[i]) if len(words) > i else "the end"
            raise MetricError(f"{where}: expected {word!r} at word {i + 1}, found {found}; "
                              f"metrics look like: {_SYNTAX}")

    def tail(i):
        if len(words) != i + 1:
            raise MetricError(f"{where}: unexpected text after {words[i - 1]!r}: "
                              f"{' '.join(words[i:])!r}; metrics look like: {_SYNTAX}")
        return words[i]

    head = words[0]
    if len(words) >= 2 and words[1] == "at":
        if len(words) != 3:
            raise MetricError(f"{where}: expected 'SPECIES at TIME'")
        metric = Metric("at", raw, label or raw, species=head, time=_parse_time(words[2], where))
    elif head in AGGREGATES:
        if len(words) < 4 or words[2] not in ("on", "over"):
            raise MetricError(f"{where}: expected '{head} SPECIES on DATE' or "
                              f"'{head} SPECIES over TIME..TIME'")
        metric = Metric(head, raw, label or raw, species=words[1],
                        period=_parse_period(tail(3), where))
    elif head == "loss":
        i, family, cycle = 1, None, None
        if len(words) > i and words[i] not in ("by", "over"):
            family, i = words[i], i + 1
        if len(words) > i and words[i] == "by":
            if len(words) <= i + 1:
                raise MetricError(f"{where}: 'by' needs a cycle name")
            cycle, i = words[i + 1], i + 2
        expect(i, "over")
        metric = Metric("loss", raw, label or raw, family=family, cycle=cycle,
                        period=_parse_period(tail(i + 1), where))
    elif head == "share":
        if len(words) < 2:
            raise MetricError(f"{where}: 'share' needs a cycle name")
        expect(2, "over")
        metric = Metric("share", raw, label or raw, cycle=words[1],
                        period=_parse_period(tail(3), where))
    else:
        raise MetricError(f"{where}: cannot read it; metrics look like: {_SYNTAX}")
    return metric


def parse_metrics(texts: str | Iterable[str]) -> list[Metric]:
    """Read metrics: a string with ``;``-separated metrics, or several strings."""
    if isinstance(texts, str):
        texts = [texts]
    metrics = [parse_metric(part) for t in texts for part in str(t).split(";") if part.strip()]
    if not metrics:
        raise MetricError(f"no metric given; write one of: {_SYNTAX}")
    labels = [m.label for m in metrics]
    dupes = sorted({x for x in labels if labels.count(x) > 1})
    if dupes:
        raise MetricError(f"metric(s) given twice: {', '.join(repr(d) for d in dupes)}")
    return metrics


def required_variables(metrics: Iterable[Metric]) -> tuple[str, ...]:
    """Union of the result variables the metrics read, in a stable order."""
    out: list[str] = []
    for m in metrics:
        out.extend(v for v in m.needs() if v not in out)
    return tuple(out)


# ---------------------------------------------------------------------------
# evaluation (vectorised over leading dimensions such as member)
# ---------------------------------------------------------------------------
def _seconds(ds: xr.Dataset) -> np.ndarray:
    t = ds["time"].values.astype("datetime64[ns]")
    return (t - t[0]).astype(np.float64) * 1e-9


def _to_seconds(ds: xr.Dataset, when: np.datetime64) -> float:
    t0 = ds["time"].values.astype("datetime64[ns]")[0]
    return float((np.datetime64(when, "ns") - t0).astype(np.float64) * 1e-9)


def _interp(values: np.ndarray, t: np.ndarray, at: np.ndarray) -> np.ndarray:
    """Linear interpolation along the last axis of ``values`` at times ``at`` (1-D)."""
    at = np.atleast_1d(np.asarray(at, float))
    j = np.clip(np.searchsorted(t, at, side="right") - 1, 0, max(t.size - 2, 0))
    if t.size == 1:
        return np.repeat(values[..., :1], at.size, axis=-1)
    w = (at - t[j]) / (t[j + 1] - t[j])
    return values[..., j] * (1.0 - w) + values[..., j + 1] * w


def _cumulative(values: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Trapezoid integral from the first time, along the last axis."""
    steps = 0.5 * (values[..., 1:] + values[..., :-1]) * np.diff(t)
    return np.concatenate([np.zeros_like(values[..., :1]), np.cumsum(steps, axis=-1)], axis=-1)


def _time_last(da: xr.DataArray) -> xr.DataArray:
    return da.transpose(*[d for d in da.dims if d != "time"], "time")


def _require(ds: xr.Dataset, metric: Metric) -> None:
    missing = [v for v in metric.needs() if v not in ds.variables]
    if missing:
        src = ds.attrs.get("source_file", "this result")
        raise MetricError(
            f"metric {metric.text!r} needs {', '.join(missing)}, which {src} does not hold; "
            f"a member file saves it when asked (boxchem.ensemble(..., variables=[...]) or the "
            f"analyses, which ask for what their metrics need)")


def _species_series(ds: xr.Dataset, species: str) -> xr.DataArray:
    return _time_last(ds["mole_fraction"].sel(species=species, drop=True))


def _family_loss_rate(ds: xr.Dataset, family: str) -> xr.DataArray:
    """Total chemical loss rate of a family [cm-3 s-1], recycled basis, any leading dims."""
    from .ozone_loss import consumes_variable_species
    from .result import family_weights, stoichiometry
    nu = stoichiometry(ds)
    if "member" in nu.dims:
        nu = nu.isel(member=0, drop=True)
    w = family_weights(ds)
    if "member" in w.dims:
        w = w.isel(member=0, drop=True)
    coefficient = (w.sel(family=family, drop=True) * nu).sum("species")
    consumes = consumes_variable_species(ds.isel(member=0) if "member" in ds.dims else ds)
    weight = (-coefficient).clip(min=0.0) - coefficient.clip(min=0.0) * consumes
    return xr.dot(ds["reaction_rate"], weight, dim="reaction")


def _loss_rate(ds: xr.Dataset, metric: Metric) -> xr.DataArray:
    if metric.cycle is not None:
        return ds["cycle_rate"].sel(cycle=metric.cycle, drop=True)
    return _family_loss_rate(ds, metric.family)


def metric_series(ds: xr.Dataset, metric: Metric) -> xr.DataArray:
    """The time series a metric reduces: mole fraction [1], or accumulated loss from the
    start [mol mol-1] for ``loss`` metrics; leading dims (member) kept, time last."""
    metric = metric.check(context_from_dataset(ds))
    _require(ds, metric)
    if metric.kind in ("loss", "share"):
        rate = _time_last(_loss_rate(ds, metric) / ds["air_number_density"])
        return rate.copy(data=_cumulative(rate.values, _seconds(ds)))
    return _species_series(ds, metric.species)


def evaluate_metric(ds: xr.Dataset, metric: Metric) -> xr.DataArray:
    """Value of one metric; dims: the Dataset's dims other than time/species/... (e.g. member)."""
    ctx = context_from_dataset(ds)
    metric = metric.check(ctx)
    _require(ds, metric)
    t = _seconds(ds)
    if metric.period is not None:
        lo = _to_seconds(ds, metric.period.first.resolve(ctx.start, ctx.end))
        hi = _to_seconds(ds, metric.period.last.resolve(ctx.start, ctx.end))
    if metric.kind == "at":
        series = _species_series(ds, metric.species)
        value = _interp(series.values, t, [_to_seconds(ds, metric.time.resolve(ctx.start, ctx.end))])[..., 0]
    elif metric.kind in ("loss", "share"):
        rate = _time_last(_loss_rate(ds, metric) / ds["air_number_density"])
        acc = _cumulative(rate.values, t)
        ends = _interp(acc, t, [lo, hi])
        value = ends[..., 1] - ends[..., 0]
        series = rate
        if metric.kind == "share":
            total = _time_last(_family_loss_rate(ds, metric.family) / ds["air_number_density"])
            tacc = _interp(_cumulative(total.values, t), t, [lo, hi])
            with np.errstate(invalid="ignore", divide="ignore"):
                value = value / (tacc[..., 1] - tacc[..., 0])
    else:
        series = _species_series(ds, metric.species)
        v = series.values
        if metric.kind == "mean":
            c = _interp(_cumulative(v, t), t, [lo, hi])
            value = (c[..., 1] - c[..., 0]) / (hi - lo)
        elif metric.kind in ("max", "min"):
            inside = (t > lo) & (t < hi)
            pts = np.concatenate([_interp(v, t, [lo, hi]), v[..., inside]], axis=-1)
            value = pts.max(axis=-1) if metric.kind == "max" else pts.min(axis=-1)
        else:  # noon
            value = _mean_of_noons(ds, v, t, lo, hi, metric)
    dims = [d for d in series.dims if d != "time"]
    coords = {k: c for k, c in series.coords.items() if set(c.dims) <= set(dims)}
    return xr.DataArray(np.asarray(value, float), dims=dims, coords=coords, name=metric.label,
                        attrs={"units": metric.units, "long_name": metric.text})


def _noon_times(start: np.datetime64, longitude: float, lo: np.datetime64,
                hi: np.datetime64) -> np.ndarray:
    """UTC instants of 12:00 local mean solar time (UTC + longitude/15 h) in [lo, hi]."""
    day0 = np.datetime64(start, "D").astype("datetime64[ns]")
    shift = np.timedelta64(int(round((12.0 - float(longitude) / 15.0) * 3600e9)), "ns")
    n_days = int((np.datetime64(hi, "ns") - day0) / np.timedelta64(1, "D")) + 3
    noons = day0 + shift + np.arange(-2, n_days) * np.timedelta64(1, "D")
    return noons[(noons >= np.datetime64(lo, "ns")) & (noons <= np.datetime64(hi, "ns"))]


def _mean_of_noons(ds, v, t, lo, hi, metric) -> np.ndarray:
    ctx = context_from_dataset(ds)
    t0 = ds["time"].values.astype("datetime64[ns]")[0]
    lo_t = t0 + np.timedelta64(int(round(lo * 1e9)), "ns")
    hi_t = t0 + np.timedelta64(int(round(hi * 1e9)), "ns")
    noons = (_noon_times(t0, ctx.longitude, lo_t, hi_t) - t0).astype(np.float64) * 1e-9
    return _interp(v, t, noons).mean(axis=-1)


def evaluate_metrics(ds: xr.Dataset, metrics: Sequence[Metric]) -> xr.DataArray:
    """All metrics along a ``metric`` dimension (labels as coordinate), leading dims kept."""
    values = [evaluate_metric(ds, m) for m in metrics]   # a handful of metrics, not members
    out = xr.concat([v.rename(None) for v in values], dim="metric", coords="minimal")
    out.attrs = {}
    out = out.assign_coords(metric=[m.label for m in metrics],
                            metric_definition=("metric", [m.text for m in metrics]),
                            metric_units=("metric", [m.units for m in metrics]))
    return out.rename("metric_value").assign_attrs(
        long_name="value of each metric (definition and units in metric_definition, metric_units)")
