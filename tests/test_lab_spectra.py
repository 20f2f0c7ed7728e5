"""Lab cross-section files: layouts, temperature columns, partial spectra, missing files.

Reference for every layout: the same numbers as a plain two-column file
(wavelength nm, cross section cm2), so a layout read wrongly (a unit factor,
Angstrom, a column taken for another) changes the values by orders of
magnitude.  Unit conversions: 1 Angstrom = 0.1 nm, "1e-20 cm2" means the
column is in units of 1e-20 cm2 (SI / common practice, no source).  J is a
linear functional of the cross section (J = sum sigma phi F dlambda; common
practice, no source), which the splice checks use.
"""
from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest

from boxchem.cli import main
from boxchem.errors import DataFileError, MechanismError
from boxchem.mechanism import parse_mechanism
from boxchem.photolysis.crosssections import cross_section_data, load_spectral_file
from boxchem.photolysis.rates import PhotolysisRates
from boxchem.photolysis.splice import SplicedSpectrum, reaction_cross_section

WL = np.array([240.0, 250.0, 260.0, 270.0, 280.0, 290.0, 300.0])
SIGMA = np.array([6.5e-18, 6.0e-18, 5.0e-18, 3.7e-18, 2.5e-18, 1.6e-18, 1.0e-18])   # cm2, invented
EDGES = np.arange(238.0, 304.0, 1.5)

LAYOUTS = {
    "comma, cm2": "wavelength (nm),sigma (cm2)\n" + "\n".join(f"{w:g},{s!r}" for w, s in zip(WL.tolist(), SIGMA.tolist())),
    "tab, 1e-20 cm2, comment lines": (
        "# ClO dimer, invented test data\n! instrument: diode array\n"
        "wavelength_nm\tcross section (1e-20 cm2)\n"
        + "\n".join(f"{w:g}\t{s / 1e-20:.6g}" for w, s in zip(WL.tolist(), SIGMA.tolist()))
        + "\n# end of table\nEnd of data\n"),
    "white space, Angstrom, free text, 10^-20 cm^2": (
        "Dimer spectrum measured in our lab, 2026\nPath length 1 m, 200 K\n"
        "lambda [A]    sigma [10^-20 cm^2]\n"
        + "\n".join(f"  {10 * w:g}    {s / 1e-20:.6g}" for w, s in zip(WL.tolist(), SIGMA.tolist()))),
    "uncertainty column, per molecule, descending": (
        "wavelength (nm), sigma (cm2 molecule-1), uncertainty (%)\n"
        + "\n".join(f"{w:g}, {s!r}, 5" for w, s in zip(WL[::-1].tolist(), SIGMA[::-1].tolist()))),
    "semicolon comments, cm^2/molecule x 1e-20 after": (
        "; header follows\nwl (nm),sigma (cm^2/molecule x 1e-20)\n"
        + "\n".join(f"{w:g},{s / 1e-20:.6g}" for w, s in zip(WL.tolist(), SIGMA.tolist()))),
}


def _write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text if text.endswith("\n") else text + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize("layout", list(LAYOUTS))
def test_each_lab_layout_reads_the_reference_numbers(tmp_path, layout):
    reference = load_spectral_file(_write(tmp_path, "ref.csv", LAYOUTS["comma, cm2"]))
    data = load_spectral_file(_write(tmp_path, "lab.txt", LAYOUTS[layout]))
    np.testing.assert_allclose(data.wavelength_nm, WL, rtol=1e-12)
    ratio = data.bin_average(EDGES) / np.where(reference.bin_average(EDGES) > 0,
                                               reference.bin_average(EDGES), 1.0)
    inside = reference.bin_average(EDGES) > 0
    np.testing.assert_allclose(ratio[inside], 1.0, rtol=1e-5)   # 6 significant digits written
    assert data.units == "cm2" and data.quantity == "cross_section"


def test_uncertainty_column_is_kept_absolute(tmp_path):
    data = load_spectral_file(_write(tmp_path, "lab.csv", LAYOUTS["uncertainty column, per molecule, descending"]))
    np.testing.assert_allclose(data.uncertainty[0], 0.05 * SIGMA, rtol=1e-12)   # 5 % of sigma
    assert "uncertainty" in data.provenance


def test_free_text_lines_become_notes_and_the_layout_is_recorded(tmp_path):
    data = load_spectral_file(_write(tmp_path, "lab.txt", LAYOUTS["white space, Angstrom, free text, 10^-20 cm^2"]))
    assert "measured in our lab" in data.notes
    assert "white-space-separated" in data.provenance and "x0.1" in data.provenance


@pytest.mark.parametrize("text, line, fragment", [
    ("wavelength (nm) sigma (1e-20 cm2)\n240 650\n250 abc\n", 3, "'abc' is not a number"),
    ("wavelength (nm),sigma (1e-20 cm2)\n240,650\n250,600,3\n", 3, "3 values"),
    ("wavelength (nm),sigma (m2)\n240,650\n250,600\n", 1, "cross-section unit 'm2'"),
    ("wavelength (nm),sigma (cm2),uncertainty\n240,6e-18,1\n250,6e-18,1\n", 1, "uncertainty column"),
    ("wavelength (nm),sigma_200K (cm2),sigma_200K (cm2)\n240,1,1\n250,1,1\n", 1, "with repeats"),
    ("wavelength (nm),sigma (cm2)\n240,6e-18\n230,6e-18\n260,6e-18\n", 3, "strictly increasing"),
    ("wavelength (nm),sigma (cm2)\n240,6e-18\n250,6e-18\n260,6e-1B\nthe end\n", 4, "'6e-1B' is not a number"),
])
def test_bad_lab_files_name_file_and_line(tmp_path, text, line, fragment):
    path = _write(tmp_path, "bad.csv", text)
    with pytest.raises(DataFileError) as info:
        load_spectral_file(path)
    assert str(info.value).startswith(f"{path}:{line}: ") and fragment in str(info.value), str(info.value)


# ------------------------------------------------------------------ temperature columns

TWO_T = ("wavelength (nm)\tsigma_300K (cm2)\tsigma_200K (cm2)\n"
         + "\n".join(f"{w:g}\t{2 * s!r}\t{s!r}" for w, s in zip(WL.tolist(), SIGMA.tolist())))


def test_temperature_columns_interpolate_linearly_and_clamp(tmp_path):
    data = load_spectral_file(_write(tmp_path, "twoT.tsv", TWO_T))
    assert data.temperature_dependence == "table" and list(data.temperatures) == [200.0, 300.0]
    # linear in T between the columns, end columns outside (docs/spectral-data.md; closed form)
    for t, factor in ((200.0, 1.0), (250.0, 1.5), (275.0, 1.75), (300.0, 2.0), (180.0, 1.0), (320.0, 2.0)):
        np.testing.assert_allclose(data(WL, t), factor * SIGMA, rtol=1e-12)


MINI = """[species]
Cl2O2
Cl
ClOO
[reactions]
j_dimer  Cl2O2 + hv -> Cl + ClOO  photolysis data={data} {extra}
"""


def _mech(tmp_path, data, extra=""):
    return parse_mechanism(MINI.format(data=data, extra=extra), "mini.mech", base_dir=tmp_path)


def _j(mech, temperature=200.0, **kw):
    rates = PhotolysisRates(mech, altitude_m=18_500.0, albedo=0.3, ozone_grid_DU=[150.0, 300.0],
                            temperature_grid=[200.0, 240.0, 300.0], **kw)
    # at nodes of the table (SZA, ozone column, T): no interpolation of log J, so J is exactly
    # linear in the cross section there
    return rates(np.array([30.0, 60.0, 88.0]), 150.0, temperature)[:, 0]


def test_j_uses_the_file_at_each_temperature_node(tmp_path):
    # sigma(300 K) = 2 sigma(200 K) at every wavelength, so J(T) / J(200 K) = 1 + (T - 200)/100 at the
    # J table's temperature nodes (J linear in sigma; common practice, no source).  The lab file
    # covers 240-300 nm only: outside=zero keeps the comparison to the file itself.
    _write(tmp_path, "twoT.tsv", TWO_T)
    mech = _mech(tmp_path, "twoT.tsv", "outside=zero")
    j200, j240, j300 = (_j(mech, t) for t in (200.0, 240.0, 300.0))
    np.testing.assert_allclose(j240 / j200, 1.4, rtol=1e-9)
    np.testing.assert_allclose(j300 / j200, 2.0, rtol=1e-9)


# ------------------------------------------------------------------ partial spectra

def _shipped_on(lo, hi, factor=1.0):
    """The shipped Cl2O2 table between lo and hi nm, times factor, as a two-column file."""
    shipped = cross_section_data("Cl2O2")
    wl = shipped.wavelength_nm
    keep = (wl >= lo) & (wl <= hi)
    sigma = np.ravel(shipped.at_temperature(298.0))[keep]
    return "wavelength (nm),sigma (cm2)\n" + "\n".join(f"{w!r},{factor * s!r}" for w, s in zip(wl[keep].tolist(), sigma.tolist()))


def test_partial_spectrum_equal_to_the_shipped_one_splices_back_to_the_shipped_j(tmp_path):
    _write(tmp_path, "part.csv", _shipped_on(240.0, 300.0))
    j_spliced = _j(_mech(tmp_path, "part.csv"))
    j_shipped = _j(_mech(tmp_path, "Cl2O2"))
    # the spliced function is the shipped one exactly (same knots): same J (closed form)
    np.testing.assert_allclose(j_spliced, j_shipped, rtol=1e-9)


def test_splice_adds_exactly_the_changed_window_and_is_reported(tmp_path):
    _write(tmp_path, "part13.csv", _shipped_on(240.0, 300.0, factor=1.3))
    _write(tmp_path, "window.csv", _shipped_on(240.0, 300.0))
    mech = _mech(tmp_path, "part13.csv")
    warning = [w for w in mech.warnings if "spliced" in w.message]
    assert len(warning) == 1 and warning[0].location.line == 6
    assert "covers 240-300 nm" in warning[0].message and "ratio file/shipped at the joins: 1.3 at 240 nm" in \
        warning[0].message
    j_spliced = _j(mech)
    j_shipped = _j(_mech(tmp_path, "Cl2O2"))
    j_window = _j(_mech(tmp_path, "window.csv", "outside=zero"))     # shipped, 240-300 nm only
    # below 300 nm little sunlight reaches 18.5 km: the window is ~0.7 % of J at SZA 30, so a
    # 240-300 nm file alone would give J far too small; the tolerance below resolves it 1e6 times
    assert j_window[0] > 1e-3 * j_shipped[0] and np.all(j_window < 0.05 * j_shipped)
    # linearity: J(spliced) = J(shipped) + 0.3 J(window)
    np.testing.assert_allclose(j_spliced, j_shipped + 0.3 * j_window, rtol=1e-9)


def test_outside_error_refuses_a_partial_spectrum_at_the_data_key(tmp_path):
    _write(tmp_path, "part.csv", _shipped_on(240.0, 300.0))
    with pytest.raises(MechanismError) as info:
        _mech(tmp_path, "part.csv", "outside=error")
    p = info.value.problems[0]
    assert p.location.file == "mini.mech" and p.location.line == 6
    assert p.location.text[p.location.column - 1:].startswith("data=part.csv")
    assert "covers 240-300 nm" in p.message and "absorbs at 200-240 nm" in p.message


def test_outside_zero_is_reported_not_silent(tmp_path):
    _write(tmp_path, "part.csv", _shipped_on(240.0, 300.0))
    mech = _mech(tmp_path, "part.csv", "outside=zero")
    assert any("outside=zero: J counts no absorption there" in w.message for w in mech.warnings)


def test_a_join_ratio_that_means_a_unit_mistake_is_an_error(tmp_path):
    # the values of a file in 1e-20 cm2 with a header that says cm2: 1e20 times too big
    text = _shipped_on(240.0, 300.0, factor=1e20)
    _write(tmp_path, "units.csv", text)
    with pytest.raises(MechanismError, match="looks like a unit mistake"):
        _mech(tmp_path, "units.csv")


def test_a_full_range_file_is_not_spliced(tmp_path):
    _write(tmp_path, "full.csv", _shipped_on(0.0, 1000.0, factor=1.3))
    mech = _mech(tmp_path, "full.csv")
    data, note = reaction_cross_section(mech.reactions[0])
    assert note is None and not isinstance(data, SplicedSpectrum)
    assert not [w for w in mech.warnings if "covers" in w.message]


def test_scenario_cross_section_override_is_spliced_and_noted(tmp_path):
    path = _write(tmp_path, "part.csv", _shipped_on(240.0, 300.0, factor=1.3))
    mech = _mech(tmp_path, "Cl2O2")
    rates = PhotolysisRates(mech, altitude_m=18_500.0, ozone_grid_DU=[150.0, 300.0],
                            temperature_grid=[200.0, 300.0], cross_sections={"j_dimer": str(path)})
    assert [rid for rid, _ in rates.notices] == ["j_dimer"] and "spliced" in rates.notices[0][1]
    assert "spliced" in rates.data_used["j_dimer"]


# ------------------------------------------------------------------ missing files

@pytest.mark.parametrize("key", ["data=nothere.csv l=1e-3 m=1 n=0.3", "data=Cl2O2 qy=noyield.csv l=1e-3 m=1 n=0.3"])
def test_missing_file_is_an_error_in_check_even_with_lmn(tmp_path, capsys, key):
    mech = tmp_path / "m.mech"
    mech.write_text('extends "stratosphere"\n[changed reactions]\n'
                    f'j_cl2o2  Cl2O2 + hv -> Cl + ClOO  photolysis {key}\n', encoding="utf-8")
    assert main(["check", str(mech)]) == 2
    err = capsys.readouterr().err
    name = "nothere.csv" if "nothere" in key else "noyield.csv"
    column = key.index(name.split(".")[0]) - (5 if "nothere" in key else 3) + 1 + len(
        "j_cl2o2  Cl2O2 + hv -> Cl + ClOO  photolysis ")
    assert f"{mech}:3:{column}: error:" in err and name in err and "no such file" in err, err


def test_missing_file_is_an_error_in_run(tmp_path, capsys):
    (tmp_path / "m.mech").write_text('extends "stratosphere"\n[changed reactions]\n'
                                     'j_cl2o2  Cl2O2 + hv -> Cl + ClOO  photolysis data=gone.csv '
                                     'l=1e-3 m=1 n=0.3\n', encoding="utf-8")
    scenario = Path(__file__).resolve().parents[1] / "examples" / "lab-spectrum" / "base.toml"
    text = scenario.read_text().replace('mechanism = "stratosphere"', 'mechanism = "m.mech"')
    (tmp_path / "s.toml").write_text(text, encoding="utf-8")
    assert main(["run", str(tmp_path / "s.toml"), "-o", str(tmp_path / "out.nc"), "-q"]) == 2
    err = capsys.readouterr().err
    assert f"{tmp_path / 'm.mech'}:3:" in err and "gone.csv" in err
    assert not (tmp_path / "out.nc").exists()


def test_partial_spectrum_warning_is_a_boxchem_message_not_a_python_warning(tmp_path, capsys):
    _write(tmp_path, "part.csv", _shipped_on(240.0, 300.0, factor=1.3))
    (tmp_path / "m.mech").write_text('extends "stratosphere"\n[changed reactions]\n'
                                     'j_cl2o2  Cl2O2 + hv -> Cl + ClOO  photolysis data=part.csv\n',
                                     encoding="utf-8")
    with warnings.catch_warnings():
        warnings.simplefilter("error")          # any Python warning fails the test
        assert main(["check", str(tmp_path / "m.mech")]) == 0
    err = capsys.readouterr().err
    assert f"{tmp_path / 'm.mech'}:3:46: warning: reaction 'j_cl2o2':" in err and "spliced" in err
    assert main(["check", str(tmp_path / "m.mech"), "--strict"]) == 2      # refused under --strict


def test_run_prints_the_splice_of_the_users_spectrum_with_file_and_line(tmp_path, capsys):
    from boxchem.commands.run import print_mechanism_warnings
    from boxchem.mechanism import load_mechanism
    _write(tmp_path, "part.csv", _shipped_on(240.0, 300.0, factor=1.3))
    (tmp_path / "m.mech").write_text('extends "stratosphere"\n[changed reactions]\n'
                                     'j_cl2o2  Cl2O2 + hv -> Cl + ClOO  photolysis data=part.csv\n',
                                     encoding="utf-8")
    print_mechanism_warnings(load_mechanism(tmp_path / "m.mech"))
    err = capsys.readouterr().err
    assert err.startswith(f"{tmp_path / 'm.mech'}:3:46: warning: reaction 'j_cl2o2':") and "spliced" in err
    assert "never produced" not in err       # the shipped file's warnings are check's business


# ------------------------------------------------------------------ no traceback for any lab file
from hypothesis import HealthCheck, given, settings, strategies as st  # noqa: E402

_PIECES = ["wavelength (nm)", "lambda [A]", "sigma (1e-20 cm2)", "sigma_200K (cm2)", "298 K [cm^2]",
           "uncertainty (%)", "error (1e-20 cm2)", ",", "\t", " ", "\n", "#", "!", "240", "2400", "6.5e-18",
           "650", "-1", "nan", "inf", "1e400", "(", ")", "[", "]", "cm2", "K", "%", "x", "10^-20", "é", "\r"]


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                  HealthCheck.function_scoped_fixture])
@given(st.lists(st.sampled_from(_PIECES), max_size=60))
def test_any_lab_text_reads_or_gives_a_data_file_error(tmp_path, pieces):
    path = tmp_path / "fuzz.csv"
    path.write_text("".join(pieces), encoding="utf-8")
    try:
        data = load_spectral_file(path)
    except DataFileError as exc:
        assert str(exc).startswith(str(path)), str(exc)
    else:
        assert np.all(np.isfinite(data.values)) and np.all(np.diff(data.wavelength_nm) > 0)


def test_a_uv_only_ozone_file_misses_the_chappuis_band(tmp_path):
    # the O3 Chappuis band (about 410-750 nm, peak near 5e-21 cm2 at 600 nm, against 1.1e-17 cm2
    # at the Hartley peak near 255 nm; JPL 19-5, recalled from memory) is weak but carries much of
    # J(O3 -> O(3P)): a file over the Hartley and Huggins bands only must count as partial
    from boxchem.photolysis.splice import uncovered_ranges
    o3 = cross_section_data("O3")
    wl = o3.wavelength_nm
    keep = (wl >= 200.0) & (wl <= 360.0)
    rows = "\n".join(f"{w},{s}" for w, s in zip(wl[keep].tolist(), np.ravel(o3.at_temperature(218.0))[keep].tolist()))
    lab = load_spectral_file(_write(tmp_path, "o3uv.csv", "wavelength (nm),sigma_218K (cm2)\n" + rows))
    gaps = uncovered_ranges(lab, o3)
    assert any(a <= 420.0 and b >= 700.0 for a, b in gaps), gaps
