"""Actinic flux of the model atmosphere against DISORT (reference library).

Reference: DISORT, Stamnes, Tsay, Wiscombe and Jayaweera (1988), Appl. Opt. 27, 2502,
doi:10.1364/AO.27.002502, run through PyPI's ``pydisort`` on exactly the model's layers
(tests/disort_cases.py).  Its output is stored with its inputs in
tests/data/disort_reference.json (scripts/disort_reference.py; pydisort pulls in about 7 GB
of torch, so the suite does not install it): each test first checks that the model still
builds the stored layers, then compares the model's flux with DISORT's.  With pydisort
installed (``pip install '.[reference]'``) the last test reruns DISORT and checks the file.
DISORT is plane-parallel, the model pseudo-spherical: at SZA <= 60 deg and these altitudes
the direct beams agree to 0.3 % (checked).

Measured (2026-12, 300-420 nm in 20 nm bins, albedo 0 and 0.3, SZA 30 and 60 deg,
10/24/32 km).  With two source iterations (before): model / DISORT total actinic flux
0.970-0.995, diffuse part alone 0.953-0.984 (the Lambda iteration had not converged, worst
at 310 nm).  With four (now, ``actinic.SOURCE_ITERATIONS``): total 0.988-0.999, diffuse
0.978-0.998.  With O3 and O2 absorption in the layers, J(NO2) of the balloon case from the
model's flux is 0.996-0.998 of J(NO2) from DISORT's flux.  So the radiative transfer and the
albedo treatment do not explain a J(NO2) above the measurement (docs/photolysis.md).
"""
import json
from pathlib import Path

import numpy as np
import pytest

import disort_cases as cases

REFERENCE = json.loads((Path(__file__).parent / "data" / "disort_reference.json").read_text())["cases"]


def _stored(name):
    """The stored case, after checking that the model still builds the same layers."""
    ref = REFERENCE[name]
    inputs = cases.case_inputs(ref["altitude_m"], ref["sza_deg"], ref["albedo"], ref["absorbing"],
                               np.asarray(ref["edges_nm"]))
    for key in ("dtau", "w0"):
        if not np.allclose(inputs[key], np.asarray(ref[key]), rtol=1e-9, atol=0):
            pytest.fail(f"tests/data/disort_reference.json, case {name}: the model's layer {key} changed; "
                        f"rerun scripts/disort_reference.py (needs pip install '.[reference]')")
    assert inputs["level"] == ref["level"] and inputs["mu0"] == pytest.approx(ref["mu0"], rel=1e-12)
    return ref, np.asarray(ref["disort_direct"]), np.asarray(ref["disort_total"])


RAYLEIGH = [c[0] for c in cases.CASES if not c[4]]


@pytest.mark.parametrize("name", RAYLEIGH)
def test_actinic_flux_matches_disort_in_rayleigh_atmosphere(name):
    # reference: DISORT (Stamnes et al. 1988, Appl. Opt. 27, 2502) on the same layers (stored).
    # Total actinic flux within 1.5 % (measured 0.988-0.999), diffuse part within 3 % (0.978-0.998);
    # the direct beams (pseudo-spherical vs plane-parallel) within 0.3 %.  A factor-2 error in
    # the diffuse light moves the total by 15-40 % and fails.
    ref, ref_direct, ref_total = _stored(name)
    direct, diffuse = cases.model_flux(ref["altitude_m"], ref["sza_deg"], ref["albedo"], False,
                                       np.asarray(ref["edges_nm"]))
    np.testing.assert_allclose(direct, ref_direct, rtol=3e-3)
    np.testing.assert_allclose(direct + diffuse, ref_total, rtol=0.015)
    np.testing.assert_allclose(diffuse, ref_total - ref_direct, rtol=0.03)


def test_albedo_effect_matches_disort():
    # The light added by a Lambertian ground of albedo 0.3 at 24 km, SZA 30 deg (the balloon case of
    # docs/photolysis.md): model against DISORT (Stamnes et al. 1988) within 3 % (measured 0.979-0.994).
    # Counting the reflected light twice or as irradiance instead of actinic flux is off by ~50-100 %.
    moved = []
    for name in ("rayleigh_24km_sza30_albedo0.0", "rayleigh_24km_sza30_albedo0.3"):
        ref, _, ref_total = _stored(name)
        d, s = cases.model_flux(ref["altitude_m"], ref["sza_deg"], ref["albedo"], False, np.asarray(ref["edges_nm"]))
        moved.append((d + s, ref_total))
    np.testing.assert_allclose(moved[1][0] - moved[0][0], moved[1][1] - moved[0][1], rtol=0.03)


@pytest.mark.parametrize("albedo", [0.0, 0.3])
def test_j_no2_balloon_case_with_disort_flux(albedo):
    # J(NO2) at 24 km, SZA 30 deg, 300 DU, NO2 data at 220 K (the balloon case of docs/photolysis.md,
    # Madronich et al. 1985): the model's actinic flux against DISORT (Stamnes et al. 1988) on the
    # model's own layers with O3 and O2 absorption, 290-440 nm.  Measured: model / DISORT = 0.998
    # (albedo 0: 1.312e-2 vs 1.315e-2 s-1) and 0.996 (albedo 0.3: 1.561e-2 vs 1.567e-2); within 1 %
    # here.  The radiative transfer is therefore not the cause of the model's J above the measured
    # 1.05e-2; a factor-2 error in the diffuse light (about a third of J) fails.
    from boxchem.photolysis.crosssections import cross_section_data, quantum_yield_data
    from boxchem.photolysis.spectrum import extraterrestrial_flux

    ref, _, ref_total = _stored(f"balloon_24km_sza30_albedo{albedo}")
    edges = np.asarray(ref["edges_nm"])
    direct, diffuse = cases.model_flux(ref["altitude_m"], ref["sza_deg"], albedo, True, edges)
    f0 = extraterrestrial_flux(edges)
    sigma_phi = cross_section_data("NO2").bin_average(edges, 220.0) * quantum_yield_data("NO2").bin_average(edges, 220.0)
    weight = f0 * sigma_phi * np.diff(edges)
    j_model, j_reference = np.sum((direct + diffuse) * weight), np.sum(ref_total * weight)
    assert j_model == pytest.approx(j_reference, rel=0.01, abs=0)


@pytest.mark.parametrize("name", ["rayleigh_24km_sza30_albedo0.3", "balloon_24km_sza30_albedo0.0"])
def test_stored_reference_is_disort_output(name):
    # The stored file is DISORT's output (Stamnes et al. 1988) for its stored inputs: rerun here
    # when pydisort is installed (pip install '.[reference]').
    pytest.importorskip("pydisort")
    ref = REFERENCE[name]
    inputs = {"dtau": np.asarray(ref["dtau"]), "w0": np.asarray(ref["w0"]), "mu0": ref["mu0"],
              "albedo": ref["albedo"], "level": ref["level"]}
    direct, total = cases.disort_at_level(inputs)
    np.testing.assert_allclose(direct, ref["disort_direct"], rtol=1e-9)
    np.testing.assert_allclose(total, ref["disort_total"], rtol=1e-9)
