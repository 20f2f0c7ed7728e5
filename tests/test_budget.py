"""Production/loss budgets and partitioning on a synthetic result (hand-computed sums)."""
from __future__ import annotations

import numpy as np
import pytest

from boxchem.diagnostics.budget import largest_terms, net_coefficients, production_loss
from boxchem.diagnostics.partitioning import chlorine_partitioning, partitioning, ratio
from boxchem.diagnostics.result import ResultError
from conftest_diagnostics import make_mechanism, make_result


@pytest.fixture(scope="module")
def ds():
    return make_result(days=2.0)


def r(ds, rid):
    return ds["reaction_rate"].sel(reaction=rid).values


def test_ox_family_budget_matches_hand_sum(ds):
    b = production_loss(ds, "Ox")
    # Ox = O3 + O + O1D: O + O3 destroys two, the single-O3 reactions one, O2 photolysis makes two
    # (stoichiometry of the equations; common practice, no source)
    loss = 2 * r(ds, "o_o3") + r(ds, "cl_o3") + r(ds, "clo_o") + r(ds, "no_o3") + r(ds, "br_o3")
    prod = 2 * r(ds, "j_o2") + r(ds, "j_no2")
    np.testing.assert_allclose(b["total_loss"].values, loss, rtol=1e-12)
    np.testing.assert_allclose(b["total_production"].values, prod, rtol=1e-12)
    np.testing.assert_allclose(b["net"].values, prod - loss, rtol=1e-9)


def test_reactions_internal_to_family_are_netted_out(ds):
    b = production_loss(ds, "Ox")
    for rid in ("o_o2", "j_o3"):  # O + O2 + M -> O3 and O3 + hv -> O + O2 only move Ox around
        assert float(b["production"].sel(reaction=rid).max()) == 0.0
        assert float(b["loss"].sel(reaction=rid).max()) == 0.0
    # every reaction of the synthetic mechanism conserves Cl atoms, so Cly has no budget
    cly = production_loss(ds, "Cly")
    assert float(cly["total_loss"].max()) == 0.0 and float(cly["total_production"].max()) == 0.0


def test_species_budget_uses_net_coefficients(ds):
    b = production_loss(ds, "ClO")
    loss = 2 * r(ds, "clo_dimer") + r(ds, "clo_o") + r(ds, "clo_bro") + r(ds, "clo_no2")
    np.testing.assert_allclose(b["total_loss"].values, loss, rtol=1e-12)
    np.testing.assert_allclose(b["total_production"].values, r(ds, "cl_o3"), rtol=1e-12)
    assert b["loss"].dims == ("time", "reaction")
    assert b.attrs["budget_kind"] == "species"


def test_explicit_mechanism_gives_the_same_budget(ds):
    bare = ds.drop_vars(["stoichiometry", "family_weight"])
    with pytest.raises(ResultError, match="stoichiometry"):
        production_loss(bare, "Ox")
    a = production_loss(ds, "Ox")
    b = production_loss(bare, "Ox", mechanism=make_mechanism())
    np.testing.assert_array_equal(a["loss"].values, b["loss"].values)
    np.testing.assert_array_equal(
        net_coefficients(ds, "ClO").values, net_coefficients(bare, "ClO", make_mechanism()).values)


def test_unknown_name_lists_valid_ones(ds):
    with pytest.raises(ResultError, match="unknown family or species 'Oy'.*Ox"):
        production_loss(ds, "Oy")


def test_largest_terms_sorted_with_fractions(ds):
    rows = largest_terms(production_loss(ds, "Ox"), top=3)
    assert [row["reaction"] for row in rows] == ["cl_o3", "br_o3", "no_o3"]  # invented means 4e5, 7e4, 2e4
    # time means over 2 whole days: sinusoids average out, so mean = the invented amplitude
    np.testing.assert_allclose(rows[0]["mean"], 4.0e5, rtol=1e-6)
    total = 2 * 3e2 + 4e5 + 1e3 + 2e4 + 7e4
    np.testing.assert_allclose(rows[0]["fraction"], 4.0e5 / total, rtol=1e-6)
    assert rows[0]["equation"] == "Cl + O3 -> ClO + O2"


def test_ratios_against_species_sums(ds):
    nd = ds["number_density"]
    clox = nd.sel(species="Cl") + nd.sel(species="ClO") + 2 * nd.sel(species="Cl2O2")
    cly = ds["family_number_density"].sel(family="Cly")
    np.testing.assert_allclose(ratio(ds, "ClOx/Cly").values, (clox / cly).values, rtol=1e-12)
    # NOy is not a family here: NO + NO2 + ClONO2 (the members present of the species list)
    noy = nd.sel(species="NO") + nd.sel(species="NO2") + nd.sel(species="ClONO2")
    expected = (nd.sel(species="NO") + nd.sel(species="NO2")) / noy
    np.testing.assert_allclose(ratio(ds, "NOx/NOy").values, expected.values, rtol=1e-12)


def test_chlorine_fractions_sum_to_one(ds):
    part = chlorine_partitioning(ds)
    total = sum(part[v] for v in part.data_vars)
    np.testing.assert_allclose(total.values, 1.0, rtol=1e-12)  # parts of one family: identity
    assert set(part.data_vars) == {"HCl", "ClONO2", "HOCl", "ClOx", "Cl2", "other"}
    assert float(part["other"].max()) == 0.0  # every Cly member of the fixture is in a named part


def test_missing_species_named(ds):
    no_bro = ds.drop_sel(species="BrO").drop_sel(family="Bry")
    with pytest.raises(ResultError, match="BrO"):
        ratio(no_bro, "BrO/Bry")
    part = partitioning(no_bro)
    assert "BrO/Bry" not in part and "ClOx/Cly" in part
    assert "BrO" in part.attrs["skipped"]


def test_accessor_is_thin(ds):
    import boxchem.diagnostics.accessor  # noqa: F401
    a = ds.boxchem.production_loss("Ox")
    np.testing.assert_array_equal(a["loss"].values, production_loss(ds, "Ox")["loss"].values)
    assert "ClOx/Cly" in ds.boxchem.partitioning()
