"""Metrics: syntax, errors, and values against closed forms on a hand-made result.

The hand-made Dataset has the layout of a run (DEVELOPERS.md, "Output") with
analytic time series, so every expected value below is a closed form
(common practice, no source).
"""
import numpy as np
import pytest
import xarray as xr

from boxchem.diagnostics.metrics import (MetricError, context_from_dataset, evaluate_metric,
                                         evaluate_metrics, metric_series, parse_metric,
                                         parse_metrics, required_variables)

START = np.datetime64("2026-09-20T00:00:00", "ns")
AIR = 2.0e18
LONGITUDE = 166.7


def _result(n_members=None):
    hours = np.arange(0, 72 + 1, 1.0)
    time = START + (hours * 3600e9).astype("timedelta64[ns]")
    t_s = hours * 3600.0
    species = ["O3", "ClO", "O2"]
    o3 = 2.0e-6 - 1.0e-9 * hours                     # linear in time
    clo = 1.0e-9 + 1.0e-11 * hours                   # linear in time
    x = np.stack([o3, clo, np.full_like(o3, 0.2095)], axis=1)
    # Ox = O3; reaction 0 destroys 2 O3 (rate 1e4), reaction 1 re-forms 1 O3 from a
    # variable species (recycling, rate 2e3), reaction 2 is primary production
    nu = np.array([[-2.0, 1.0, 1.0], [0.0, -1.0, 0.0], [0.0, 0.0, -1.0]])
    rates = np.tile([1.0e4, 2.0e3, 5.0e2], (hours.size, 1))
    cycles = np.tile([6.0e3, 1.0e4], (hours.size, 1))
    ds = xr.Dataset(
        {"mole_fraction": (("time", "species"), x),
         "reaction_rate": (("time", "reaction"), rates),
         "cycle_rate": (("time", "cycle"), cycles),
         "air_number_density": ("time", np.full(hours.size, AIR)),
         "longitude": ("time", np.full(hours.size, LONGITUDE)),
         "stoichiometry": (("species", "reaction"), nu),
         "family_weight": (("family", "species"), np.array([[1.0, 0.0, 0.0]]))},
        coords={"time": time, "species": species, "reaction": ["r0", "r1", "r2"],
                "family": ["Ox"], "cycle": ["dimer", "bro"],
                "cycle_family": ("cycle", ["Ox", "Ox"]),
                "species_is_fixed": ("species", np.array([0, 0, 1], dtype=np.int8))},
        attrs={"source_file": "hand-made.nc"})
    if n_members:
        factor = xr.DataArray(np.arange(1, n_members + 1, dtype=float), dims="member")
        ds = ds.assign(mole_fraction=ds["mole_fraction"] * factor,
                       cycle_rate=ds["cycle_rate"] * factor,
                       reaction_rate=ds["reaction_rate"] * factor)
    return ds, t_s


def test_mole_fraction_at_a_time_interpolates_linearly():
    ds, _ = _result()
    v = evaluate_metric(ds, parse_metric("O3 at 2026-09-21T12:30"))
    assert float(v) == pytest.approx(2.0e-6 - 1.0e-9 * 36.5, rel=1e-12)
    assert float(evaluate_metric(ds, parse_metric("O3 at end"))) == pytest.approx(2e-6 - 72e-9)
    assert float(evaluate_metric(ds, parse_metric("O3 at start+1d"))) == pytest.approx(2e-6 - 24e-9)


def test_daily_mean_noon_and_max_of_a_linear_series():
    ds, _ = _result()
    # mean of a linear function over a day = its value at mid-day
    assert float(evaluate_metric(ds, parse_metric("mean ClO on 2026-09-21"))) == \
        pytest.approx(1e-9 + 1e-11 * 36.0, rel=1e-12)
    # local mean solar noon at 166.7 E is 12:00 - 166.7/15 h = 00:53:12 UTC
    noon_h = 24.0 + 12.0 - LONGITUDE / 15.0
    assert float(evaluate_metric(ds, parse_metric("noon ClO on 2026-09-21"))) == \
        pytest.approx(1e-9 + 1e-11 * noon_h, rel=1e-12)
    assert float(evaluate_metric(ds, parse_metric("max ClO over start..2026-09-21T06:30"))) == \
        pytest.approx(1e-9 + 1e-11 * 30.5, rel=1e-12)
    assert float(evaluate_metric(ds, parse_metric("min O3 over start+2h..end"))) == \
        pytest.approx(2e-6 - 72e-9, rel=1e-12)


def test_loss_total_by_cycle_and_share():
    ds, _ = _result()
    day = 86400.0
    # by cycle: integral of the cycle rate / n_air
    v = evaluate_metric(ds, parse_metric("loss Ox by dimer over 2026-09-21"))
    assert float(v) == pytest.approx(6.0e3 / AIR * day, rel=1e-12)
    # total, recycled basis: gross loss 2 x 1e4 minus recycling 1 x 2e3 (r1 consumes
    # variable ClO); r2 (fixed O2 only) is primary production and is not subtracted
    total = evaluate_metric(ds, parse_metric("loss Ox over start..end"))
    assert float(total) == pytest.approx((2.0e4 - 2.0e3) / AIR * 3 * day, rel=1e-12)
    share = evaluate_metric(ds, parse_metric("share bro over start..end"))
    assert float(share) == pytest.approx(1.0e4 / 1.8e4, rel=1e-12)
    series = metric_series(ds, parse_metric("loss Ox by dimer over start..end"))
    assert float(series.isel(time=-1)) == pytest.approx(6.0e3 / AIR * 3 * day, rel=1e-12)


def test_vectorised_over_members_equals_each_member():
    ds, _ = _result(n_members=3)
    metrics = parse_metrics("O3 at 2026-09-21; loss Ox over start..end; noon ClO on 2026-09-22")
    values = evaluate_metrics(ds, metrics)
    assert values.dims == ("metric", "member")
    for m in range(3):
        single = evaluate_metrics(ds.isel(member=m), metrics)
        np.testing.assert_allclose(values.isel(member=m).values, single.values, rtol=1e-14)
    np.testing.assert_allclose(values.sel(metric="O3 at 2026-09-21").values,
                               (2e-6 - 24e-9) * np.arange(1, 4), rtol=1e-12)


def test_several_metrics_labels_and_needs():
    ms = parse_metrics(["o3oct = O3 at 2026-10-01; loss Ox by clo_dimer over start..end",
                        "share clo_bro over 2026-09-01..2026-10-01"])
    assert [m.label for m in ms] == ["o3oct", "loss Ox by clo_dimer over start..end",
                                     "share clo_bro over 2026-09-01..2026-10-01"]
    assert required_variables(ms) == ("mole_fraction", "cycle_rate", "air_number_density",
                                      "reaction_rate")


@pytest.mark.parametrize("text, expected", [
    ("Clo at end", "unknown species 'Clo' - did you mean 'ClO'"),
    ("O4 at end", "unknown species 'O4' - did you mean 'O3'"),
    ("loss Ox by dimmer over start..end", "unknown cycle 'dimmer' - did you mean 'dimer'"),
    ("loss Oy over start..end", "unknown family 'Oy' - did you mean 'Ox'"),
    ("O3 at 2026-11-01", "outside the run (hand-made.nc runs from 2026-09-20T00:00Z to "
                         "2026-09-23T00:00Z)"),
    ("mean O3 over 2026-09-19..2026-09-21", "period start 2026-09-19T00:00Z is outside the run"),
    ("mean O3 over end..start", "ends before it starts"),
    # local noon at 166.7 E is 00:53 UTC: none between 02:00 and 20:00; the next is named
    ("noon ClO over 2026-09-21T02:00..2026-09-21T20:00", "no local noon (12:00 mean solar time "
                                                         "at longitude 166.7, i.e. 2026-09-22T00:53Z"),
])
def test_errors_name_what_is_valid(text, expected):
    ds, _ = _result()
    with pytest.raises(MetricError, match=None) as info:
        evaluate_metric(ds, parse_metric(text))
    assert expected in str(info.value)


@pytest.mark.parametrize("text, expected", [
    ("", "empty metric"),
    ("O3 on 2026-09-21", "cannot read it"),
    ("O3 at noon", "'noon' is not a time"),
    ("mean O3 over 2026-09", "is not a period"),
    ("loss Ox by", "'by' needs a cycle name"),
    ("share dimer from start..end", "expected 'over'"),
    ("mean O3 on 2026-09-21 extra", "unexpected text"),
])
def test_syntax_errors(text, expected):
    with pytest.raises(MetricError) as info:
        parse_metrics(text) if text else parse_metric(text)
    assert expected in str(info.value)


def test_duplicate_labels_are_refused():
    with pytest.raises(MetricError, match="given twice"):
        parse_metrics("O3 at end; O3 at end")


def test_member_file_without_reaction_rate_says_how_to_save_it():
    ds, _ = _result()
    with pytest.raises(MetricError, match="needs reaction_rate.*variables="):
        evaluate_metric(ds.drop_vars("reaction_rate"), parse_metric("loss Ox over start..end"))


def test_context_of_a_dataset():
    ds, _ = _result()
    c = context_from_dataset(ds)
    assert c.species == ("O3", "ClO", "O2") and c.cycles == ("dimer", "bro")
    assert c.cycle_family == {"dimer": "Ox", "bro": "Ox"}
