"""Odd-oxygen loss by cycle, accumulation, daily means and chain length (synthetic result)."""
from __future__ import annotations

import numpy as np
import pytest

from boxchem.diagnostics.ozone_loss import (accumulate, accumulated_loss, chain_length, daily_loss,
                                            diurnal_average, ox_loss)
from boxchem.diagnostics.result import ResultError, elapsed_seconds
from conftest_diagnostics import AIR, MEAN_DENSITY, daylight, make_mechanism, make_result


@pytest.fixture(scope="module")
def ds():
    return make_result(days=3.0)


def r(ds, rid):
    return ds["reaction_rate"].sel(reaction=rid).values


@pytest.mark.parametrize("basis", ["recycled", "gross", "net"])
def test_closure_sum_of_cycles_plus_remainder_is_total(ds, basis):
    ox = ox_loss(ds, basis=basis)
    np.testing.assert_allclose((ox["cycle_sum"] + ox["unattributed"]).values, ox["total_loss"].values, rtol=1e-12)


def test_remainder_by_hand(ds):
    # gross Ox loss minus the four cycles (2*o_o3, 2*j_dimer, 2*clo_o, 2*clo_bro), by hand
    gross = (r(ds, "cl_o3") - r(ds, "clo_o") + r(ds, "no_o3") + r(ds, "br_o3")
             - 2 * r(ds, "j_dimer") - 2 * r(ds, "clo_bro"))
    np.testing.assert_allclose(ox_loss(ds, basis="gross")["unattributed"].values, gross, rtol=1e-9, atol=1e-6)
    # recycled basis: NO2 + hv -> NO + O re-forms Ox (consumes NO2); O2 + hv is primary production
    ox = ox_loss(ds)
    np.testing.assert_allclose(ox["recycling_production"].values, r(ds, "j_no2"), rtol=1e-12)
    np.testing.assert_allclose(ox["unattributed"].values, gross - r(ds, "j_no2"), rtol=1e-9, atol=1e-6)
    # the same from the mechanism instead of the run's coordinates
    bare = ds.drop_vars(["stoichiometry", "family_weight", "species_is_fixed"])
    with pytest.raises(ResultError, match="species_is_fixed"):
        ox_loss(bare.assign(stoichiometry=ds["stoichiometry"].drop_vars("species_is_fixed"),
                            family_weight=ds["family_weight"].drop_vars("species_is_fixed")))
    np.testing.assert_allclose(ox_loss(bare, mechanism=make_mechanism())["total_loss"].values,
                               ox["total_loss"].values, rtol=1e-12)


def test_net_basis_subtracts_production(ds):
    gross, net = ox_loss(ds, basis="gross"), ox_loss(ds, basis="net")
    np.testing.assert_allclose(net["total_loss"].values,
                               (gross["total_loss"] - gross["total_production"]).values, rtol=1e-12)
    with pytest.raises(ResultError, match="basis"):
        ox_loss(ds, basis="odd")


def test_accumulated_loss_matches_closed_form_integral():
    ds = make_result(days=2.0, step_minutes=5.0)
    t = elapsed_seconds(ds)
    a, w = 3.0e5, 2 * np.pi / 86400.0
    ds["cycle_rate"].loc[dict(cycle="clo_dimer")] = a * (1 - np.cos(w * t))
    acc = accumulated_loss(ds)
    # integral of a(1 - cos wt) dt = a (t - sin(wt)/w): closed form (common practice, no source);
    # composite trapezoid error bound: t h^2 max|f''| / 12 with max|f''| = a w^2 (common practice)
    exact = a * (t - np.sin(w * t) / w)
    got = acc["loss_number_density"].sel(term="clo_dimer").values
    h = t[1] - t[0]
    np.testing.assert_allclose(got, exact, rtol=0, atol=t[-1] * h**2 * a * w**2 / 12)
    np.testing.assert_allclose(got[-1], exact[-1], rtol=1e-6)
    x0 = MEAN_DENSITY["O3"] / AIR
    np.testing.assert_allclose(acc["loss_mole_fraction"].sel(term="clo_dimer").values, got / AIR, rtol=1e-12)
    np.testing.assert_allclose(acc["loss_percent"].sel(term="clo_dimer").values, 100 * got / AIR / x0, rtol=1e-12)
    tot = acc["loss_number_density"]
    cycles = [c for c in tot["term"].values if c not in ("unattributed", "total")]
    np.testing.assert_allclose((tot.sel(term=cycles).sum("term") + tot.sel(term="unattributed")).values,
                               tot.sel(term="total").values, rtol=1e-9)


def test_accumulate_linear_rate_exact():
    ds = make_result(days=1.0)
    t = elapsed_seconds(ds)
    rate = ds["temperature"].copy(data=2.0 + 1e-3 * t)
    # trapezoid rule is exact for a linear integrand: 2t + 5e-4 t^2 (common practice, no source)
    np.testing.assert_allclose(accumulate(rate).values, 2 * t + 5e-4 * t**2, rtol=1e-12)


def test_daily_loss_of_whole_days(ds):
    daily = daily_loss(ds)
    assert daily.sizes["day"] == 3  # 3 days from midnight to midnight: the end instant is no new day
    # o_o3 rate = 3e2 (1 + 0.5 sin(wt + 3)); over a whole day the sine averages to zero,
    # so the chapman cycle (2 * o_o3) has a mean of 600 cm-3 s-1 (closed form, common practice)
    np.testing.assert_allclose(daily["mean_rate"].sel(term="chapman").values, 600.0, rtol=1e-6)
    np.testing.assert_allclose(daily["loss_number_density"].sel(term="chapman").values, 600.0 * 86400, rtol=1e-6)
    np.testing.assert_allclose(daily["covered_hours"].values, 24.0)


def test_local_solar_days_shift_boundaries(ds):
    daily = daily_loss(ds, longitude=90.0)
    # 90 E is 6 h ahead of UTC in mean solar time: the run covers 18, 24, 24 and 6 local hours
    np.testing.assert_allclose(daily["covered_hours"].values, [18.0, 24.0, 24.0, 6.0])
    whole = daily_loss(ds)["loss_number_density"].sel(term="total").sum()
    np.testing.assert_allclose(float(daily["loss_number_density"].sel(term="total").sum()), float(whole), rtol=1e-9)


def test_diurnal_average_of_daylight_shaped_rate(ds):
    j = ds["reaction_rate"].sel(reaction="j_no2")
    diurnal = diurnal_average(j)
    assert diurnal.sizes["local_hour"] == 24
    assert float(diurnal.sel(local_hour=2.5)) == 0.0  # night
    # bin 12-13 h holds the samples at 12:00, 12:15, 12:30, 12:45 of every day (3 days plus
    # the final midnight falls in bin 0): mean of the invented shape 2 * 1.9e4 * daylight(h)
    hours = np.array([12.0, 12.25, 12.5, 12.75])
    np.testing.assert_allclose(float(diurnal.sel(local_hour=12.5)), 2 * 1.9e4 * daylight(hours).mean(), rtol=1e-12)


def test_chain_length_of_dimer_cycle(ds):
    cl = chain_length(ds, "clo_dimer", carrier="ClOx")
    # ClOx (Cl + ClO + 2 Cl2O2) is lost only by ClO + NO2 + M in the fixture; one pass of the
    # dimer cycle per Cl2O2 photolysis, so chain length = J[Cl2O2] / k[ClO][NO2]
    # (definition after Lary 1997, JGR 102, 21515, recalled from memory)
    np.testing.assert_allclose(cl.values, r(ds, "j_dimer") / r(ds, "clo_no2"), rtol=1e-12)
    daily = chain_length(ds, "clo_dimer", carrier="ClOx", daily=True)
    assert daily.sizes["day"] == 3 and np.all(daily.values > 0)
    with pytest.raises(ResultError, match="unknown cycle 'nope'"):
        chain_length(ds, "nope", carrier="ClOx")


@pytest.mark.slow
def test_cycles_close_the_ox_budget_of_a_real_run():
    """On a sunlit polar day of the shipped scenario the mechanism's cycles carry nearly all
    of the Ox loss on the recycled basis (narrow Ox family; common practice, no source)."""
    import boxchem
    ds = boxchem.run("stratosphere-box", **{"run.duration": "1 d"})
    acc = accumulated_loss(ds).isel(time=-1)["loss_number_density"]
    assert float(acc.sel(term="total")) > 0
    assert abs(float(acc.sel(term="unattributed"))) < 0.05 * float(acc.sel(term="total"))
