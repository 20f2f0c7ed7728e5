"""Property test: any text gives a Mechanism or a MechanismError, never another exception."""
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from boxchem.errors import MechanismError
from boxchem.mechanism import parse_mechanism
from boxchem.mechanism.model import Mechanism
from boxchem.mechanism.ratelaws import RateEvaluator

DATA = Path(__file__).parent / "data" / "mech"
VALID = (DATA / "small.mech").read_text()
LINES = VALID.splitlines()
# fragments of the language, so that mutations stay close to valid input
FRAGMENTS = ["->", "+", "*", "=", "hv", "M", "2", "0.5", "1e-12", "-1", "nan", "inf", '"', "#",
             "[species]", "[reactions]", "[changed reactions]", "[dropped reactions]", "[cycles]", "[families]",
             "atoms(Cl)", "fixed", "lumped", "formula=", "unbalanced", "of=clo_dimer", "on=psc",
             "gamma=", "A=", "E/R=", "k0=", "Fc=", "data=", "l=", "extends \"small.mech\"", "\t", "\n",
             "O3", "ClO", "Cl2O2", "destroys", "reverse", "falloff", "surface", "photolysis", "é", "\x00"]

FAST = settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _outcome(text: str) -> None:
    try:
        mech = parse_mechanism(text, source="fuzz.mech", base_dir=DATA)
    except MechanismError as exc:
        assert exc.problems, "a MechanismError carries at least one problem"
        for p in exc.problems:
            assert p.format()
        return
    assert isinstance(mech, Mechanism)
    # a mechanism that passed validation can be evaluated
    ev = RateEvaluator(mech)
    k = ev.thermal(np.array([195.0, 298.0]), 1.0e18)
    assert k.shape == (2, len(mech.reactions))
    ev.surface(np.array([195.0]), 1e-8, 1e-9)


@FAST
@given(st.text(max_size=300))
def test_arbitrary_text(text):
    _outcome(text)


@st.composite
def mutated(draw):
    lines = list(LINES)
    for _ in range(draw(st.integers(1, 4))):
        i = draw(st.integers(0, len(lines) - 1))
        line = lines[i]
        op = draw(st.sampled_from(["delete_line", "dup_line", "swap", "cut", "insert", "replace_word"]))
        if op == "delete_line":
            del lines[i]
        elif op == "dup_line":
            lines.insert(i, line)
        elif op == "swap":
            j = draw(st.integers(0, len(lines) - 1))
            lines[i], lines[j] = lines[j], lines[i]
        elif op == "cut":
            a = draw(st.integers(0, len(line)))
            b = draw(st.integers(a, len(line)))
            lines[i] = line[:a] + line[b:]
        elif op == "insert":
            a = draw(st.integers(0, len(line)))
            frag = draw(st.one_of(st.sampled_from(FRAGMENTS), st.text(max_size=4)))
            lines[i] = line[:a] + frag + line[a:]
        else:
            words = line.split()
            if words:
                k = draw(st.integers(0, len(words) - 1))
                words[k] = draw(st.sampled_from(FRAGMENTS))
                lines[i] = " ".join(words)
        if not lines:
            lines = [""]
    return "\n".join(lines) + "\n"


@FAST
@given(mutated())
def test_mutated_valid_file(text):
    _outcome(text)


def test_unmutated_file_is_valid():
    # the seed of the mutations parses (otherwise the test above proves little)
    assert isinstance(parse_mechanism(VALID, base_dir=DATA), Mechanism)
