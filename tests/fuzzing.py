"""Fuzz inputs and their judges, shared by tests/test_fuzz_*.py (bounded) and scripts/fuzz.py (long).

Each kind has a hypothesis strategy that mutates valid inputs (so most cases
get past the first line) and a ``try_*`` function that feeds one input to
boxchem and classifies the outcome:

* ``"ok"``: accepted;
* ``"clean"``: refused with one of boxchem's own errors (or, for the command
  line, an exit status with a message and no traceback);
* ``"traceback"``: anything else - the outcome the suite forbids.

``try_*`` never raises; it returns ``(outcome, detail)`` with the exception
text as detail for tracebacks.
"""
from __future__ import annotations

import contextlib
import io
import traceback
from pathlib import Path

from hypothesis import strategies as st

ROOT = Path(__file__).resolve().parent.parent
DATA = ROOT / "tests" / "data"
MECH_DIR = DATA / "mech"
SMALL_MECH = (MECH_DIR / "small.mech").read_text()
CHAIN_SCENARIO = (DATA / "runner_chain.toml").read_text()
CL_SCENARIO = (DATA / "chlorine_box.toml").read_text()
SPECTRA = [(DATA / "spectra" / name).read_text() for name in ("good_table.csv", "good_log10.csv",
                                                             "good_yield.csv", "lab_plain.csv")]

# ---------------------------------------------------------------------------
# shared mutation machinery
# ---------------------------------------------------------------------------
#: characters that break naive readers: separators str.splitlines() would split at, BOM,
#: NUL, a Latin-1 letter, quotes and brackets
ODD = ["\x0c", "\x0b", "\u2028", "\u2029", "\x85", "\x1c", "\r", "\r\n", "\ufeff", "\x00", "é",
       '"', "'", "[", "]", "{", "}", "=", "#", "\t", " ", ",", "\\"]
NUMBERS = ["0", "-0", "1", "-1", "1e300", "-1e300", "1e-300", "1e308", "1e309", "nan", "inf",
           "-inf", "2.5", "1e-12", "9" * 40, "0x10", "1_000", ".5", "5.", "1e", "+3"]


def _mutate_lines(draw, lines: list[str], fragments: list[str]) -> list[str]:
    lines = list(lines) or [""]
    for _ in range(draw(st.integers(1, 5))):
        i = draw(st.integers(0, len(lines) - 1))
        op = draw(st.sampled_from(["delete", "duplicate", "swap", "cut", "insert", "replace_word",
                                   "repeat_word", "number"]))
        line = lines[i]
        if op == "delete" and len(lines) > 1:
            del lines[i]
        elif op == "duplicate":
            lines.insert(i, line)
        elif op == "swap":
            j = draw(st.integers(0, len(lines) - 1))
            lines[i], lines[j] = lines[j], lines[i]
        elif op == "cut" and line:
            k = draw(st.integers(0, len(line)))
            lines[i] = line[:k]
        elif op == "insert":
            k = draw(st.integers(0, len(line)))
            lines[i] = line[:k] + draw(st.sampled_from(fragments + ODD)) + line[k:]
        elif op == "replace_word":
            words = line.split(" ")
            j = draw(st.integers(0, len(words) - 1))
            words[j] = draw(st.sampled_from(fragments + NUMBERS + ODD))
            lines[i] = " ".join(words)
        elif op == "repeat_word":
            words = line.split(" ") or [""]
            j = draw(st.integers(0, len(words) - 1))
            lines[i] = line + (" " + words[j]) * draw(st.integers(1, 300))
        elif op == "number":
            k = draw(st.integers(0, len(line)))
            lines[i] = line[:k] + draw(st.sampled_from(NUMBERS)) + line[k:]
    return lines


@st.composite
def _encoded(draw, text: str) -> bytes:
    """The text as the bytes a user's editor might have saved."""
    how = draw(st.sampled_from(["utf-8", "utf-8", "utf-8", "bom", "latin-1", "utf-16", "junk"]))
    if how == "bom":
        return b"\xef\xbb\xbf" + text.encode("utf-8")
    if how == "latin-1":
        return text.encode("latin-1", errors="replace")
    if how == "utf-16":
        return text.encode("utf-16")
    if how == "junk":
        data = bytearray(text.encode("utf-8"))
        for _ in range(draw(st.integers(1, 4))):
            if data:
                data[draw(st.integers(0, len(data) - 1))] = draw(st.integers(0x80, 0xFF))
        return bytes(data)
    return text.encode("utf-8")


# ---------------------------------------------------------------------------
# mechanisms
# ---------------------------------------------------------------------------
MECH_FRAGMENTS = ["->", "+", "*", "hv", "M", "2", "0.5", "[species]", "[reactions]", "[changed reactions]",
                  "[dropped reactions]", "[replace]", "[cycles]", "[families]", "atoms(Cl)", "fixed", "lumped", "formula=",
                  "unbalanced", "of=clo_dimer", "on=psc", "gamma=", "A=", "E/R=", "k0=", "Fc=",
                  "data=", "qy=", "l=", "f298=", "g=", 'extends "small.mech"', 'extends "nope.mech"', 'include "small.mech"',
                  "O3", "ClO", "Cl2O2", "destroys", "reverse", "falloff", "surface", "photolysis",
                  "arrhenius", "constant", "A=1e308 E/R=-1e5", "K=1e-300 B=1e5", "k0=1e300 kinf=1e-300"]


@st.composite
def mechanism_bytes(draw) -> bytes:
    """A mutated copy of the small test mechanism, encoded as a user might have saved it."""
    if draw(st.integers(0, 9)) == 0:
        text = draw(st.text(max_size=400))
    else:
        text = "\n".join(_mutate_lines(draw, SMALL_MECH.split("\n"), MECH_FRAGMENTS))
    return draw(_encoded(text))


def try_mechanism(data: bytes, folder: Path) -> tuple[str, str]:
    """Load the bytes as a mechanism file in ``folder`` (next to a copy of small.mech)."""
    from boxchem.errors import BoxchemError
    from boxchem.mechanism.parser import load_mechanism
    from boxchem.mechanism.ratelaws import RateEvaluator
    import numpy as np
    path = folder / "fuzz.mech"
    path.write_bytes(data)
    try:
        mech = load_mechanism(path)
        with np.errstate(all="ignore"):
            RateEvaluator(mech).thermal(np.array([195.0, 298.0]), 1e18)
        from boxchem.commands.check import _rate_coefficient_errors
        _rate_coefficient_errors(mech)
        return "ok", ""
    except BoxchemError:
        return "clean", ""
    except Exception:             # noqa: BLE001 - the point of the fuzz test
        return "traceback", traceback.format_exc()


# ---------------------------------------------------------------------------
# scenarios
# ---------------------------------------------------------------------------
SCENARIO_FRAGMENTS = ['"1 h"', '"1e-6 s"', '"365000 d"', '"-2 d"', '"1e-300 K"', '"1e300 Pa"',
                      '"2300-01-01T00:00:00Z"', '"1600-01-01"', "2026-09-01T00:00:00Z", '"0 K"',
                      '"5 ppbv"', '"1e300 cm-3"', '"2 bananas"', "true", "[1, 2]", "{}", "[[x]]",
                      '{ times = ["0 d", "1 d"], values = ["200 K", "1e-300 K"] }',
                      '{ rule = "threshold", area = "1 um2 cm-3", below = "195 K" }',
                      'extends = "stratosphere-box"', 'extends = "runner_chain.toml"',
                      'remove = ["initial.A"]', "[scale]", "[initial]", "[solver]", "[photolysis]",
                      "a_to_b = 1e300", "atol = \"1e12 cm-3\"", "max_step = \"1e-9 s\"",
                      'mechanism = "chlorine_box.mech"', 'trajectory = "nope.csv"',
                      'cross_sections = { j_dimer = "x.csv" }', "x = " + "[" * 600 + "]" * 600]


@st.composite
def scenario_bytes(draw) -> bytes:
    base = draw(st.sampled_from([CHAIN_SCENARIO, CL_SCENARIO]))
    if draw(st.integers(0, 19)) == 0:
        text = draw(st.text(max_size=300))
    else:
        text = "\n".join(_mutate_lines(draw, base.split("\n"), SCENARIO_FRAGMENTS))
    return draw(_encoded(text))


def try_scenario(data: bytes, folder: Path, *, integrate: bool = False) -> tuple[str, str]:
    """Validate the bytes as a scenario file next to the test mechanisms; optionally run it
    (only when short: at most 2 days and 200 output times)."""
    import shutil
    from boxchem.errors import BoxchemError
    from boxchem.scenario import load_scenario
    for name in ("runner_chain.mech", "chlorine_box.mech", "runner_chain.toml"):
        if not (folder / name).exists():
            shutil.copy(DATA / name, folder / name)
    path = folder / "fuzz.toml"
    path.write_bytes(data)
    try:
        scenario = load_scenario(path)
        if integrate and scenario.duration_s <= 2 * 86400 \
                and scenario.duration_s / scenario.output_interval_s <= 200:
            import boxchem
            try:
                boxchem.run(scenario)
            except BoxchemError:
                return "clean", ""
        return "ok", ""
    except BoxchemError:
        return "clean", ""
    except Exception:             # noqa: BLE001
        return "traceback", traceback.format_exc()


# ---------------------------------------------------------------------------
# lab spectra
# ---------------------------------------------------------------------------
SPECTRUM_FRAGMENTS = ["# format: boxchem-spectral 1", "# quantity: quantum_yield", "# units: cm2",
                      "# units: m2", "# temperature_dependence: table", "# temperature_dependence: log10",
                      "wavelength_nm,sigma_200K", "wavelength (nm), sigma (cm^2)", "sigma_1e300K",
                      "-1e-19", "1e-300", ",,", "nm", "angstrom", "NaN"]


@st.composite
def spectrum_bytes(draw) -> bytes:
    base = draw(st.sampled_from(SPECTRA))
    text = "\n".join(_mutate_lines(draw, base.split("\n"), SPECTRUM_FRAGMENTS))
    return draw(_encoded(text))


def try_spectrum(data: bytes, folder: Path) -> tuple[str, str]:
    from boxchem.errors import BoxchemError
    from boxchem.photolysis.crosssections import load_spectral_file
    import numpy as np
    path = folder / "fuzz.csv"
    path.write_bytes(data)
    try:
        spectrum = load_spectral_file(path)
        with np.errstate(all="ignore"):
            spectrum.bin_average(np.array([200.0, 250.0, 300.0, 400.0]), temperature_K=220.0)
        return "ok", ""
    except BoxchemError:
        return "clean", ""
    except Exception:             # noqa: BLE001
        return "traceback", traceback.format_exc()


# ---------------------------------------------------------------------------
# command-line options
# ---------------------------------------------------------------------------
_VALUES = NUMBERS + ["195", "195K", "50hPa", "1 atm", "-5 hPa", "2026-09-15", "2300-01-01", "start",
                     "end", "O3", "ClO", "Ox", "nope", "", "=", "a=b", "clo_clo_m=1.2", "clo_clo_m=1e300",
                     'run.duration="1 h"', 'run.duration="-1 h"', 'run.mechanism="nope.mech"',
                     'run.start="2300-01-01T00:00:00Z"', "solver.rtol=2", 'run.output_interval="1e-6 s"',
                     "é", "\x00x", "x" * 3000]
_OPTIONS = {
    "check": ["--strict"],
    "rates": ["--temperature", "-T", "--pressure", "-p", "--format"],
    "jvalues": ["--sza", "--altitude", "--ozone-column", "--albedo", "--temperature", "--day",
                "--step", "--reactions", "--reference", "--ozone-profile"],
    "run": ["-o", "--scale", "--set", "-q", "--strict"],
    "budget": ["--species", "--family", "--format", "--period", "--top", "--basis"],
    "compare": ["--times", "--species", "--family", "--top", "--format"],
}
#: valid command lines; most fuzz cases change one or two of their words
_TEMPLATES = [
    ["check", "tests/data/mech/small.mech"],
    ["check", "stratosphere", "--strict"],
    ["rates", "tests/data/mech/small.mech", "--temperature", "195", "220", "--pressure", "50hPa"],
    ["jvalues", "tests/data/runner_chain.toml", "--day", "2026-09-15"],
    ["jvalues", "--sza", "30", "60", "--altitude", "20km"],
    ["run", "tests/data/runner_chain.toml", "--scale", "a_to_b=1.5"],
    ["run", "tests/data/chlorine_box.toml", "--set", "solver.rtol=1e-5"],
    ["budget", "RESULT", "--species", "ClO", "--format", "csv"],
    ["compare", "RESULT", "RESULT", "--times", "end", "--species", "O3"],
]
_POSITIONALS = ["stratosphere", "stratosphere-box", "tests/data/runner_chain.toml",
                "tests/data/mech/small.mech", "nope", "", "-", "/dev/null", "tests/data/spectra",
                "RESULT"]


@st.composite
def cli_argv(draw) -> list[str]:
    if draw(st.integers(0, 3)) > 0:
        argv = list(draw(st.sampled_from(_TEMPLATES)))
        command = argv[0]
        for _ in range(draw(st.sampled_from([0, 1, 1, 1, 2, 2]))):
            i = draw(st.integers(1, len(argv) - 1))
            choice = draw(st.sampled_from(["value", "option", "drop"]))
            if choice == "value":
                argv[i] = draw(st.sampled_from(_VALUES + _POSITIONALS))
            elif choice == "option":
                argv.insert(i, draw(st.sampled_from(_OPTIONS[command])))
            elif len(argv) > 2:
                del argv[i]
    else:
        command = draw(st.sampled_from(sorted(_OPTIONS) + ["nope"]))
        argv = [command]
        for _ in range(draw(st.integers(0, 2))):
            argv.append(draw(st.sampled_from(_POSITIONALS)))
        for _ in range(draw(st.integers(0, 4))):
            argv.append(draw(st.sampled_from(_OPTIONS.get(command, ["--x"]) + ["--help-me", "-z"])))
            for _ in range(draw(st.integers(0, 2))):
                argv.append(draw(st.sampled_from(_VALUES)))
    if command == "run":
        # keep runs short and their files in the scratch folder (the fuzz is about the options)
        argv += ["-q", "--set", 'run.duration="2 h"', "-o", "OUT"]
    return argv


def try_cli(argv: list[str], folder: Path) -> tuple[str, str]:
    """``boxchem ARGV`` in-process; a clean outcome is an exit status with no exception."""
    from boxchem.cli import main
    result = folder / "result.nc"
    argv = [str(result) if a == "RESULT" else str(folder / "out.nc") if a == "OUT" else
            str(ROOT / a) if a.startswith("tests/") else a for a in argv]
    out, err = io.StringIO(), io.StringIO()
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = main(argv)
            except SystemExit as exc:          # argparse: usage error (status 2) or --help (0)
                code = exc.code
        if "Traceback" in err.getvalue():
            return "traceback", err.getvalue()[-2000:]
        return ("ok" if code in (0, None) else "clean"), ""
    except Exception:             # noqa: BLE001
        return "traceback", traceback.format_exc()


def ensure_result_file(folder: Path) -> None:
    """A small result file for the commands that read one (budget, compare)."""
    path = folder / "result.nc"
    if path.exists():
        return
    import boxchem
    from boxchem.io.netcdf import write_dataset
    write_dataset(boxchem.run(DATA / "chlorine_box.toml", **{"run.duration": "6 h"}), path)
