"""Inputs that used to give tracebacks or silently wrong places (issue 13 items 2 and 7).

Every case must end in one of boxchem's own errors that says where and what.
"""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from boxchem.cli import main
from boxchem.errors import DataFileError, MechanismError, ScenarioError
from boxchem.mechanism.parser import MAX_INCLUDE_DEPTH, parse_mechanism, load_mechanism
from boxchem.scenario import Scenario, load_scenario
from boxchem.textio import shorten_line, split_lines

ROOT = Path(__file__).parent.parent
SMALL = ("[species]\nA lumped\nB lumped\n[reactions]\nr1 A -> B constant k=1e-3\n")


# --- times (item 2) ------------------------------------------------------------------------

@pytest.mark.parametrize("start", ["2300-01-01T00:00:00Z", "1600-06-01T00:00:00Z"])
def test_start_outside_the_range_is_an_error_naming_the_key(start):
    with pytest.raises(ScenarioError, match=r"run\.start.*outside the supported range 1678-01-01"):
        load_scenario("stratosphere-box").with_overrides(start=start)


def test_end_past_the_range_is_an_error():
    with pytest.raises(ScenarioError, match=r"run\.duration.*the run's end 2262-"):
        load_scenario("stratosphere-box").with_overrides(start="2261-12-01T00:00:00Z", duration="60 d")


def test_dates_inside_the_range_are_exact():
    s = load_scenario("stratosphere-box").with_overrides(start="2261-06-01T00:00:00Z", duration="1 d")
    assert str(s.start) == "2261-06-01T00:00:00.000000000"
    s = load_scenario("stratosphere-box").with_overrides(start="1678-02-01T00:00:00Z", duration="1 d")
    assert str(s.start) == "1678-02-01T00:00:00.000000000"


def test_trajectory_file_dates_outside_the_range_name_the_line(tmp_path):
    from boxchem.environment.history import load_trajectory_csv
    f = tmp_path / "traj.csv"
    f.write_text("time,temperature_K\n2026-09-01T00:00:00Z,200\n2300-01-01T00:00:00Z,200\n")
    with pytest.raises(DataFileError, match=r"traj\.csv:3: .*2300-01-01T00:00:00Z is outside"):
        load_trajectory_csv(f)


def test_netcdf_trajectory_dates_outside_the_range(tmp_path):
    import netCDF4
    from boxchem.environment.history import load_trajectory_netcdf
    path = tmp_path / "traj.nc"
    with netCDF4.Dataset(path, "w") as nc:
        nc.createDimension("time", 2)
        t = nc.createVariable("time", "f8", ("time",))
        t.units, t.calendar = "days since 2300-01-01", "proleptic_gregorian"
        t[:] = [0.0, 1.0]
        nc.createVariable("temperature_K", "f8", ("time",))[:] = [200.0, 201.0]
    with pytest.raises(DataFileError, match=r"traj\.nc: time: 2300-01-01.*outside the supported range"):
        load_trajectory_netcdf(path)


def test_series_date_outside_the_range_names_the_key():
    with pytest.raises(ScenarioError, match=r"temperature=.*: times\[1\]: time 2400-01-01T00:00:00Z is outside the supported range"):
        load_scenario("stratosphere-box").with_overrides(**{"environment.temperature": {
            "times": ["2026-09-01T00:00:00Z", "2400-01-01T00:00:00Z"], "values": ["200 K", "201 K"]}})


def test_cli_day_outside_the_range(capsys):
    assert main(["jvalues", "stratosphere-box", "--day", "2300-01-01"]) == 2
    assert "--day 2300-01-01: time 2300-01-01" in capsys.readouterr().err


# --- decoding, BOM, line breaks (item 7) -----------------------------------------------------

def test_latin1_scenario_is_a_located_error(tmp_path):
    text = (ROOT / "scenarios" / "stratosphere-box.toml").read_text()
    f = tmp_path / "latin.toml"
    f.write_bytes(("# Température\n" + text).encode("latin-1"))
    with pytest.raises(ScenarioError, match=r"latin\.toml:1:7: the scenario file is not UTF-8.*0xE9"):
        load_scenario(f)


def test_latin1_mechanism_is_a_located_error(tmp_path):
    f = tmp_path / "latin.mech"
    f.write_bytes(("# r\u00e9action\n" + SMALL).encode("latin-1"))
    with pytest.raises(MechanismError, match=r"1:4: the mechanism file is not UTF-8"):
        load_mechanism(f)


def test_byte_order_mark_is_accepted(tmp_path):
    m = tmp_path / "bom.mech"
    m.write_bytes(b"\xef\xbb\xbf" + SMALL.encode())
    assert load_mechanism(m).species_names == ("A", "B")
    assert parse_mechanism("\ufeff" + SMALL).reaction_ids == ("r1",)
    text = (ROOT / "scenarios" / "stratosphere-box.toml").read_text()
    s = tmp_path / "bom.toml"
    s.write_bytes(b"\xef\xbb\xbf" + text.encode())
    (tmp_path / "bom.toml").write_bytes(b"\xef\xbb\xbf" + text.encode())
    assert load_scenario(s).duration_s > 0


@pytest.mark.parametrize("sep", ["\x0c", "\x0b", "\u2028", "\u2029", "\x1c", "\x85"])
def test_only_newlines_end_lines(sep):
    # text after the separator is still comment: no error, and the next line number is right
    text = f"[species]\nA lumped # comment{sep}[reactions] not code\nB lumped\nC lumped bad\n"
    with pytest.raises(MechanismError) as info:
        parse_mechanism(text, "t.mech")
    assert [p.location.line for p in info.value.problems] == [4]


@pytest.mark.parametrize("newline", ["\n", "\r\n", "\r"])
def test_line_numbers_follow_each_newline_convention(newline):
    text = newline.join(["[species]", "A lumped", "", "B lumped", "C lumped bad", ""])
    with pytest.raises(MechanismError) as info:
        parse_mechanism(text, "t.mech")
    assert info.value.problems[0].location.line == 5
    assert split_lines(text)[4] == "C lumped bad"


# --- recursion, long lines, numbers -----------------------------------------------------------

def test_deep_include_chain_is_an_error(tmp_path):
    n = MAX_INCLUDE_DEPTH + 40
    for i in range(n):
        body = f'extends "f{i + 1}.mech"\n' if i + 1 < n else SMALL
        (tmp_path / f"f{i}.mech").write_text(body)
    with pytest.raises(MechanismError, match=f"extends chain deeper than {MAX_INCLUDE_DEPTH}"):
        load_mechanism(tmp_path / "f0.mech")


def test_deep_extends_chain_is_an_error(tmp_path):
    for i in range(80):
        (tmp_path / f"s{i}.toml").write_text(f'extends = "s{i + 1}.toml"\n' if i < 79 else
                                            'extends = "stratosphere-box"\n')
    with pytest.raises(ScenarioError, match="chain of extends deeper than"):
        load_scenario(tmp_path / "s0.toml")


def test_deeply_nested_toml_is_an_error():
    text = "x = " + "[" * 5000 + "]" * 5000 + "\n"
    with pytest.raises(ScenarioError, match="nested too deeply"):
        Scenario.from_text(text)


def test_errors_on_a_huge_line_stay_small():
    line = "r1 A -> B constant k=1 " + " ".join(["k=1"] * 10000)
    with pytest.raises(MechanismError) as info:
        parse_mechanism("[species]\nA lumped\nB lumped\n[reactions]\n" + line + "\n")
    problems = info.value.problems
    assert len(problems) >= 10000
    assert max(len(p.format()) for p in problems) < 600
    assert len(str(info.value)) < 10001 * 600


def test_shorten_line_keeps_the_caret_on_the_column():
    text = "x" * 1000 + "Y" + "x" * 1000
    shown, col = shorten_line(text, 1001)
    assert shown[col - 1] == "Y" and len(shown) < 200


def test_check_sorts_warnings_with_one_path_lookup_per_file(monkeypatch):
    # boxchem check was quadratic in the number of warnings (list membership and a path
    # resolution per warning); now one lookup per distinct file name
    from boxchem.commands import check
    from boxchem.errors import Problem, SourceLocation
    import boxchem.resources
    calls = []
    real = boxchem.resources.shipped_dir
    monkeypatch.setattr(boxchem.resources, "shipped_dir", lambda kind: calls.append(kind) or real(kind))
    warnings = [Problem(f"w{i}", SourceLocation("fresh-user-file.mech", i + 1), "warning")
                for i in range(8000)]
    own = [w for w in warnings if not check._in_shipped_file(w)]
    assert len(own) == 8000 and len(calls) == 1


def test_sigint_during_start_up_imports_is_not_a_traceback():
    code = ("import builtins, runpy, sys\n"
            "real = builtins.__import__\n"
            "def imp(name, *a, **k):\n"
            "    if name == 'numpy':\n"
            "        raise KeyboardInterrupt\n"
            "    return real(name, *a, **k)\n"
            "builtins.__import__ = imp\n"
            "sys.argv = ['boxchem', 'check', 'stratosphere']\n"
            "runpy.run_module('boxchem', run_name='__main__')\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120,
                       env=dict(os.environ, PYTHONPATH=str(ROOT)), cwd=ROOT)
    assert r.returncode == 130
    assert "Traceback" not in r.stderr and "interrupted" in r.stderr


def test_solar_geometry_of_a_far_date_is_not_wrapped():
    from boxchem.environment.solar import days_since_j2000
    # 2300-01-01T00:00 is 109572.5 days after J2000.0 (2000-01-01T12:00): 300 years of the
    # proleptic Gregorian calendar (73 leap days) minus half a day (common practice, no source)
    assert days_since_j2000(np.datetime64("2300-01-01T00:00", "s")) == pytest.approx(109572.5)
