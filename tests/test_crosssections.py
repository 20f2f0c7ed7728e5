"""Spectral data files: format, loader, interpolation, bin means, shipped data sets."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from boxchem.errors import DataFileError
from boxchem.photolysis.crosssections import (
    ConstantYield,
    SpectralData,
    cross_section_data,
    load_spectral_file,
    quantum_yield_data,
    shipped_cross_sections,
    shipped_quantum_yields,
)

SPECTRA = Path(__file__).parent / "data" / "spectra"

GOOD_HEADER = """\
# format: boxchem-spectral 1
# species: XY
# quantity: cross_section
# units: cm2
# temperature_dependence: none
# source: invented example values for the loader tests
# provenance: invented (test file, not physical data)
wavelength_nm,sigma
200,1.0e-19
210,2.0e-19
220,3.0e-19
"""


def write(tmp_path: Path, text: str, name: str = "spec.csv") -> Path:
    p = tmp_path / name
    p.write_text(text)
    return p


def expect_error(path: Path, line: int, *fragments: str) -> str:
    with pytest.raises(DataFileError) as info:
        load_spectral_file(path)
    msg = str(info.value)
    assert msg.startswith(f"{path}:{line}: "), msg
    assert "expected" in msg, msg
    for frag in fragments:
        assert frag in msg, (frag, msg)
    return msg


# ---------------------------------------------------------------- round trip

def test_round_trip_of_every_header_key_and_value(tmp_path):
    p = write(tmp_path, GOOD_HEADER.replace(
        "# provenance:", "# channel: X + Y\n# outside_range: zero\n# notes: first\n"
        "# notes: second\n# provenance:"))
    d = load_spectral_file(p)
    assert isinstance(d, SpectralData)
    assert (d.species, d.channel, d.quantity, d.units) == ("XY", "X + Y", "cross_section", "cm2")
    assert d.temperature_dependence == "none"
    assert d.source == "invented example values for the loader tests"
    assert d.provenance == "invented (test file, not physical data)"
    assert d.notes == "first second"
    assert d.path == str(p)
    np.testing.assert_array_equal(d.wavelength_nm, [200, 210, 220])
    np.testing.assert_array_equal(d.temperatures, [])
    # values at the tabulated wavelengths come back exactly
    np.testing.assert_array_equal(d([200.0, 210.0, 220.0]), [1e-19, 2e-19, 3e-19])
    # the arrays are read-only: a cached shipped data set cannot be changed by a caller
    with pytest.raises(ValueError):
        d.wavelength_nm[0] = 1.0


def test_example_files_load():
    t = load_spectral_file(SPECTRA / "good_table.csv")
    np.testing.assert_array_equal(t.temperatures, [200.0, 300.0])
    y = load_spectral_file(SPECTRA / "good_yield.csv")
    assert y.quantity == "quantum_yield" and y.channel == "X + Y" and y.outside_range == "hold"
    g = load_spectral_file(SPECTRA / "good_log10.csv")
    assert g.valid_temperature_range_K == (210.0, 300.0)


def test_comments_and_blank_lines_in_the_table_are_skipped(tmp_path):
    text = GOOD_HEADER.replace("210,2.0e-19\n", "\n# a comment row\n210,2.0e-19\n")
    d = load_spectral_file(write(tmp_path, text))
    np.testing.assert_array_equal(d.wavelength_nm, [200, 210, 220])


# ---------------------------------------------------------------- header errors

HEADER_ERRORS = [
    # (replace this, with this, line of the error, fragments of the message)
    ("# format: boxchem-spectral 1", "# format: boxchem-spectral 2", 1,
     ["format 'boxchem-spectral 2'", "'boxchem-spectral 1'"]),
    ("# species: XY", "# specie: XY", 2, ["unknown header key 'specie'", "did you mean 'species'"]),
    ("# species: XY", "# species XY", 2, ["header line '# species XY'", "'# key: value'"]),
    ("# species: XY", "# species:", 2, ["empty value for header key 'species'"]),
    ("# species: XY", "# species: XY\n# species: XZ", 3, ["given twice (first on line 2)"]),
    ("# quantity: cross_section", "# quantity: absorption", 3,
     ["quantity 'absorption'", "cross_section, quantum_yield"]),
    ("# units: cm2", "# units: m2", 4, ["units 'm2' for a cross_section", "'cm2'"]),
    ("# temperature_dependence: none", "# temperature_dependence: arrhenius", 5,
     ["temperature_dependence 'arrhenius'", "none, table, log10_linear"]),
    ("# species: XY\n", "", 7, ["header key 'species' missing", "'# species: ...'"]),
    ("# source: invented example values for the loader tests\n", "", 7,
     ["header key 'source' missing"]),
    ("# provenance: invented (test file, not physical data)\n", "", 7,
     ["header key 'provenance' missing"]),
    ("# provenance: invented (test file, not physical data)",
     "# provenance: invented\n# outside_range: clamp", 8, ["outside_range 'clamp'", "zero, hold"]),
    ("# provenance: invented (test file, not physical data)",
     "# provenance: invented\n# valid_temperature_range_K: warm", 8,
     ["valid_temperature_range_K 'warm'", "'LOW, HIGH'"]),
    ("# provenance: invented (test file, not physical data)",
     "# provenance: invented\n# valid_temperature_range_K: 300, 200", 8, ["0 < LOW < HIGH"]),
    ("wavelength_nm,sigma", "lambda_nm,sigma", 8, ["first column 'lambda_nm'", "'wavelength_nm'"]),
    ("wavelength_nm,sigma", "wavelength_nm,sigma,extra", 8,
     ["for temperature_dependence none", "'wavelength_nm,sigma'"]),
]


@pytest.mark.parametrize("old,new,line,fragments", HEADER_ERRORS,
                         ids=[f"{i}" for i in range(len(HEADER_ERRORS))])
def test_header_errors_give_file_line_and_expected_form(tmp_path, old, new, line, fragments):
    assert old in GOOD_HEADER
    expect_error(write(tmp_path, GOOD_HEADER.replace(old, new, 1)), line, *fragments)


def _with_dependence(dep: str, columns: str, rows: str, quantity="cross_section",
                     extra: str = "") -> str:
    units = "cm2" if quantity == "cross_section" else "1"
    channel = "# channel: X + Y\n" if quantity == "quantum_yield" else ""
    return (f"# format: boxchem-spectral 1\n# species: XY\n{channel}# quantity: {quantity}\n"
            f"# units: {units}\n# temperature_dependence: {dep}\n{extra}"
            "# source: invented\n# provenance: invented (test file)\n"
            f"{columns}\n{rows}")


def test_table_columns_must_name_their_temperatures(tmp_path):
    text = _with_dependence("table", "wavelength_nm,sigma_200K,sigma_warm", "200,1,2\n210,1,2\n")
    expect_error(write(tmp_path, text), 8, "column 'sigma_warm'", "'sigma_218K,sigma_298K'")


def test_table_temperatures_must_increase(tmp_path):
    text = _with_dependence("table", "wavelength_nm,sigma_300K,sigma_200K", "200,1,2\n210,1,2\n")
    expect_error(write(tmp_path, text), 8, "strictly increasing temperatures")


def test_log10_linear_needs_its_valid_range(tmp_path):
    text = _with_dependence("log10_linear", "wavelength_nm,sigma_298K,B", "200,1e-19,1e-3\n")
    expect_error(write(tmp_path, text), 8, "'valid_temperature_range_K' missing")


def test_log10_linear_columns(tmp_path):
    text = _with_dependence("log10_linear", "wavelength_nm,sigma_298K", "200,1e-19\n210,1e-19\n",
                            extra="# valid_temperature_range_K: 210, 300\n")
    expect_error(write(tmp_path, text), 9, "'wavelength_nm,sigma_<T0>K,B'")


def test_log10_linear_b_must_be_sane(tmp_path):
    text = _with_dependence("log10_linear", "wavelength_nm,sigma_298K,B",
                            "200,1e-19,1e-3\n210,1e-19,5\n",
                            extra="# valid_temperature_range_K: 210, 300\n")
    expect_error(write(tmp_path, text), 11, "B = 5.0", "|B| <= 1 K-1")


def test_quantum_yield_needs_channel_and_no_log10(tmp_path):
    text = _with_dependence("none", "wavelength_nm,phi", "300,1\n310,1\n", quantity="quantum_yield")
    expect_error(write(tmp_path, text.replace("# channel: X + Y\n", ""), "a.csv"), 8,
                 "'channel' missing")
    text = _with_dependence("log10_linear", "wavelength_nm,phi_298K,B", "300,1,0\n310,1,0\n",
                            quantity="quantum_yield", extra="# valid_temperature_range_K: 200, 300\n")
    expect_error(write(tmp_path, text, "b.csv"), 6, "'none' or 'table'")
    text = _with_dependence("none", "wavelength_nm,phi", "300,1\n", quantity="quantum_yield")
    expect_error(write(tmp_path, text.replace("# units: 1", "# units: cm2"), "c.csv"), 5,
                 "units 'cm2' for a quantum_yield", "'1'")


def test_header_only_file(tmp_path):
    text = GOOD_HEADER.split("wavelength_nm")[0]
    expect_error(write(tmp_path, text), 7, "end of file after the header block", "wavelength_nm")


def test_empty_and_missing_files(tmp_path):
    expect_error(write(tmp_path, "\n\n"), 1, "empty file")
    with pytest.raises(DataFileError, match="no such file"):
        load_spectral_file(tmp_path / "nope.csv")


# ---------------------------------------------------------------- data errors

DATA_ERRORS = [
    ("220,3.0e-19", "220,-3.0e-19", 11, ["value -3e-19", "finite non-negative values"]),
    ("220,3.0e-19", "220,nan", 11, ["value nan", "finite non-negative"]),
    ("220,3.0e-19", "220,inf", 11, ["value inf", "finite non-negative"]),
    ("220,3.0e-19", "220,3.0e-19,1", 11, ["3 values in '220,3.0e-19,1'", "2 comma-separated values"]),
    ("210,2.0e-19", "210,2.0e-19x", 10, ["'2.0e-19x' is not a number", "decimal numbers"]),
    ("220,3.0e-19", "210,3.0e-19", 11, ["wavelength 210 nm after 210 nm", "strictly increasing"]),
    ("200,1.0e-19", "-5,1.0e-19", 9, ["wavelength -5.0", "finite positive wavelength"]),
]


@pytest.mark.parametrize("old,new,line,fragments", DATA_ERRORS,
                         ids=[f"{i}" for i in range(len(DATA_ERRORS))])
def test_data_errors_give_file_line_and_expected_form(tmp_path, old, new, line, fragments):
    expect_error(write(tmp_path, GOOD_HEADER.replace(old, new, 1)), line, *fragments)


def test_too_few_rows(tmp_path):
    text = GOOD_HEADER.replace("210,2.0e-19\n220,3.0e-19\n", "")
    expect_error(write(tmp_path, text), 9, "1 data row(s)", "at least 2 rows")


def test_example_bad_files():
    expect_error(SPECTRA / "bad_decreasing.csv", 11, "wavelength 205 nm after 210 nm")
    expect_error(SPECTRA / "bad_yield_above_one.csv", 11, "quantum yield 1.2", "[0, 1]")


# ---------------------------------------------------------------- plain lab files

def test_plain_lab_file_with_units_in_parentheses():
    d = load_spectral_file(SPECTRA / "lab_plain.csv")
    assert d.quantity == "cross_section" and d.units == "cm2" and d.species == "lab_plain"
    assert "lab file" in d.provenance
    # the file's own rows, linear between them and zero outside (tests/data/spectra/lab_plain.csv)
    np.testing.assert_allclose(d([250.0, 255.0, 270.0, 280.0]), [2e-18, 3e-18, 1e-18, 0.0], rtol=1e-12, atol=0)


def test_plain_lab_file_with_units_in_names():
    d = load_spectral_file(SPECTRA / "lab_plain_underscore.csv")
    np.testing.assert_allclose(d.wavelength_nm, [250.0, 260.0])


def test_plain_lab_file_wrong_units():
    expect_error(SPECTRA / "bad_lab_m2.csv", 1, "cross-section unit 'm2'", "in cm2")


def test_lab_file_in_angstrom_is_converted_to_nm():
    # 1 Angstrom = 0.1 nm (SI definition; common practice, no source)
    d = load_spectral_file(SPECTRA / "bad_lab_angstrom.csv")
    np.testing.assert_allclose(d.wavelength_nm[:2], [250.0, 260.0])
    np.testing.assert_allclose(d(np.array([250.0, 260.0])), [2.0e-18, 4.0e-18])


@pytest.mark.parametrize("head,fragment", [
    ("wavelength,sigma", "no unit in column 'wavelength'"),
    ("wavelength_nm,sigma", "no unit in column 'sigma'"),
    ("wavelength (cm),sigma (cm2)", "wavelength unit 'cm'"),
    ("wavelength (nm),sigma (cm-1)", "cross-section unit 'cm-1'"),
    ("wavelength_nm,sigma_cm2,error", "no unit in column 'error' of an uncertainty column"),
    ("wavelength_nm,sigma_200K_cm2,sigma_cm2", "names no temperature"),
    ("250,2e-18", "a header line naming the columns"),
])
def test_plain_lab_file_header_problems(tmp_path, head, fragment):
    expect_error(write(tmp_path, f"{head}\n250,2e-18\n260,3e-18\n"), 1, fragment)


def test_plain_lab_file_data_error_line(tmp_path):
    p = write(tmp_path, "wavelength (nm), sigma (cm^2)\n250, 2e-18\n260, -3e-18\n")
    expect_error(p, 3, "value -3e-18")


# ---------------------------------------------------------------- temperature dependence

def test_table_is_linear_in_temperature_and_clamped():
    d = load_spectral_file(SPECTRA / "good_table.csv")
    # at 210 nm: 3e-19 at 200 K, 5e-19 at 300 K -> closed form 3e-19 + 2e-19 (T - 200)/100
    for t in (200.0, 230.0, 275.0, 300.0):
        assert d(210.0, t) == pytest.approx(3e-19 + 2e-19 * (t - 200.0) / 100.0, rel=1e-12, abs=0)
    # clamped outside the tabulated temperatures (documented behaviour)
    assert d(210.0, 150.0) == pytest.approx(3e-19, rel=1e-12, abs=0)
    assert d(210.0, 350.0) == pytest.approx(5e-19, rel=1e-12, abs=0)
    # then linear in wavelength: at 215 nm, 250 K: mean of (4e-19, 0.5e-19)
    assert d(215.0, 250.0) == pytest.approx(0.5 * (4e-19 + 0.5e-19), rel=1e-12, abs=0)


def test_log10_linear_closed_form_and_clamp():
    d = load_spectral_file(SPECTRA / "good_log10.csv")
    for t in (210.0, 250.0, 298.0, 300.0):
        expected = 5.0e-19 * 10.0 ** (2.0e-3 * (t - 298.0))   # log10 s(T) = log10 s298 + B (T-298)
        assert d(200.0, t) == pytest.approx(expected, rel=1e-12, abs=0)
    assert d(200.0, 180.0) == pytest.approx(d(200.0, 210.0), rel=1e-12, abs=0)   # clamped at 210 K
    assert d(200.0, 320.0) == pytest.approx(d(200.0, 300.0), rel=1e-12, abs=0)   # clamped at 300 K
    # between wavelengths: linear interpolation of the values at that temperature
    s190 = 1.0e-18 * 10.0 ** (1.0e-3 * (220.0 - 298.0))
    s200 = 5.0e-19 * 10.0 ** (2.0e-3 * (220.0 - 298.0))
    assert d(195.0, 220.0) == pytest.approx(0.5 * (s190 + s200), rel=1e-12, abs=0)


def test_shapes_for_scalar_and_array_temperatures():
    d = load_spectral_file(SPECTRA / "good_table.csv")
    wl = np.linspace(190.0, 230.0, 9)
    assert d(wl).shape == (9,)
    assert d(wl, 250.0).shape == (9,)
    both = d(wl, np.array([200.0, 300.0]))
    assert both.shape == (2, 9)
    np.testing.assert_array_equal(both[1], d(wl, 300.0))
    assert d(wl.reshape(3, 3), 250.0).shape == (3, 3)
    # zero outside the tabulated range for cross sections
    assert d(190.0) == 0.0 and d(230.0) == 0.0
    with pytest.raises(ValueError, match="scalar or 1-D"):
        d(wl, np.ones((2, 2)) * 250.0)
    with pytest.raises(ValueError, match="finite"):
        d(wl, float("nan"))


def test_quantum_yield_holds_end_values_outside_its_table():
    y = load_spectral_file(SPECTRA / "good_yield.csv")
    np.testing.assert_allclose(y([250.0, 305.0, 315.0, 400.0]), [1.0, 0.75, 0.25, 0.0])


# ---------------------------------------------------------------- bin averages

def test_bin_average_equals_hand_integral_of_piecewise_linear_table(tmp_path):
    # nodes (0,0) (1,2) (3,2) (4,0): a trapezoid.  Hand integrals (common practice, no source):
    #   [0.5, 1.5]: 0.5*(1+2)/2 + 0.5*2      = 0.75 + 1.0 = 1.75 -> mean 1.75
    #   [1.5, 3.5]: 1.5*2 + 0.5*(2+1)/2      = 3.0 + 0.75 = 3.75 -> mean 1.875
    #   [3.5, 6.0]: 0.5*(1+0)/2 + 0 (outside, zero)     = 0.25 -> mean 0.1
    text = _with_dependence("none", "wavelength_nm,sigma", "1e-9,0\n1,2\n3,2\n4,0\n")
    d = load_spectral_file(write(tmp_path, text))
    means = d.bin_average([0.5, 1.5, 3.5, 6.0])
    np.testing.assert_allclose(means, [1.75, 1.875, 0.1], rtol=1e-8)
    # a bin wholly outside the table has mean zero; a bin inside one segment the midpoint value
    np.testing.assert_allclose(d.bin_average([10.0, 20.0]), [0.0])
    np.testing.assert_allclose(d.bin_average([1.2, 1.4]), [2.0])


def test_bin_average_with_hold_and_temperatures():
    y = load_spectral_file(SPECTRA / "good_yield.csv")
    # [290, 310]: 10 nm of 1 held below the table + 10 nm trapezoid (1 + 0.5)/2 -> 17.5/20
    # [315, 330]: 5 nm of (0.25 + 0)/2 + 10 nm of 0 held -> 0.625/15
    np.testing.assert_allclose(y.bin_average([290.0, 310.0]), [17.5 / 20.0], rtol=1e-12)
    np.testing.assert_allclose(y.bin_average([315.0, 330.0]), [0.625 / 15.0], rtol=1e-12)
    t = load_spectral_file(SPECTRA / "good_table.csv")
    two = t.bin_average([200.0, 210.0, 220.0], np.array([200.0, 300.0]))
    np.testing.assert_allclose(two, [[2e-19, 1.5e-19], [3.5e-19, 3e-19]], rtol=1e-12)


def test_bin_average_converges_to_point_values_on_a_fine_grid():
    o3 = cross_section_data("O3")
    edges = np.arange(300.0, 320.0001, 0.01)
    mid = 0.5 * (edges[1:] + edges[:-1])
    np.testing.assert_allclose(o3.bin_average(edges, 230.0), o3(mid, 230.0), rtol=1e-3)


def test_bin_average_rejects_bad_edges():
    d = load_spectral_file(SPECTRA / "good_table.csv")
    with pytest.raises(ValueError, match="strictly increasing"):
        d.bin_average([210.0, 200.0])


# ---------------------------------------------------------------- names and constants

def test_names_paths_and_numbers_resolve():
    assert cross_section_data("O3") is cross_section_data("O3")        # shipped files are cached
    assert cross_section_data(SPECTRA / "lab_plain.csv").species == "lab_plain"
    assert quantum_yield_data(str(SPECTRA / "good_yield.csv")).channel == "X + Y"
    c = quantum_yield_data("0.6")
    assert isinstance(c, ConstantYield)
    np.testing.assert_array_equal(c([300.0, 400.0]), [0.6, 0.6])
    assert c(np.ones(4), np.array([200.0, 250.0, 300.0])).shape == (3, 4)
    np.testing.assert_array_equal(quantum_yield_data(1).bin_average([300.0, 310.0, 330.0]), [1, 1])
    for bad in (1.5, -0.1, "nan"):
        with pytest.raises(DataFileError, match=r"\[0, 1\]"):
            quantum_yield_data(bad)


def test_unknown_names_list_close_matches():
    with pytest.raises(DataFileError, match="close matches: O3") as info:
        cross_section_data("o3x")
    assert "shipped:" in str(info.value)
    with pytest.raises(DataFileError, match="close matches: O3_O1D"):
        quantum_yield_data("O3_01D")
    with pytest.raises(DataFileError, match="no cross-section file 'missing/file.csv'"):
        cross_section_data("missing/file.csv")


def test_quantity_must_match_the_request():
    with pytest.raises(DataFileError, match="expected 'cross_section'"):
        cross_section_data(SPECTRA / "good_yield.csv")


# ---------------------------------------------------------------- shipped data sets

@pytest.mark.parametrize("name", shipped_cross_sections())
def test_shipped_cross_section_is_sound(name):
    d = cross_section_data(name)
    assert d.quantity == "cross_section" and d.units == "cm2"
    assert len(d.source) > 40 and d.provenance          # a full citation and an honest provenance
    assert d.wavelength_nm[0] >= 120.0 and d.wavelength_nm[-1] <= 800.0
    temps = np.array([190.0, 220.0, 260.0, 298.0])
    v = d(np.arange(170.0, 760.0, 0.5), temps)
    assert np.all(np.isfinite(v)) and np.all(v >= 0.0) and v.max() > 0.0
    # every cross section lies below ten times the O3 Hartley peak (~1.1e-17 cm2, Molina & Molina
    # 1986, recalled from memory): catches m2/cm2 and similar unit slips (common practice, no source)
    assert v.max() < 1e-16


@pytest.mark.parametrize("name", shipped_quantum_yields())
def test_shipped_quantum_yield_is_sound(name):
    d = quantum_yield_data(name)
    assert d.quantity == "quantum_yield" and d.units == "1" and d.channel
    assert len(d.source) > 40 and d.provenance
    v = d(np.arange(170.0, 760.0, 0.5), np.array([190.0, 220.0, 260.0, 298.0, 330.0]))
    assert np.all(v >= 0.0) and np.all(v <= 1.0)


# The data-set names the shipped stratospheric mechanism uses (the shared name list of the
# photolysis issue): every one must be shipped.
MECHANISM_CROSS_SECTIONS = [
    "O2", "O3", "NO2", "NO3", "N2O5", "HNO3", "HO2NO2", "N2O", "H2O2", "H2O", "HOCl", "ClONO2",
    "Cl2", "Cl2O2", "OClO", "ClNO2", "BrCl", "BrO", "HOBr", "BrONO2", "CFCl3", "CF2Cl2", "CH3Cl",
    "CH3Br", "CH2O", "HCl", "CH3OOH",
]
MECHANISM_QUANTUM_YIELDS = ["O3_O1D", "O3_O3P", "NO2", "NO3_NO2_O", "NO3_NO_O2", "CH2O_H_HCO",
                            "CH2O_H2_CO"]


def test_every_data_set_of_the_mechanism_is_shipped():
    assert sorted(MECHANISM_CROSS_SECTIONS) == shipped_cross_sections()
    assert sorted(MECHANISM_QUANTUM_YIELDS) == shipped_quantum_yields()
    for name in MECHANISM_CROSS_SECTIONS:
        assert cross_section_data(name).species.split()[0] == name


def test_yields_of_competing_channels_sum_to_at_most_one():
    wl = np.arange(170.0, 760.0, 0.5)
    for a, b in (("O3_O1D", "O3_O3P"), ("NO3_NO2_O", "NO3_NO_O2"), ("CH2O_H_HCO", "CH2O_H2_CO")):
        total = quantum_yield_data(a)(wl, 250.0) + quantum_yield_data(b)(wl, 250.0)
        assert total.max() <= 1.0 + 1e-12, (a, b)


# Anchor values.  Each line: (data set, wavelength nm, temperature K, value, allowed factor, source)
ANCHORS = [
    # O3 Hartley peak ~1.15e-17 cm2 near 254-255 nm: Molina & Molina (1986), JGR 91, 14501; and
    # the 253.65 nm mercury-line value used in ozone photometry (~1.14e-17 cm2) - recalled from memory
    ("O3", 254.0, 298.0, 1.15e-17, 1.1),
    # O3 Chappuis band ~4.8e-21 cm2 near 600 nm (JPL evaluation No. 19) - recalled from memory
    ("O3", 600.0, 298.0, 4.8e-21, 1.3),
    # O3 near its 200 nm minimum ~3.2e-19 cm2 (JPL evaluation No. 19) - recalled from memory
    ("O3", 200.0, 298.0, 3.2e-19, 1.3),
    # O3 Huggins band ~1e-19 cm2 near 310 nm, 298 K (Malicet et al. 1995) - recalled from memory
    ("O3", 310.0, 298.0, 1.0e-19, 1.5),
    # NO2 ~6e-19 cm2 near 400 nm (Vandaele et al. 1998, JQSRT 59, 171) - recalled from memory
    ("NO2", 400.0, 298.0, 6.0e-19, 1.3),
    # Cl2O2 peak ~6.5e-18 cm2 near 245 nm (Papanastasiou et al. 2009, JPCA 113, 13711) - recalled
    # from memory
    ("Cl2O2", 245.0, 298.0, 6.5e-18, 1.2),
    # O2 Herzberg continuum ~7e-24 cm2 near 205 nm (Yoshino et al. 1988, PSS 36, 1469) - recalled
    # from memory
    ("O2", 205.0, 298.0, 7.0e-24, 1.5),
    # Cl2 ~2.6e-19 cm2 near 330 nm at room temperature (Maric et al. 1993; JPL evaluation No. 19)
    # - recalled from memory
    ("Cl2", 330.0, 298.0, 2.6e-19, 1.15),
    # NO3 0-0 band at 662 nm, ~2e-17 cm2 at 298 K (Orphal et al. 2003) - recalled from memory
    ("NO3", 662.0, 298.0, 2.1e-17, 1.5),
    # H2O at the 184.9 nm mercury line ~7.1e-20 cm2 (Cantrell et al. 1997, GRL 24, 2195)
    # - recalled from memory
    ("H2O", 184.9, 298.0, 7.1e-20, 1.3),
    # N2O maximum ~1.4e-19 cm2 near 182 nm (Selwyn et al. 1977) - recalled from memory
    ("N2O", 182.0, 298.0, 1.4e-19, 1.3),
    # HNO3 plateau ~2e-20 cm2 at 250-260 nm (Burkholder et al. 1993) - recalled from memory
    ("HNO3", 255.0, 298.0, 2.0e-20, 1.3),
    # ClONO2 ~1.1e-18 cm2 near 240 nm, 296 K (Burkholder et al. 1994) - recalled from memory
    ("ClONO2", 240.0, 296.0, 1.1e-18, 1.5),
    # BrO 5 nm band means peak ~5e-18 cm2 near 335-340 nm (Wilmouth et al. 1999) - recalled
    # from memory; band-mean level uncertain, hence factor 2
    ("BrO", 338.0, 298.0, 5.0e-18, 2.0),
    # HCl ~6e-20 cm2 near 185 nm (JPL evaluation No. 19) - recalled from memory
    ("HCl", 185.0, 298.0, 6.0e-20, 1.5),
    # H2O2 ~4.75e-19 cm2 at 200 nm (Vaghjiani & Ravishankara 1989) - recalled from memory
    ("H2O2", 200.0, 298.0, 4.75e-19, 1.3),
]


@pytest.mark.parametrize("name,wl,temp,value,factor", ANCHORS,
                         ids=[f"{a[0]}-{a[1]:g}nm" for a in ANCHORS])
def test_cross_section_anchor_values(name, wl, temp, value, factor):
    got = float(cross_section_data(name)(wl, temp))
    assert value / factor <= got <= value * factor, (name, wl, got, value)


def test_o3_huggins_bands_weaken_at_low_temperature():
    # Huggins band means fall with temperature (Malicet et al. 1995; Serdyuchenko et al. 2014);
    # a ratio near 0.5-0.8 at 330-340 nm between ~218 and 298 K - recalled from memory
    o3 = cross_section_data("O3")
    ratio = o3([330.0, 340.0], 218.0) / o3([330.0, 340.0], 298.0)
    assert np.all((ratio > 0.45) & (ratio < 0.85))
    assert o3(255.0, 218.0) == pytest.approx(o3(255.0, 298.0), rel=0.05, abs=0)  # Hartley: weak


def test_cl2_table_follows_maric_expression():
    # Maric et al. (1993), J. Photochem. Photobiol. A 70, 205, as given in the JPL evaluation
    # No. 19 (coefficients recalled from memory): sigma = 1e-20 a^0.5 {27.3 exp[-99.0 a ln^2(329.5/l)]
    # + 0.932 exp[-91.5 a ln^2(406.5/l)]}, a = tanh(402.7/T); evaluated here independently
    def maric(lam, t):
        a = math.tanh(402.7 / t)
        return 1e-20 * math.sqrt(a) * (27.3 * math.exp(-99.0 * a * math.log(329.5 / lam) ** 2)
                                       + 0.932 * math.exp(-91.5 * a * math.log(406.5 / lam) ** 2))
    cl2 = cross_section_data("Cl2")
    for lam, t in ((300.0, 200.0), (330.0, 250.0), (400.0, 300.0), (450.0, 225.0)):
        assert float(cl2(lam, t)) == pytest.approx(maric(lam, t), rel=1e-3, abs=0)


def test_log10_linear_sets_weaken_when_cold():
    # N2O, HNO3, CFCs: cross sections in the stratospheric window fall at low temperature
    # (JPL evaluation No. 19; Selwyn et al. 1977; Burkholder et al. 1993) - recalled from memory.
    # N2O at 210 nm: sigma(210 K)/sigma(298 K) roughly 0.5-0.8
    n2o = cross_section_data("N2O")
    assert 0.5 < float(n2o(210.0, 210.0) / n2o(210.0, 298.0)) < 0.8
    # HNO3 near 250 nm: the evaluation's B ~ 0.9e-3 K-1 in sigma(T) = sigma(298) exp(B (T - 298))
    # (Burkholder et al. 1993 via JPL evaluation No. 19, recalled from memory)
    hno3 = cross_section_data("HNO3")
    assert float(hno3(250.0, 220.0) / hno3(250.0, 298.0)) == pytest.approx(
        math.exp(0.9e-3 * (220.0 - 298.0)), rel=0.03, abs=0)
    for name in ("CFCl3", "CF2Cl2", "CH3Cl", "CH3Br", "N2O5"):
        d = cross_section_data(name)
        assert d.temperature_dependence == "log10_linear"
        wl = d.wavelength_nm
        assert np.all(d(wl, 220.0) <= d(wl, 298.0)), name


def test_o3_o1d_yield_follows_matsumi_formula():
    # Matsumi et al. (2002), JGR 107(D3), 4024, Eq. 1: phi(306 nm, 298 K) = 0.884 and
    # phi(310 nm, 298 K) = 0.523 - values recalled from memory; table interpolated in T
    phi = quantum_yield_data("O3_O1D")
    assert float(phi(306.0, 298.0)) == pytest.approx(0.884, abs=0.01)
    assert float(phi(310.0, 298.0)) == pytest.approx(0.523, abs=0.01)
    # 0.90 below 306 nm and 0.08 at 329-340 nm (JPL evaluation No. 19) - recalled from memory
    assert float(phi(290.0, 250.0)) == pytest.approx(0.90, abs=1e-6)
    assert float(phi(335.0, 250.0)) == pytest.approx(0.08, abs=1e-6)
    # the fall-off moves to shorter wavelength at low temperature (hot-band contribution)
    assert float(phi(312.0, 200.0)) < float(phi(312.0, 298.0))
    # O(3P) channel is the complement
    o3p = quantum_yield_data("O3_O3P")
    wl = np.arange(290.0, 345.0, 0.5)
    np.testing.assert_allclose(phi(wl, 240.0) + o3p(wl, 240.0), 1.0, atol=1e-12)


def test_no2_yield_falls_beyond_its_threshold():
    # NO2 -> NO + O(3P): unity below ~395 nm, falls to ~0 by ~420-430 nm, the fall-off
    # shifting to shorter wavelength at lower temperature (Troe 2000; JPL evaluation No. 19)
    # - recalled from memory
    phi = quantum_yield_data("NO2")
    assert float(phi(380.0)) == 1.0
    assert float(phi(440.0)) == 0.0
    assert 0.3 < float(phi(408.0, 298.0)) < 0.7
    assert float(phi(408.0, 248.0)) < float(phi(408.0, 298.0))
