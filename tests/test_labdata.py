"""Reading lab rate tables and kinetic traces (boxchem.io.labdata): layouts, units, errors."""
import math

import numpy as np
import pytest

from boxchem.errors import DataFileError
from boxchem.io.labdata import parse_rate_unit, read_rate_table, read_trace

K_B = 1.380649e-23  # J K-1, CODATA 2018 exact (common practice, no source)
TORR = 101325.0 / 760.0  # Pa (definition of the Torr; common practice, no source)


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_comma_table_with_scaled_unit_relative_2sigma_and_torr(tmp_path):
    path = _write(tmp_path, "a.csv",
                  "# a comment line\n"
                  "T [K], p [Torr], k [1e-12 cm3 molecule-1 s-1], k_err [% 2 sigma], bath, note\n"
                  "200, 100, 3.2, 10, N2, first  # trailing comment\n"
                  "\n"
                  "250, 50, 2.5, 20, He, second\n")
    t = read_rate_table(path)
    assert t.kind == "k" and t.value_units == "cm3 s-1"
    np.testing.assert_allclose(t.value, [3.2e-12, 2.5e-12])
    # 10 % at 2 sigma -> 5 % at 1 sigma
    np.testing.assert_allclose(t.sigma, [0.05 * 3.2e-12, 0.10 * 2.5e-12])
    # ideal gas: [M] = p / (k_B T), in cm-3
    np.testing.assert_allclose(t.air_density, [100 * TORR / (K_B * 200) * 1e-6, 50 * TORR / (K_B * 250) * 1e-6])
    assert t.bath_gas == ("N2", "He")
    assert list(t.line) == [3, 5]
    assert t.notes == ("first", "second")


def test_tab_table_termolecular_absolute_uncertainty(tmp_path):
    path = _write(tmp_path, "b.tsv", "T [K]\tM [molecule cm-3]\tk [cm6 molecule-2 s-1]\tdk [cm6 molecule-2 s-1]\tbath gas\n"
                  "200\t1e17\t3.0e-32\t3e-33\tN2\n300\t2e18\t1.0e-32\t2e-33\tN2\n")
    t = read_rate_table(path)
    assert t.value_units == "cm6 s-1"
    np.testing.assert_allclose(t.air_density, [1e17, 2e18])
    np.testing.assert_allclose(t.sigma, [3e-33, 2e-33])


def test_space_separated_table_with_bracket_units_and_u_of_k(tmp_path):
    path = _write(tmp_path, "c.txt", "T [degC]   k [cm^3/molecule/s]   u(k) [cm3 molecule-1 s-1]\n"
                  "  25.0   1e-11   1e-12   # room temperature\n  -50   2e-11 2e-12\n")
    t = read_rate_table(path)
    np.testing.assert_allclose(t.temperature, [298.15, 223.15])
    np.testing.assert_allclose(t.sigma, [1e-12, 2e-12])
    assert np.all(np.isnan(t.air_density))


def test_quantity_calculus_headers(tmp_path):
    # 'T / K' and 'k / 1e-12 cm3 molecule-1 s-1' as papers' tables write them; semicolons
    path = _write(tmp_path, "q.csv", "T / K; k / 1e-12 cm3 molecule-1 s-1; k_err / %\n298; 12.0; 5\n")
    t = read_rate_table(path)
    np.testing.assert_allclose(t.value, [1.2e-11])
    np.testing.assert_allclose(t.sigma, [0.6e-12])


def test_forward_reverse_pairs_give_equilibrium_constant(tmp_path):
    path = _write(tmp_path, "d.txt", "T [K] k_forward [cm3 molecule-1 s-1] k_forward_err [%] k_reverse [s-1] "
                  "k_reverse_err [%]\n250 1e-13 3 2 4\n")
    t = read_rate_table(path)
    assert t.kind == "K"
    np.testing.assert_allclose(t.value, [5e-14])
    # independent relative errors add in quadrature (3 % and 4 % -> 5 %; common practice, no source)
    np.testing.assert_allclose(t.sigma, [0.05 * 5e-14])


def test_equilibrium_constant_column_and_common_uncertainty(tmp_path):
    path = _write(tmp_path, "e.csv", "# K measured directly\ncommon_uncertainty = 10 % 2 sigma\n"
                  "T [K], K [cm3 molecule-1], K_err [%]\n250, 1e-13, 5\n260, 5e-14, 5\n")
    t = read_rate_table(path)
    assert t.kind == "K" and t.common_rel_sigma == pytest.approx(0.05)


def test_rate_unit_reader():
    assert parse_rate_unit("cm3 molecule-1 s-1") == (1.0, 3, -1)
    assert parse_rate_unit("1e-12 cm3 molecule-1 s-1") == (1e-12, 3, -1)
    assert parse_rate_unit("10^-32 cm6 molecule-2 s-1") == (1e-32, 6, -1)
    assert parse_rate_unit("cm^3/molecule/s") == (1.0, 3, -1)
    assert parse_rate_unit("s-1") == (1.0, 0, -1)
    with pytest.raises(ValueError):
        parse_rate_unit("cm3 molecule-2 s-1")
    with pytest.raises(ValueError):
        parse_rate_unit("L mol-1 s-1")


@pytest.mark.parametrize("text, expected", [
    ("T [K], k [cm3 molecule-1 s-1], k_err [%]\n200, 1e-11, 5\n210, abc, 5\n",
     "t.csv:3:6: 'abc' in column 'k [cm3 molecule-1 s-1]' is not a finite number"),
    ("T [K], k [cm3 molecule-1 s-1], k_err [%]\n200, 1e-11\n", "t.csv:2: 2 values, expected 3"),
    ("T [K], k [cm3 molecule-1 s-1], k_err [%]\n200, -1e-11, 5\n", "t.csv:2:6: k -1e-11"),
    ("T [K], k [cm3 molecule-1 s-1], k_err [%]\n200, 1e-11, 0\n", "t.csv:2:13: uncertainty 0"),
    ("T [K], k [cm3 molecule-1 s-1], kerr [%]\n200, 1e-11, 5\n", "unknown column 'kerr' - did you mean 'k_err'?"),
    ("T [K], k [L mol-1 s-1]\n200, 1e-11\n", "t.csv:1:8: unit 'L mol-1 s-1'"),
    ("T [K], k [cm3 molecule-1 s-1], k_err\n200, 1e-11, 5\n", "uncertainty column 'k_err' has no unit"),
    ("T [F], k [cm3 molecule-1 s-1]\n200, 1e-11\n", "unknown temperature unit 'F'; valid: K, degC"),
    ("p [hPa], k [cm3 molecule-1 s-1]\n200, 1e-11\n", "no temperature column; add 'T [K]'"),
    ("T [K], p [psi], k [cm3 molecule-1 s-1]\n200, 1, 1e-11\n", "valid: Pa, hPa, kPa, mbar, bar, atm, Torr"),
    ("T [K], K [cm3 molecule-1 s-1]\n200, 1e-11\n", "equilibrium constant K is in cm3 molecule-1"),
    ("uncertainty = 5 %\nT [K], k [cm3 molecule-1 s-1]\n200, 1e-11\n", "t.csv:1: unknown setting 'uncertainty'"),
    ("# only a comment\n", "no header line and no data"),
    ("T [K], k [cm3 molecule-1 s-1]\n", "no data rows after the header (line 1)"),
])
def test_bad_rate_tables_name_file_line_column(tmp_path, text, expected):
    path = _write(tmp_path, "t.csv", text)
    with pytest.raises(DataFileError) as err:
        read_rate_table(path)
    assert expected in str(err.value)
    assert "t.csv" in str(err.value)


def test_all_bad_rows_are_reported_together(tmp_path):
    rows = "".join(f"{200 + i}, x, 5\n" for i in range(20))
    path = _write(tmp_path, "many.csv", "T [K], k [cm3 molecule-1 s-1], k_err [%]\n" + rows)
    with pytest.raises(DataFileError) as err:
        read_rate_table(path)
    text = str(err.value)
    assert text.startswith("20 problems in") and "many.csv:2:" in text and "... and 8 more" in text


TRACE = """# a trace
kind = second-order
T = 250 K
p = 100 Torr
bath = N2
cross_section = 5e-18 cm2
cross_section_uncertainty = 5 %
path_length = 0.8 m
t [ms], absorbance [base 10]
-0.1, 0.0
0.0, 0.01
0.1, 0.009
0.2, 0.008
0.3, 0.007
0.4, 0.0065
"""


def test_trace_conditions_units_and_decadic_absorbance(tmp_path):
    tr = read_trace(_write(tmp_path, "tr.csv", TRACE))
    assert tr.kind == "second-order" and tr.temperature == 250.0
    assert tr.path_length == pytest.approx(80.0) and tr.cross_section == 5e-18
    assert tr.cross_section_rel_sigma == pytest.approx(0.05)
    np.testing.assert_allclose(tr.time[:2], [-1e-4, 0.0])
    # decadic absorbance log10(I0/I) = ln(I0/I) / ln 10 (common practice, no source)
    assert tr.signal[1] == pytest.approx(0.01 * math.log(10))
    assert tr.air_density == pytest.approx(100 * TORR / (K_B * 250) * 1e-6)
    assert tr.first_data_line == 10


@pytest.mark.parametrize("change, expected", [
    (("kind = second-order", "kind = second order"), "did you mean 'second-order'?"),
    (("path_length = 0.8 m\n", ""), "needs 'path_length = ...'"),
    (("T = 250 K", "temprature = 250 K"), "unknown condition 'temprature' - did you mean 'temperature'?"),
    (("p = 100 Torr\n", ""), "missing condition 'p = ...' or 'M = ...'"),
    (("[base 10]", ""), "column 'absorbance' needs the unit [base e] or [base 10]"),
    (("t [ms]", "t [fortnights]"), "needs a unit: s, ms, us"),
    (("0.2, 0.008", "0.2, x"), "tr.csv:13:6: 'x' in column 'absorbance [base 10]'"),
    (("0.3, 0.007", "0.1, 0.007"), "times must increase"),
])
def test_bad_traces_say_where_and_what(tmp_path, change, expected):
    path = _write(tmp_path, "tr.csv", TRACE.replace(*change))
    with pytest.raises(DataFileError) as err:
        read_trace(path)
    assert expected in str(err.value)


def test_pseudo_first_order_trace_needs_co_reactant(tmp_path):
    text = "kind = pseudo-first-order\nT = 298 K\nM = 1e18 cm-3\nt [us]  signal [arb]\n" + \
        "".join(f"{i} {100 - i}\n" for i in range(10))
    with pytest.raises(DataFileError, match="needs 'co_reactant = ...'"):
        read_trace(_write(tmp_path, "p.txt", text))
    tr = read_trace(_write(tmp_path, "q.txt", text.replace("t [us]", "co_reactant = 2e13 cm-3\nt [us]")))
    assert tr.co_reactant == 2e13 and tr.time[1] == pytest.approx(1e-6)


def test_mangled_lab_files_give_boxchem_errors_not_tracebacks():
    # random character edits of the example files: every outcome is a result or a BoxchemError
    # (a regression test for overflow in trial fit steps found this way; common practice, no source)
    import random
    from pathlib import Path

    from boxchem.analysis.ratefit import fit_rate_table
    from boxchem.analysis.traces import fit_traces
    from boxchem.errors import BoxchemError

    folder = Path(__file__).resolve().parents[1] / "examples" / "lab-fit"
    cases = [(folder / "cl_o3_lab.csv", "arrhenius"), (folder / "clo_clo_m_lab.tsv", "falloff"),
             (folder / "cl2o2_equilibrium_lab.txt", "equilibrium"),
             (sorted((folder / "traces").glob("clo_*"))[0], None),
             (sorted((folder / "traces").glob("cl_o3_*"))[0], None)]
    rng = random.Random(4)
    alphabet = list(" ,\t#[]()%=-+.eE0123456789kKTpM/\n;")
    for _ in range(80):
        path, law = rng.choice(cases)
        chars = list(path.read_text())
        for _ in range(rng.randint(1, 5)):
            chars[rng.randrange(len(chars))] = rng.choice(alphabet)
        text = "".join(chars)
        try:
            if law is None:
                fit_traces([read_trace("mangled.txt", text=text)])
            else:
                fit = fit_rate_table(read_rate_table("mangled.csv", text=text), law)
                assert fit.f298 >= 1.0 and fit.g >= 0.0
        except BoxchemError as exc:
            assert "mangled" in str(exc) or "fit" in str(exc) or "data" in str(exc) or "trace" in str(exc)
