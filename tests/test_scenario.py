"""Scenario files: unit conversions, defaults, overrides and every kind of mistake."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from boxchem.errors import ScenarioError
from boxchem.scenario import Scenario, ThresholdRuleSpec, TimeSeriesSpec, load_scenario

DATA = Path(__file__).parent / "data"

BASE = """
[run]
mechanism = "runner_chain.mech"
start = "2026-09-01T00:00:00Z"
duration = "2 d"
output_interval = "30 min"

[location]
latitude = -70.0
altitude = "18 km"

[environment]
temperature = "195 K"
pressure = "60 hPa"

[initial]
A = "2.8 ppmv"
B = "1e8 cm-3"
N2 = "0.7808 mol/mol"
"""


def scenario(text: str = BASE) -> Scenario:
    return Scenario.from_text(text, base_dir=DATA, source="test.toml")


def edited(old: str, new: str) -> str:
    assert old in BASE
    return BASE.replace(old, new)


def error_of(text: str) -> str:
    with pytest.raises(ScenarioError) as info:
        scenario(text)
    return str(info.value)


# -- conversions ----------------------------------------------------------------

def test_units_are_converted_once_at_load():
    s = scenario()
    assert s.start == np.datetime64("2026-09-01T00:00:00", "ns")
    assert s.duration_s == 2 * 86400.0                 # 1 d = 86400 s (definition)
    assert s.output_interval_s == 1800.0               # 1 min = 60 s (definition)
    assert s.altitude_m == 18000.0                     # 1 km = 1000 m (definition)
    assert s.pressure == pytest.approx(6000.0)         # 1 hPa = 100 Pa (definition)
    assert s.temperature == 195.0
    assert s.initial["A"] == (pytest.approx(2.8e-6), "mole_fraction")   # ppmv = 1e-6 (definition)
    assert s.initial["B"] == (1e8, "number_density")
    assert s.initial["N2"] == (0.7808, "mole_fraction")


def test_defaults_are_filled_in():
    s = scenario()
    assert s.longitude == 0.0
    assert s.ozone_column_du == 300.0
    assert s.psc_surface_area == 0.0 and s.sulfate_surface_area == 0.0
    assert s.rtol == 1e-4 and s.atol == 1.0
    assert s.photolysis_method == "spectral" and s.solver_method == "rodas3"
    assert s.scale == {}


def test_output_times_cover_the_run_and_end_exactly():
    s = scenario(edited('output_interval = "30 min"', 'output_interval = "7 h"'))
    times = s.output_times_s()
    assert times[0] == 0.0 and times[-1] == 2 * 86400.0
    assert np.all(np.diff(times)[:-1] == 7 * 3600.0)


def test_time_series_and_threshold_rule():
    s = scenario(BASE.replace(
        'temperature = "195 K"',
        'temperature = { times = ["0 d", "1 d", "2026-09-03T00:00:00Z"], values = ["190 K", "200 K", "205 K"] }\n'
        'psc_surface_area = { rule = "threshold", area = "2 um2 cm-3", below = "195 K" }\n'
        'sulfate_surface_area = { times = [0, 12], time_unit = "h", values = [0.5, 1.0], unit = "um2 cm-3" }'))
    assert isinstance(s.temperature, TimeSeriesSpec)
    np.testing.assert_array_equal(s.temperature.times_s, [0.0, 86400.0, 2 * 86400.0])
    np.testing.assert_array_equal(s.temperature.values, [190.0, 200.0, 205.0])
    # 1 um2 cm-3 = 1e-8 cm2 cm-3 (definition: 1 um = 1e-4 cm)
    assert s.psc_surface_area == ThresholdRuleSpec(area=pytest.approx(2e-8), below=195.0)
    np.testing.assert_allclose(s.sulfate_surface_area.values, [0.5e-8, 1.0e-8])
    np.testing.assert_array_equal(s.sulfate_surface_area.times_s, [0.0, 43200.0])


def test_location_by_pressure_and_atol_with_unit():
    s = scenario(edited('altitude = "18 km"', 'pressure = "60 hPa"')
                 + '\n[solver]\natol = "1 cm-3"\nrtol = 1e-6\n')
    assert s.altitude_m is None and s.location_pressure_pa == pytest.approx(6000.0)
    assert s.atol == 1.0 and s.rtol == 1e-6


def test_shipped_scenario_loads_by_bare_name():
    s = load_scenario("stratosphere-box")
    assert s.duration_s > 0 and s.mechanism is not None
    assert "O3" in s.initial


def test_mechanism_path_is_relative_to_the_scenario_file():
    s = load_scenario(DATA / "runner_chain.toml")
    assert s.mechanism_path.resolve() == (DATA / "runner_chain.mech").resolve()
    assert s.mechanism.reaction_ids == ("a_to_b", "b_to_c", "d_loss")
    assert s.text == (DATA / "runner_chain.toml").read_text()


# -- overrides ------------------------------------------------------------------------

def test_with_overrides_revalidates_and_records():
    s = scenario(BASE + '\n[scale]\na_to_b = 2.0\n')
    t = s.with_overrides(scale={"a_to_b": 1.5, "b_to_c": 0.5}, duration="6 h",
                         **{"environment.temperature": "210 K"})
    assert t.scale == {"a_to_b": 3.0, "b_to_c": 0.5}
    assert t.duration_s == 6 * 3600.0 and t.temperature == 210.0
    assert t.text == s.text
    assert t.overrides["run.duration"] == "6 h"
    assert s.duration_s == 2 * 86400.0            # the original is unchanged
    with pytest.raises(ScenarioError, match=r"^override run\.duration='0 s': must be > 0"):
        s.with_overrides(duration="0 s")
    with pytest.raises(ScenarioError, match=r"^override scale\.nope=2\.0: unknown reaction id"):
        s.with_overrides(scale={"nope": 2.0})
    with pytest.raises(ScenarioError, match="ambiguous"):
        s.with_overrides(pressure="50 hPa")
    with pytest.raises(ScenarioError, match="unknown override 'durashun'"):
        s.with_overrides(durashun="1 d")


# -- mistakes ---------------------------------------------------------------------------

@pytest.mark.parametrize("old,new,expected", [
    ('[run]', '[runn]', r"test\.toml: \[runn\]: unknown section - did you mean \[run\]\?"),
    ('duration = "2 d"', 'duration = "2 d"\ndurashun = 1', r"\[run\]\.durashun: unknown key 'durashun' - did you mean 'duration'\?"),
    ('duration = "2 d"', 'duration = "0 d"', r"\[run\]\.duration: must be > 0"),
    ('duration = "2 d"', 'duration = "-3 h"', r"\[run\]\.duration: must be > 0"),
    ('duration = "2 d"', 'duration = "2 fortnights"', r"\[run\]\.duration: unknown time unit 'fortnights'.*valid units: s"),
    ('duration = "2 d"', 'duration = 2', r"\[run\]\.duration: 2 has no unit"),
    ('duration = "2 d"', '', r"\[run\]\.duration: missing"),
    ('start = "2026-09-01T00:00:00Z"', 'start = "first of September"', r"\[run\]\.start: cannot read 'first of September' as a UTC date-time"),
    ('mechanism = "runner_chain.mech"', 'mechanism = "no_such.mech"', r"\[run\]\.mechanism: no mechanism file"),
    ('output_interval = "30 min"', 'output_interval = "3 d"', r"\[run\]\.output_interval: '3 d' is longer than the duration"),
    ('latitude = -70.0', 'latitude = -95.0', r"\[location\]\.latitude: latitude must lie in \[-90, 90\]"),
    ('latitude = -70.0', '', r"\[location\]\.latitude: missing"),
    ('altitude = "18 km"', 'altitude = "18 hPa"', r"\[location\]\.altitude: unknown length unit 'hPa'"),
    ('altitude = "18 km"', '', r"\[location\]: give the box's altitude"),
    ('temperature = "195 K"', 'temperature = "0 K"', r"\[environment\]\.temperature: temperature must be > 0 K"),
    ('temperature = "195 K"', 'temperature = "-5 K"', r"\[environment\]\.temperature: temperature must be > 0 K"),
    ('temperature = "195 K"', 'temperature = "195 C"', r"\[environment\]\.temperature: unknown temperature unit 'C'"),
    ('temperature = "195 K"', 'temperature = { times = ["0 d"], values = ["195 K", "196 K"] }', r"\[environment\]\.temperature: 'times' has 1 entries but 'values' has 2"),
    ('temperature = "195 K"', 'temperature = { times = ["1 d", "0 d"], values = ["195 K", "196 K"] }', r"\[environment\]\.temperature\.times: times must be strictly increasing"),
    ('temperature = "195 K"', 'temperature = { times = ["0 d", "1 d"], values = ["195 K", "-1 K"] }', r"\[environment\]\.temperature\.values\[1\]: temperature must be > 0 K"),
    ('temperature = "195 K"', 'temperature = { times = ["0 d"], valus = ["195 K"] }', r"\[environment\]\.temperature\.valus: unknown key in a time series"),
    ('pressure = "60 hPa"', 'pressure = "60 hPa"\npsc_surface_area = { rule = "threshhold", area = "2 um2 cm-3", below = "195 K" }', r"\[environment\]\.psc_surface_area\.rule: unknown rule 'threshhold'"),
    ('pressure = "60 hPa"', 'pressure = "60 hPa"\npsc_surface_area = { rule = "threshold", area = "2 um2 cm-3" }', r"\[environment\]\.psc_surface_area: the threshold rule needs below"),
    ('pressure = "60 hPa"', 'pressure = "60 hPa"\nsulfate_surface_area = "-1 um2 cm-3"', r"\[environment\]\.sulfate_surface_area: surface area must be >= 0"),
    ('pressure = "60 hPa"', 'pressure = "60 hPa"\nalbedo = 1.5', r"\[environment\]\.albedo: expected a number in \[0, 1\]"),
    ('pressure = "60 hPa"', 'pressure = "60 hPa"\ntrajectory = "missing.csv"', r"\[environment\]\.trajectory: no file"),
    ('A = "2.8 ppmv"', 'A = "-2.8 ppmv"', r"\[initial\]\.A: must be >= 0, got '-2\.8 ppmv' \(a negative amount is not physical\)"),
    ('A = "2.8 ppmv"', 'A = "2.8"', r"\[initial\]\.A: '2\.8' needs an amount unit: ppmv, ppbv, pptv"),
    ('A = "2.8 ppmv"', 'A = "2 mol/mol"', r"\[initial\]\.A: a mole fraction must be <= 1"),
    ('A = "2.8 ppmv"', 'Q = "2.8 ppmv"', r"\[initial\]\.Q: unknown species 'Q'"),
    ('A = "2.8 ppmv"', 'M = "1e18 cm-3"', r"\[initial\]\.M: M is the air itself"),
    ('N2 = "0.7808 mol/mol"', 'N2 = "1e18 cm-3"', r"\[initial\]\.N2: N2 is a fixed species and follows the air: give a mole fraction"),
    ('N2 = "0.7808 mol/mol"', '', r"\[initial\]\.N2: missing: the fixed species N2 has no mole fraction"),
])
def test_each_mistake_names_its_key_path(old, new, expected):
    import re
    message = error_of(edited(old, new))
    assert re.search(r"(^|\n  )test\.toml: ", message), message
    assert re.search(expected, message), message


@pytest.mark.parametrize("table,expected", [
    ("[scale]\na_to_bb = 2.0", r"\[scale\]\.a_to_bb: unknown reaction id 'a_to_bb' - did you mean 'a_to_b'\?"),
    ("[scale]\na_to_b = -1.0", r"\[scale\]\.a_to_b: expected a finite factor >= 0"),
    ("[solver]\nrtol = 2.0", r"\[solver\]\.rtol: must lie in \(0, 1\)"),
    ("[solver]\natol = \"1 ppbv\"", r"\[solver\]\.atol: must be a number density \(cm-3\)"),
    ("[solver]\nmethod = \"euler\"", r"\[solver\]\.method: unknown method 'euler'; valid: rodas3, ros3"),
    ("[photolysis]\nmethod = \"guess\"", r"\[photolysis\]\.method: unknown method 'guess'; valid: spectral, parametric"),
    ("[photolysis]\nozone_column_follows_box = \"yes\"", r"\[photolysis\]\.ozone_column_follows_box: expected true or false"),
    ("[photolysis]\ncross_sections = { j_no_such = \"x.csv\" }", r"\[photolysis\]\.cross_sections\.j_no_such: no photolysis reaction"),
])
def test_mistakes_in_optional_sections(table, expected):
    import re
    message = error_of(BASE + "\n" + table + "\n")
    assert re.search(expected, message), message


def test_several_mistakes_are_reported_together():
    text = edited('latitude = -70.0', 'latitude = 100.0').replace('"195 K"', '"-1 K"')
    message = error_of(text)
    assert message.startswith("2 problems in scenario test.toml:")
    assert "[location].latitude" in message and "[environment].temperature" in message


def test_invalid_toml_is_a_scenario_error():
    # file:line:col, the offending line and a caret, as the mechanism parser reports
    message = error_of("[run\nmechanism = 1")
    assert message.startswith("test.toml:1:5: not valid TOML")
    assert "\n    [run\n        ^" in message


def test_unknown_shipped_scenario_name_suggests():
    with pytest.raises(ScenarioError, match="no shipped scenario named 'stratosphere-bx'"):
        load_scenario("stratosphere-bx")
