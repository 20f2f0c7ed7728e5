"""Mistakes a new user makes, and the messages that must tell them where and what is valid.

Each test here stands for a user-facing defect found by using boxchem as a
new user would; it fails if the defect comes back.  Command-line tests call
``boxchem.cli.main`` (exit status 2, no traceback) and read stderr.
"""
from __future__ import annotations

from pathlib import Path

import pytest

from boxchem.cli import main
from boxchem.errors import ScenarioError, UnitError
from boxchem.scenario import Scenario
from boxchem.units import parse_quantity

DATA = Path(__file__).parent / "data"

SCENARIO = """[run]
mechanism = "runner_chain.mech"
start = "2026-09-01T00:00:00Z"
duration = "2 h"
output_interval = "1 h"

[location]
latitude = -70.0
altitude = "18 km"

[environment]
temperature = "195 K"
pressure = "60 hPa"

[initial]
A = "2.8 ppmv"
N2 = "0.7808 mol/mol"
"""


def cli_error(capsys, argv: list[str]) -> str:
    """stderr of a command that must fail with status 2 and no traceback."""
    status = main(argv)
    err = capsys.readouterr().err
    assert status == 2, err
    assert "Traceback" not in err
    return err


def test_unclosed_string_in_scenario_is_reported_at_line_and_column():
    text = SCENARIO.replace('pressure = "60 hPa"', 'pressure = "60 hPa')
    with pytest.raises(ScenarioError) as info:
        Scenario.from_text(text, base_dir=DATA, source="s.toml")
    message = str(info.value)
    assert message.startswith("s.toml:13:19: not valid TOML")
    assert "string is not closed" in message
    assert '    pressure = "60 hPa\n' in message


def test_bare_word_value_in_scenario_points_at_it():
    text = SCENARIO.replace('"runner_chain.mech"', "runner_chain.mech")
    with pytest.raises(ScenarioError, match=r"^s\.toml:2:13: not valid TOML.*double quotes"):
        Scenario.from_text(text, base_dir=DATA, source="s.toml")


def test_missing_unit_names_units_as_written_with_an_example():
    # was: "write it with one of pa, hpa, kpa, ..." (the lower-cased lookup keys)
    with pytest.raises(UnitError) as info:
        parse_quantity("50", "pressure", where="--pressure")
    assert "Pa, hPa, kPa, mbar, bar, atm, Torr" in str(info.value)
    assert 'e.g. "50 hPa"' in str(info.value)
    with pytest.raises(UnitError, match=r'one of K, e\.g\. "195 K"'):
        parse_quantity(195, "temperature", where="[environment].temperature")


def test_unknown_unit_lists_valid_units_as_written():
    with pytest.raises(UnitError, match=r"unknown temperature unit 'C' in '195C'; valid units: K$"):
        parse_quantity("195C", "temperature", where="--temperature")


def test_jvalues_altitude_without_unit_is_refused(capsys):
    # was: "--altitude 20" silently meant 20 m (J at the ground for a user meaning 20 km)
    err = cli_error(capsys, ["jvalues", "stratosphere", "--sza", "30", "--altitude", "20"])
    assert "--altitude: '20' has no unit" in err and 'e.g. "20 km"' in err


def test_jvalues_reactions_without_plot_is_refused(capsys):
    # was: silently ignored
    err = cli_error(capsys, ["jvalues", "polar-spring", "--reactions", "j_cl2o2"])
    assert "--reactions" in err and "--plot" in err


def test_jvalues_reactions_typo_fails_before_the_table_with_a_suggestion(capsys, tmp_path):
    # was: the whole day's table was printed first, then the error, without a suggestion
    err = cli_error(capsys, ["jvalues", "polar-spring", "--plot", str(tmp_path / "j.png"),
                             "--reactions", "j_cl2o3"])
    assert "no photolysis reaction 'j_cl2o3' - did you mean 'j_cl2o2'?" in err
    assert capsys.readouterr().out == ""
    assert not (tmp_path / "j.png").exists()


def test_jvalues_day_table_does_not_report_the_24h_sample_as_0000(capsys):
    # The table's last sample is 24:00 (00:00 of the next day); a maximum there was
    # printed as "00:00".  Synthetic table: J rises all day, largest at 24:00.
    import numpy as np

    from boxchem.commands.jvalues import _print_day_text
    times = np.datetime64("2026-09-15T00:00", "ns") + np.arange(0, 25) * np.timedelta64(1, "h")
    sza = np.linspace(89.0, 60.0, times.size)        # sun rising all day, lowest SZA at 24:00
    table = {"time": times, "sza": sza, "horizon": np.full(times.size, 94.0),
             "j": np.linspace(1.0, 25.0, times.size)[:, None] * 1e-5,
             "ids": ["j_x"], "equations": ["X + hv -> Y"], "methods": ["spectral"]}
    _print_day_text(table)
    out = capsys.readouterr().out
    assert "minimum SZA 61.21 deg at 23:00 UTC" in out
    assert "2.4000e-04     23:00" in out


@pytest.fixture
def scenario_file(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(SCENARIO.replace('"runner_chain.mech"', f'"{DATA / "runner_chain.mech"}"'))
    return path


@pytest.mark.parametrize("vary, expected", [
    # was: no suggestion
    ("location.latitud=-60,-70", "unknown key 'location.latitud' - did you mean 'location.latitude'?"),
    # was: every member ran and failed, then "every member of the sweep failed"
    # (the error names the --vary item; it once named the file's [scale] as well, as if the
    # typo were in the file)
    ("scale.a_to_bb=1,2", "--vary scale.a_to_bb: unknown reaction id 'a_to_bb' - did you mean 'a_to_b'?"),
    ("initial.AA=1ppbv,2ppbv", "--vary initial.AA: unknown species 'AA'"),
])
def test_sweep_bad_vary_fails_before_any_member_runs(capsys, tmp_path, scenario_file, vary, expected):
    out = tmp_path / "sweep.nc"
    err = cli_error(capsys, ["sweep", str(scenario_file), "--vary", vary, "-o", str(out), "-q"])
    assert expected in err
    assert not out.exists()


def test_check_strict_judges_the_users_file_not_the_included_shipped_one(capsys, tmp_path):
    # was: any file including "stratosphere" failed --strict on the shipped file's
    # source-gas warnings (CH4, N2O, CFCs are never produced), and they were all listed
    mine = tmp_path / "mine.mech"
    mine.write_text('extends "stratosphere"\n[changed reactions]\n'
                    'clo_clo_m  ClO + ClO + M -> Cl2O2 + M  falloff k0=2.0e-32 n=4.0 kinf=3.0e-12 m=1.5'
                    '  ref="invented test value"\n')
    assert main(["check", str(mine), "--strict"]) == 0
    captured = capsys.readouterr()
    assert "never produced" not in captured.err
    assert "of the extended shipped mechanism, not shown: see 'boxchem check stratosphere'" in captured.out
    # a warning in the user's own file is still shown, and is an error under --strict
    mine.write_text(mine.read_text() + "[reactions]\nclo_clo_2  ClO + ClO + M -> Cl2O2 + M  falloff k0=2.0e-32"
                    " n=4.0 kinf=3.0e-12 m=1.5  ref=\"invented test value\"\n")
    err = cli_error(capsys, ["check", str(mine), "--strict"])
    assert f"{mine}:5:" in err and "error under --strict" in err


def mechanism_errors(text: str, tmp_path) -> list[str]:
    """Messages of every problem in a mechanism text (which must fail)."""
    from boxchem.errors import MechanismError
    from boxchem.mechanism.parser import parse_mechanism
    with pytest.raises(MechanismError) as info:
        parse_mechanism(text, "mine.mech", base_dir=tmp_path)
    return [p.message for p in info.value.problems]


def test_misspelt_extends_gives_only_the_extends_error(tmp_path):
    # was: also "no reaction with id 'clo_clo_m' to change" and "no reaction with id
    # 'clo_o'" for every line that depended on the missing file
    messages = mechanism_errors(
        'extends "stratosphre"\n[changed reactions]\n'
        'clo_clo_m  ClO + ClO + M -> Cl2O2 + M  falloff k0=2.0e-32 n=4.0 kinf=3.0e-12 m=1.5\n'
        '[dropped reactions]\nclo_o\n[reactions]\nmine  ClO + O3 -> Cl + O2 + O2  constant k=1e-15\n', tmp_path)
    assert len(messages) == 1, messages
    assert "did you mean 'stratosphere'?" in messages[0]


def test_misspelt_section_header_is_one_error_and_its_lines_are_skipped(tmp_path):
    # was: "expected a section header" on every line after [replce]
    messages = mechanism_errors(
        'extends "stratosphere"\n[changed reactons]\n'
        'clo_clo_m  ClO + ClO + M -> Cl2O2 + M  falloff k0=2.0e-32 n=4.0 kinf=3.0e-12 m=1.5\n'
        'clo_o  ClO + O -> Cl + O2  arrhenius A=2.8e-11\n'
        '[dropped reactions]\nno_such_id\n', tmp_path)
    assert len(messages) == 2, messages
    assert messages[0].startswith("unknown section [changed reactons] - did you mean 'changed reactions'?")
    assert messages[1].startswith("[dropped reactions]: no reaction with id 'no_such_id'")


def test_misspelt_species_section_does_not_make_every_species_unknown(tmp_path):
    messages = mechanism_errors(
        "[specis]\nClO\nCl2O2\nM fixed\n[reactions]\n"
        "r1 ClO + ClO + M -> Cl2O2 + M falloff k0=1e-32 n=3 kinf=3e-12 m=1\n", tmp_path)
    assert len(messages) == 1 and "unknown section [specis]" in messages[0], messages


def test_line_with_unknown_species_and_unknown_key_reports_both(tmp_path):
    # was: only the unknown key; the unknown species showed up after fixing it.  The
    # missing kinf= is not reported as well: knf= is probably it.
    messages = mechanism_errors(
        "[species]\nClO\nCl2O2\nM fixed\n[reactions]\n"
        "r1 ClO + CIO -> Cl2O2 falloff k0=1e-32 n=3 knf=3e-12 m=1\n", tmp_path)
    assert len(messages) == 2, messages
    assert messages[0] == "reaction 'r1': unknown species 'CIO' - did you mean 'ClO'?"
    assert messages[1].startswith("falloff takes no key 'knf' - did you mean 'kinf'?")


@pytest.mark.parametrize("kind, example", [
    ("pressure", "60 hPa"), ("temperature", "195 K"), ("length", "18 km"), ("time", "15 min"),
    ("column", "300 DU"), ("surface_area", "2 um2 cm-3"), ("angle", "70 deg"),
])
def test_unreadable_value_example_matches_the_quantity_kind(kind, example):
    # was: (e.g. "60 hPa") for every kind, an angle or a temperature included
    with pytest.raises(UnitError) as info:
        parse_quantity("about seventy", kind, where="[location].x")
    assert f'(e.g. "{example}")' in str(info.value)
    with pytest.raises(UnitError) as info:
        parse_quantity([1, 2], kind, where="[location].x")
    assert f'such as "{example}"' in str(info.value)


def test_unreadable_amount_example_is_an_amount():
    from boxchem.units import parse_amount
    with pytest.raises(UnitError, match=r'\(e\.g\. "2\.8 ppmv"\)'):
        parse_amount("lots", where="[initial].O3")


def test_run_scale_typo_names_the_option_not_the_file(capsys, scenario_file):
    # was: "s.toml: [scale].a_to_bb: unknown reaction id ..." for a typo on the command line
    err = cli_error(capsys, ["run", str(scenario_file), "--scale", "a_to_bb=1.2", "-q",
                             "-o", str(scenario_file.with_suffix(".nc"))])
    assert "--scale a_to_bb=1.2: unknown reaction id 'a_to_bb' - did you mean 'a_to_b'?" in err
    assert "s.toml" not in err


def test_run_set_errors_name_the_option(capsys, scenario_file):
    err = cli_error(capsys, ["run", str(scenario_file), "--set", 'run.duration="-2 h"',
                             "--set", "location.latitud=-60", "--set", 'environment.temperature="5 C"',
                             "-q"])
    assert '--set run.duration="-2 h": must be > 0' in err
    assert "--set location.latitud=-60: unknown key 'latitud' - did you mean 'latitude'?" in err
    assert "--set environment.temperature=\"5 C\": unknown temperature unit 'C'" in err
    assert "s.toml: [" not in err


def test_sweep_member_value_error_names_the_vary_item(scenario_file):
    from boxchem.analysis.sweep import run_member
    with pytest.raises(ScenarioError, match=r"^--vary location\.latitude=-95: "):
        run_member(str(scenario_file), {"location.latitude": -95})


@pytest.mark.parametrize("source, expected", [
    # was: "--day belongs to the scenario form ..., not 'polar-sprin'" with no suggestion
    ("polar-sprin", "did you mean 'polar-spring' (a shipped scenario)?"),
    ("stratosfere", "did you mean 'stratosphere' (a shipped mechanism)?"),
])
def test_jvalues_misspelt_source_suggests_the_closest_shipped_name_of_either_kind(capsys, source, expected):
    err = cli_error(capsys, ["jvalues", source, "--day", "2026-09-15"])
    assert f"no shipped mechanism or scenario named {source!r} - {expected}" in err


def test_budget_of_a_non_netcdf_file_says_so_without_xarray_internals(capsys, scenario_file):
    # was: "did not find a match in any of xarray's currently installed IO backends ..."
    for command in (["budget", str(scenario_file)], ["compare", str(scenario_file), str(scenario_file)],
                    ["plot", str(scenario_file)]):
        err = cli_error(capsys, command)
        assert (f"{scenario_file}: not a netCDF file (boxchem results are written by "
                f"'boxchem run ... -o OUT.nc')") in err
        assert "xarray" not in err and "backends" not in err


def test_budget_cycle_table_dashes_line_up_with_its_columns():
    # was: an empty second column left a 4-space gap after the dashes under "cycle"
    import re

    from boxchem.commands.budget import render_text
    records = [{"section": "cycle", "period": "run", "term": name, "equation": "", "value": value,
                "units": "cm-3 s-1", "fraction": value / 30.0, "accumulated_percent": 1.5}
               for name, value in (("clo_dimer", 20.0), ("unattributed", 8.0), ("total", 30.0))]
    lines = render_text(records, "Ox", "x.nc", "recycled").splitlines()
    header = next(i for i, line in enumerate(lines) if line.lstrip().startswith("cycle"))
    dashes = lines[header + 1]
    assert re.fullmatch(r"  -+(  -+)*", dashes), dashes
    # every column's dashes start where its header starts
    starts = [m.start() for m in re.finditer(r"-+", dashes)]
    title = lines[header]
    assert starts == [title.index(h) for h in ("cycle", "mean", "% of total", "accumulated")]


def test_every_option_with_a_default_states_it_in_help():
    # was: "boxchem compare --help" did not say that --top lists 10 (nor --format text)
    import argparse

    from boxchem.cli import build_parser
    parser = build_parser()
    commands = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction)).choices
    silent = []
    for name, sub in commands.items():
        for action in sub._actions:
            if not action.option_strings or isinstance(action, argparse._HelpAction) or action.required:
                continue
            if action.default in (None, False, [], argparse.SUPPRESS):
                continue        # off / empty unless given: nothing to state
            if "default" not in (action.help or ""):
                silent.append(f"{name} {action.option_strings[-1]}")
    assert not silent, f"options whose --help does not state the default: {silent}"


def test_plot_help_lists_the_species_plotted_by_default():
    from boxchem.commands.plot import DEFAULT_SPECIES as listed
    from boxchem.plotting import DEFAULT_SPECIES
    assert tuple(listed) == tuple(DEFAULT_SPECIES)


def test_check_warning_count_matches_the_warnings_shown(capsys, tmp_path):
    # was: "warnings: 6" with no warning shown (the count included the shipped file's)
    import re
    mine = tmp_path / "mine.mech"
    mine.write_text('extends "stratosphere"\n[species]\nXx lumped\n')     # one warning of its own
    assert main(["check", str(mine)]) == 0
    captured = capsys.readouterr()
    shown = captured.err.count(": warning: ")
    assert shown == 1 and "'Xx' takes part in no reaction" in captured.err
    line = next(s for s in captured.out.splitlines() if s.strip().startswith("warnings:"))
    match = re.fullmatch(r"\s*warnings:\s+(\d+) \(and (\d+) of the extended shipped mechanism, not shown: "
                         r"see 'boxchem check stratosphere'\)", line)
    assert match and int(match.group(1)) == shown and int(match.group(2)) > 0, line
