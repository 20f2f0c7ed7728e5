"""Scenarios that build on others (``extends``): merging, chains, cycles, paths, errors, provenance.

Also the ``[environment].temperature_offset`` key and the shipped polar-spring
variants.  The scenario values here are invented test values; the checks are
of the merge rules documented in docs/scenarios.md ("Building on another
scenario"), apart from the unit conversions noted beside them.
"""
from __future__ import annotations

import dataclasses
import shutil
from pathlib import Path

import numpy as np
import pytest

import boxchem
from boxchem.analysis.sweep import apply_temperature_offset
from boxchem.errors import ScenarioError
from boxchem.scenario import (PROVENANCE_MARKER, TimeSeriesSpec, load_scenario,
                              split_scenario_text)

DATA = Path(__file__).parent / "data"

BASE = """\
# base: invented test values
[run]
mechanism = "chain.mech"
start = "2026-09-01T00:00:00Z"
duration = "1 d"
output_interval = "2 h"

[location]
latitude = -70.0
altitude = "18 km"

[environment]
temperature = { times = ["0 d", "12 h", "1 d"], values = ["195 K", "200 K", "205 K"] }
pressure = "60 hPa"

[initial]
A = "2.8 ppmv"
B = "1e8 cm-3"
N2 = "0.7808 mol/mol"

[scale]
a_to_b = 2.0
"""


@pytest.fixture
def folder(tmp_path):
    """A folder with the chain test mechanism (as chain.mech) and base.toml."""
    shutil.copy(DATA / "runner_chain.mech", tmp_path / "chain.mech")
    (tmp_path / "base.toml").write_text(BASE)
    return tmp_path


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)
    return path


def error_of(path: Path) -> str:
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    return str(info.value)


def flat(data) -> dict[str, object]:
    """``{"[section].key": value}`` of a scenario's data (inline tables as whole values)."""
    return {f"[{s}].{k}": v for s, t in data.items() for k, v in t.items()}


# -- merge semantics ----------------------------------------------------------

def test_a_table_replaces_only_the_keys_it_gives(folder):
    ext = write(folder, "ext.toml", 'extends = "base.toml"\n[initial]\nB = "2e8 cm-3"\n[run]\nduration = "2 d"\n')
    base, s = load_scenario(folder / "base.toml"), load_scenario(ext)
    assert s.initial["B"] == (2e8, "number_density")
    assert s.initial["A"] == base.initial["A"] and s.initial["N2"] == base.initial["N2"]
    assert s.duration_s == 2 * 86400.0                  # 1 d = 86400 s (definition)
    assert s.output_interval_s == base.output_interval_s and s.start == base.start
    assert s.temperature == base.temperature and s.scale == base.scale
    changed = {k for k in flat(s.data) if flat(s.data)[k] != flat(base.data).get(k)}
    assert changed == {"[initial].B", "[run].duration"}


def test_an_inline_series_is_replaced_whole_and_scale_factors_replace(folder):
    ext = write(folder, "ext.toml", 'extends = "base.toml"\n[environment]\n'
                'temperature = { times = ["0 h", "6 h"], values = ["190 K", "191 K"] }\n'
                '[scale]\na_to_b = 0.5\nb_to_c = 3.0\n')
    s = load_scenario(ext)
    assert s.temperature == TimeSeriesSpec(np.array([0.0, 21600.0]), np.array([190.0, 191.0]))
    assert s.pressure == pytest.approx(6000.0)          # 1 hPa = 100 Pa (definition); from the base
    # the extending file's factor replaces the base's (it does not multiply onto it)
    assert s.scale == {"a_to_b": 0.5, "b_to_c": 3.0}
    series_to_constant = write(folder, "const.toml", 'extends = "base.toml"\n[environment]\ntemperature = "210 K"\n')
    assert load_scenario(series_to_constant).temperature == 210.0


def test_remove_deletes_keys_and_sections_of_the_base(folder):
    ext = write(folder, "ext.toml", 'extends = "base.toml"\nremove = ["initial.B", "scale", "environment.pressure"]\n'
                '[initial]\nC = "1 ppbv"\n')
    s = load_scenario(ext)
    assert set(s.initial) == {"A", "N2", "C"} and s.scale == {}
    assert s.pressure is None and "pressure" not in s.data["environment"]
    # a section removed and given again is replaced whole
    fresh = write(folder, "fresh.toml", 'extends = "base.toml"\nremove = ["initial"]\n[initial]\nN2 = "0.78 mol/mol"\n')
    assert set(load_scenario(fresh).initial) == {"N2"}


def test_remove_errors_name_the_item_and_suggest(folder):
    bad = write(folder, "bad.toml", 'extends = "base.toml"\nremove = ["initial.b", "solver", 3]\n')
    msg = error_of(bad)
    assert "3 problems in scenario bad.toml" in msg
    assert "bad.toml: remove[0]: 'initial.b' is not in the base base.toml" in msg
    assert "did you mean 'initial.B'?" in msg
    assert "bad.toml: remove[1]: 'solver' is not in the base" in msg
    assert "bad.toml: remove[2]: expected a key path string" in msg
    alone = write(folder, "alone.toml", 'remove = ["initial.A"]\n' + BASE)
    assert "alone.toml: remove: only a file with 'extends = ...' can remove keys" in error_of(alone)


# -- chains and cycles ----------------------------------------------------------

def test_chains_apply_in_order_and_keep_every_file(folder):
    write(folder, "mid.toml", 'extends = "base.toml"\n[initial]\nA = "1 ppmv"\nB = "3e8 cm-3"\n')
    top = write(folder, "top.toml", 'extends = "mid.toml"\n[initial]\nA = "0.5 ppmv"\n')
    s = load_scenario(top)
    assert s.initial["A"][0] == pytest.approx(0.5e-6)   # 1 ppmv = 1e-6 mol/mol (definition)
    assert s.initial["B"] == (3e8, "number_density") and "N2" in s.initial
    assert [name for name, _ in s.layers] == ["top.toml", "mid.toml", "base.toml"]
    assert [name for name, _ in split_scenario_text(s.text)] == ["top.toml", "mid.toml", "base.toml"]
    assert s.source == "top.toml"


def test_a_cycle_is_an_error_naming_the_files(folder):
    write(folder, "a.toml", 'extends = "b.toml"\n' + BASE)
    write(folder, "b.toml", 'extends = "a.toml"\n')
    msg = error_of(folder / "a.toml")
    assert "b.toml: extends: 'a.toml' closes a cycle of extends" in msg
    assert f"{folder.resolve() / 'a.toml'} -> {folder.resolve() / 'b.toml'} -> {folder.resolve() / 'a.toml'}" in msg
    selfish = write(folder, "self.toml", 'extends = "self.toml"\n')
    assert "self.toml: extends: 'self.toml' closes a cycle" in error_of(selfish)


def test_unknown_base_and_bad_extends_value(folder):
    typo = write(folder, "typo.toml", 'extends = "polar-sprng"\n')
    msg = error_of(typo)
    assert msg.startswith("typo.toml: extends: no scenario file") and "did you mean 'polar-spring'?" in msg
    number = write(folder, "number.toml", 'extends = 3\n')
    assert "number.toml: extends: expected a shipped scenario name or a path" in error_of(number)


# -- relative paths --------------------------------------------------------------

def test_relative_paths_resolve_against_the_file_that_wrote_them(tmp_path):
    base_dir = tmp_path / "bases"
    base_dir.mkdir()
    shutil.copy(DATA / "runner_chain.mech", base_dir / "chain.mech")
    (base_dir / "track.csv").write_text("time,temperature_K,pressure_hPa\n"
                                        "2026-09-01T00:00:00Z,196.0,60.0\n2026-09-02T00:00:00Z,198.0,61.0\n")
    write(base_dir, "base.toml", BASE.replace(
        'temperature = { times = ["0 d", "12 h", "1 d"], values = ["195 K", "200 K", "205 K"] }\n'
        'pressure = "60 hPa"\n', 'trajectory = "track.csv"\n'))
    ext = write(tmp_path / "variants", "ext.toml", 'extends = "../bases/base.toml"\n[run]\nduration = "12 h"\n')
    s = load_scenario(ext)
    assert s.mechanism_path.resolve() == (base_dir / "chain.mech").resolve()
    assert s.trajectory.resolve() == (base_dir / "track.csv").resolve()
    assert s.base_dir == ext.parent.resolve()
    # a path given by the extending file (or an override) is read against its own folder
    shutil.copy(DATA / "runner_chain.mech", ext.parent / "own.mech")
    own = write(ext.parent, "own.toml", 'extends = "../bases/base.toml"\n[run]\nmechanism = "own.mech"\n')
    assert load_scenario(own).mechanism_path.resolve() == (ext.parent / "own.mech").resolve()
    with pytest.raises(ScenarioError, match="track.csv"):
        s.with_overrides(**{"environment.trajectory": "track.csv"})   # not in variants/


# -- error locations ---------------------------------------------------------------

def test_errors_name_the_file_that_wrote_the_key(folder):
    write(folder, "typo-base.toml", BASE.replace('altitude = "18 km"', 'altitude = "18 km"\naltitud = 3'))
    ext = write(folder, "ext.toml", 'extends = "typo-base.toml"\n[run]\nduration = "1 h"\n'
                '[initial]\nQ = "1 ppbv"\n')
    msg = error_of(ext)
    assert "problems in scenario ext.toml (with its base typo-base.toml)" in msg
    assert "typo-base.toml: [location].altitud: unknown key 'altitud' - did you mean 'altitude'?" in msg
    # the base wrote the 2 h interval, which the extending file's 1 h duration makes too long
    assert "typo-base.toml: [run].output_interval: '2 h' is longer than the duration '1 h'" in msg
    assert "ext.toml: [initial].Q: unknown species 'Q'" in msg
    series = write(folder, "series.toml", 'extends = "base.toml"\n[environment]\n'
                   'temperature = { times = ["0 d", "1 d"], values = ["195 K", "-1 K"] }\n')
    assert error_of(series).startswith("series.toml: [environment].temperature.values[1]:")


def test_a_toml_error_in_a_base_names_the_base_with_line_and_column(folder):
    write(folder, "broken.toml", '[run]\nduration = "1 d\n')
    ext = write(folder, "ext.toml", 'extends = "broken.toml"\n')
    assert error_of(ext).startswith("broken.toml:2:")


def test_override_errors_still_name_the_override(folder):
    s = load_scenario(write(folder, "ext.toml", 'extends = "base.toml"\n'))
    with pytest.raises(ScenarioError, match=r"^--set initial.A='x': "):
        s.with_overrides(origins={"initial.A": "--set initial.A='x'"}, **{"initial.A": "x"})


# -- provenance --------------------------------------------------------------------

def test_result_attributes_hold_every_file_and_reproduce_the_run(folder, tmp_path_factory):
    ext_text = '# invented test variant\nextends = "base.toml"\n[initial]\nB = "5e8 cm-3"\n'
    ext = write(folder, "ext.toml", ext_text)
    ds = boxchem.run(ext)
    attrs = ds.attrs
    assert attrs["scenario_source"] == "ext.toml"
    assert attrs["scenario"].startswith(f"{PROVENANCE_MARKER}ext.toml\n")
    files = split_scenario_text(attrs["scenario"])
    assert files == [("ext.toml", ext_text), ("base.toml", BASE)]
    # a reader writes the files out again (the mechanism beside them) and gets the same run
    again = tmp_path_factory.mktemp("again")
    for name, text in files:
        (again / name).write_text(text)
    shutil.copy(folder / "chain.mech", again / "chain.mech")
    copy, original = load_scenario(again / "ext.toml"), load_scenario(ext)
    assert copy.text == original.text and copy.data == original.data
    assert dataclasses.replace(copy, base_dir=original.base_dir,
                               mechanism_path=original.mechanism_path) == original
    ds2 = boxchem.run(again / "ext.toml")
    np.testing.assert_array_equal(ds2["number_density"].values, ds["number_density"].values)


def test_a_file_without_extends_keeps_its_text_unchanged(folder):
    s = load_scenario(folder / "base.toml")
    assert s.text == BASE and s.layers == (("base.toml", BASE),)
    assert split_scenario_text(s.text) == [("", BASE)]


# -- temperature_offset --------------------------------------------------------------

def test_temperature_offset_shifts_a_series_and_a_constant(folder):
    s = load_scenario(write(folder, "cold.toml", 'extends = "base.toml"\n[environment]\ntemperature_offset = "-3 K"\n'))
    np.testing.assert_allclose(s.temperature.values, [192.0, 197.0, 202.0], rtol=0, atol=1e-12)
    const = load_scenario(write(folder, "c.toml", 'extends = "base.toml"\n[environment]\n'
                                'temperature = "200 K"\ntemperature_offset = 2.5\n'))
    assert const.temperature == pytest.approx(202.5)    # a bare number is kelvin (docs/scenarios.md)


def test_temperature_offset_errors(folder):
    low = write(folder, "low.toml", 'extends = "base.toml"\n[environment]\ntemperature_offset = "-300 K"\n')
    assert "low.toml: [environment].temperature_offset: '-300 K' takes the temperature to -105 K" in error_of(low)
    none = write(folder, "none.toml", 'extends = "base.toml"\nremove = ["environment.temperature"]\n'
                 '[environment]\ntemperature_offset = "1 K"\n')
    assert "none.toml: [environment].temperature_offset: needs [environment].temperature" in error_of(none)


def test_the_sweep_offset_is_the_scenario_key(folder):
    cold = load_scenario(write(folder, "cold.toml", 'extends = "base.toml"\n[environment]\ntemperature_offset = "-3 K"\n'))
    base = load_scenario(folder / "base.toml")
    swept = apply_temperature_offset(base, 2.0)
    np.testing.assert_allclose(swept.temperature.values, base.temperature.values + 2.0, rtol=0, atol=1e-12)
    assert swept.overrides["environment.temperature_offset"] == 2.0
    # a varied (or --set) offset replaces the file's offset; it does not add to it
    np.testing.assert_allclose(apply_temperature_offset(cold, 2.0).temperature.values,
                               base.temperature.values + 2.0, rtol=0, atol=1e-12)
    with pytest.raises(ScenarioError, match=r"^--vary environment.temperature_offset=-400.0: "):
        apply_temperature_offset(base, -400.0)


# -- the shipped variants ----------------------------------------------------------------

VARIANTS = {
    "polar-spring-undenitrified": {"[initial].HNO3"},
    "polar-spring-1980": {f"[initial].{sp}" for sp in ("HCl", "ClONO2", "Cl2", "Cl2O2", "HOCl", "OClO",
                                                      "CF2Cl2", "CFCl3", "BrCl", "HOBr", "BrONO2",
                                                      "HBr", "BrO", "Br2")},
    "polar-spring-cold": {"[environment].temperature_offset", "[environment].ice_surface_area"},
    "polar-spring-warm": {"[environment].temperature_offset"},
    "polar-spring-sts": {"[environment].psc_surface_area", "[environment].sulfate_surface_area"},
}


@pytest.fixture(scope="module")
def polar_spring():
    return load_scenario("polar-spring")


@pytest.mark.parametrize("name", sorted(VARIANTS))
def test_shipped_variants_differ_from_the_base_only_in_the_intended_keys(name, polar_spring):
    s = load_scenario(name, mechanism=polar_spring.mechanism)
    a, b = flat(polar_spring.data), flat(s.data)
    changed = {k for k in set(a) | set(b) if a.get(k) != b.get(k)}
    assert changed == VARIANTS[name]
    assert [n for n, _ in s.layers] == [f"{name}.toml", "polar-spring.toml"]
    assert "INVENTED" in s.layers[0][1]          # the header says the values are invented


def test_shipped_variant_values(polar_spring):
    mech = polar_spring.mechanism
    undenitrified = load_scenario("polar-spring-undenitrified", mechanism=mech)
    assert 9e-9 <= undenitrified.initial["HNO3"][0] <= 10e-9   # brief: unprocessed air 9-10 ppbv
    cold = load_scenario("polar-spring-cold", mechanism=mech)
    warm = load_scenario("polar-spring-warm", mechanism=mech)
    np.testing.assert_allclose(cold.temperature.values, polar_spring.temperature.values - 3.0, atol=1e-12)
    np.testing.assert_allclose(warm.temperature.values, polar_spring.temperature.values + 3.0, atol=1e-12)
    # 1980: Cly about 2.0 ppbv and Bry about 14 pptv (WMO/UNEP assessments, recalled from memory)
    old = load_scenario("polar-spring-1980", mechanism=mech)

    def total(scn, element):
        return sum((sp.formula or {}).get(element, 0) * scn.initial[sp.name][0]
                   for sp in mech.species if sp.name in scn.initial
                   and sp.name not in ("CF2Cl2", "CFCl3", "CH3Cl", "CH3Br"))
    assert total(old, "Cl") == pytest.approx(2.0e-9, rel=0.02)
    assert total(old, "Br") == pytest.approx(14e-12, rel=0.02)
    assert total(polar_spring, "Cl") == pytest.approx(3.3e-9, rel=0.02)   # docs/polar-scenarios.md
