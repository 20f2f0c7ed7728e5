"""Bounded fuzz tests: no input gives a traceback (issue 13 item 8).

Mutations of valid mechanisms, scenarios, lab spectra and command lines
(tests/fuzzing.py); scripts/fuzz.py runs the same generators for 10,000+
inputs of each kind.  Each case must be accepted or refused with one of
boxchem's own errors.
"""
from __future__ import annotations

import shutil
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, Phase, given, settings

sys.path.insert(0, str(Path(__file__).parent))
import fuzzing  # noqa: E402

BOUNDED = settings(max_examples=60, deadline=None, database=None,
                   suppress_health_check=list(HealthCheck), phases=[Phase.generate])


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    path = tmp_path_factory.mktemp("fuzz")
    shutil.copy(fuzzing.MECH_DIR / "small.mech", path / "small.mech")
    return path


def _judge(outcome):
    kind, detail = outcome
    assert kind in ("ok", "clean"), detail


@BOUNDED
@given(data=fuzzing.mechanism_bytes())
def test_fuzzed_mechanisms(folder, data):
    _judge(fuzzing.try_mechanism(data, folder))


@BOUNDED
@given(data=fuzzing.scenario_bytes())
def test_fuzzed_scenarios(folder, data):
    _judge(fuzzing.try_scenario(data, folder))


@settings(BOUNDED, max_examples=15)
@given(data=fuzzing.scenario_bytes())
def test_fuzzed_scenarios_integrated(folder, data):
    _judge(fuzzing.try_scenario(data, folder, integrate=True))


@BOUNDED
@given(data=fuzzing.spectrum_bytes())
def test_fuzzed_lab_spectra(folder, data):
    _judge(fuzzing.try_spectrum(data, folder))


@settings(BOUNDED, max_examples=40)
@given(argv=fuzzing.cli_argv())
def test_fuzzed_command_lines(folder, argv):
    fuzzing.ensure_result_file(folder)
    _judge(fuzzing.try_cli(argv, folder))
