"""Figures are written, non-empty and drawn (synthetic result)."""
from __future__ import annotations

import numpy as np
import pytest

from boxchem.diagnostics.result import ResultError
from boxchem.plotting import OKABE_ITO, plot_all
from conftest_diagnostics import make_result


def _drawn_fraction(path) -> float:
    """Fraction of pixels that differ from the (white) background."""
    import matplotlib.image as mpimg
    img = mpimg.imread(path)[..., :3]
    return float(np.mean(np.any(img < 0.97, axis=-1)))


@pytest.mark.parametrize("days", [3.0, 8.0])  # short run (instantaneous, night shading) and long run (daily means)
def test_plot_all_writes_every_figure(tmp_path, days):
    paths, skipped = plot_all(make_result(days=days), tmp_path)
    assert skipped == []
    assert {p.stem for p in paths} == {"mixing_ratios", "diurnal_clo_cl2o2", "ozone_loss",
                                       "chlorine_partitioning", "conditions"}
    for p in paths:
        assert p.stat().st_size > 10_000          # a real figure, not an empty canvas
        assert _drawn_fraction(p) > 0.02          # lines and areas were drawn


def test_pdf_and_log_and_species(tmp_path):
    paths, _ = plot_all(make_result(days=2.0), tmp_path, species=["O3", "ClO"], log=True, fmt="pdf")
    assert all(p.suffix == ".pdf" and p.read_bytes().startswith(b"%PDF") for p in paths)


def test_missing_data_skips_figure_and_unknown_species_is_an_error(tmp_path):
    ds = make_result(days=2.0)
    no_clo = ds.drop_sel(species=["ClO", "Cl2O2"])
    no_clo = no_clo.drop_vars("family_weight").assign(family_weight=ds["family_weight"].drop_sel(species=["ClO", "Cl2O2"]))
    paths, skipped = plot_all(no_clo, tmp_path)
    assert any(s.startswith("diurnal_clo_cl2o2") for s in skipped)
    with pytest.raises(ResultError, match="unknown species Foo"):
        plot_all(ds, tmp_path, species=["Foo"])


def test_palette_is_okabe_ito():
    # Okabe & Ito (2008), Color Universal Design: the eight colours (recalled from memory)
    assert set(OKABE_ITO.values()) == {"#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442",
                                       "#0072B2", "#D55E00", "#CC79A7"}
