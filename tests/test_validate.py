"""Validation and syntax errors: each kind with its line, column and message."""
import pytest

from boxchem.errors import MechanismError
from boxchem.mechanism import parse_mechanism

HEAD = """[species]
O
O3
Cl
ClO
ClONO2
HCl
Cl2
HNO3
Cl2O2
M fixed
O2 fixed 0.2095
"""
# line numbers: HEAD has 12 lines, "[reactions]" is line 13, first reaction line 14
FIRST = 14


def problems(text: str, **kw):
    with pytest.raises(MechanismError) as info:
        parse_mechanism(text, source="t.mech", **kw)
    return info.value.problems


def one(text: str, **kw):
    found = problems(text, **kw)
    assert len(found) == 1, [p.format() for p in found]
    return found[0]


def rx(line: str, extra: str = ""):
    return HEAD + "[reactions]\n" + line + "\n" + extra


def where(p):
    return p.location.line, p.location.column


def test_unknown_species_with_suggestion():
    p = one(rx("r1 ClONo2 + HCl -> Cl2 + HNO3 surface gamma=0.1 on=psc"))
    assert where(p) == (FIRST, 4)
    assert "unknown species 'ClONo2'" in p.message and "did you mean 'ClONO2'" in p.message
    text = p.format()
    # file:line:col, the line itself and a caret under the word
    assert text.startswith(f"t.mech:{FIRST}:4: error:")
    assert "\n    r1 ClONo2 + HCl" in text and "\n       ^" in text


def test_unbalanced_reaction():
    p = one(rx("r1 Cl + O3 -> ClO + O3 arrhenius A=2.3e-11 E/R=200"))
    assert where(p) == (FIRST, 12)  # the arrow
    assert "not balanced" in p.message and "O 3 -> 4" in p.message and "unbalanced" in p.message
    # the flag silences it
    parse_mechanism(rx("r1 Cl + O3 -> ClO + O3 arrhenius A=2.3e-11 unbalanced"), source="t.mech")


def test_duplicate_id():
    p = one(rx("r1 Cl + O3 -> ClO + O2 arrhenius A=2.3e-11\nr1 ClO + O -> Cl + O2 arrhenius A=2.8e-11"))
    assert where(p) == (FIRST + 1, 1) and "duplicate reaction id 'r1'" in p.message
    assert f"t.mech:{FIRST}:1" in p.message and "[changed reactions]" in p.message


@pytest.mark.parametrize("params, key, valid", [
    ("arrhenius A=-2e-11", "A=", "A >= 0"),
    ("arrhenius A=nan", "A=", "not a finite number"),
    ("arrhenius A=2e-11 E/R=inf", "E/R=", "not a finite number"),
    ("arrhenius A=2e-11 Tref=0", "Tref=", "Tref > 0"),
    ("arrhenius A=2e-11 f298=0.5", "f298=", "f298 >= 1"),
    ("constant k=-1", "k=", "k >= 0"),
])
def test_parameter_sanity(params, key, valid):
    line = f"r1 Cl + O3 -> ClO + O2 {params}"
    p = one(rx(line))
    assert where(p) == (FIRST, line.index(key) + 1)
    assert valid in p.message and "r1" in p.message


@pytest.mark.parametrize("params, key, valid", [
    ("falloff k0=1e-32 n=4 kinf=3e-12 m=2 Fc=1.5", "Fc=", "0 < Fc <= 1"),
    ("falloff k0=1e-32 n=4 kinf=3e-12 m=2 Fc=0", "Fc=", "0 < Fc <= 1"),
    ("falloff k0=1e-32 n=4 kinf=0 m=2", "kinf=", "kinf > 0"),
])
def test_falloff_parameter_sanity(params, key, valid):
    line = f"r1 ClO + ClO + M -> Cl2O2 + M {params}"
    p = one(rx(line))
    assert where(p) == (FIRST, line.index(key) + 1) and valid in p.message


@pytest.mark.parametrize("gamma", ["0", "1.5", "-0.1"])
def test_gamma_outside_unit_interval(gamma):
    line = f"r1 ClONO2 + HCl -> Cl2 + HNO3 surface gamma={gamma} on=psc"
    p = one(rx(line))
    assert where(p) == (FIRST, line.index("gamma=") + 1) and "0 < gamma <= 1" in p.message


def test_surface_target():
    line = "r1 ClONO2 + HCl -> Cl2 + HNO3 surface gamma=0.1 on=nat"
    p = one(rx(line))
    assert where(p) == (FIRST, line.index("on=") + 1) and "on=psc, on=sulfate, on=ice, on=all" in p.message


def test_surface_target_ice_is_valid():
    # on=ice is a surface of its own (ice PSCs); it parses without problems
    mech = parse_mechanism(rx("r1 ClONO2 + HCl -> Cl2 + HNO3 surface gamma=0.1 on=ice"))
    assert mech.reactions[0].parameters["on"] == "ice"


def test_reverse_of_missing_and_not_reverse():
    fwd = "fwd ClO + ClO + M -> Cl2O2 + M falloff k0=1.6e-32 n=4.5 kinf=3e-12 m=2"
    line = "back Cl2O2 + M -> ClO + ClO + M reverse of=fwx K=2.16e-27 B=8537"
    p = one(rx(fwd + "\n" + line))
    assert where(p) == (FIRST + 1, line.index("of=") + 1)
    assert "no reaction with that id" in p.message and "did you mean 'fwd'" in p.message
    line = "back Cl2O2 + M -> ClO + Cl + O + M reverse of=fwd K=2.16e-27 B=8537"
    p = one(rx(fwd + "\n" + line))
    assert p.location.line == FIRST + 1 and "is not the reverse of fwd" in p.message
    line = "back Cl2O2 -> ClO + ClO reverse of=fwd K=2.16e-27 B=8537"
    p = one(rx(fwd + "\n" + line))
    assert "with M on both" in p.message


def test_cycle_unknown_reaction_and_family():
    text = rx("r1 Cl + O3 -> ClO + O2 arrhenius A=2.3e-11",
              "[families]\nOx = O3 + O\n[cycles]\nc1 destroys Ox = 2*r2\nc2 destroys Oy = r1\n")
    found = problems(text)
    assert len(found) == 2
    a, b = found
    assert (a.location.line, a.location.column) == (FIRST + 4, 20) and "unknown reaction 'r2'" in a.message
    assert "did you mean 'r1'" in a.message
    assert (b.location.line, b.location.column) == (FIRST + 5, 13) and "unknown family 'Oy'" in b.message
    assert "did you mean 'Ox'" in b.message


def test_family_unknown_species():
    p = one(HEAD + "[families]\nOx = O3 + O + O1D\n")
    assert where(p) == (14, 15) and "unknown species 'O1D'" in p.message


def test_atoms_family_bad_element():
    p = one(HEAD + "[families]\nXx = atoms(Qq)\n")
    assert p.location.line == 14 and "'Qq' is not an element symbol" in p.message


def test_species_not_a_formula():
    p = one("[species]\nO3\nO1D\n")
    assert where(p) == (3, 1) and "formula=" in p.message and "lumped" in p.message


@pytest.mark.parametrize("line, column, words", [
    ("r1 Cl + O3 -> ClO + O2 arhenius A=1", 24, ["unknown rate law 'arhenius'", "did you mean 'arrhenius'"]),
    ("r1 Cl + O3 -> ClO + O2 arrhenius B=1 A=1", 34, ["takes no key 'B'", "valid keys"]),
    ("r1 Cl + O3 -> ClO + O2 arrhenius A=fast", 36, ["'fast' is not a number"]),
    ("r1 Cl + O3 ClO + O2 arrhenius A=1", 12, ["expected '->'"]),
    ("r1 Cl + O3 -> ClO + O2", 23, ["expected a rate law"]),
    ("r1 Cl + O3 -> ClO + O2 arrhenius A=1 A=2", 38, ["given twice"]),
    ("r1 Cl + O3 -> ClO + O2 arrhenius", 33, ["arrhenius needs A="]),
    ("r1 Cl + O3 -> ClO + O2 arrhenius A=1 fast", 38, ["expected KEY=VALUE"]),
    ("r1 Cl + O3 -> ClO + O2 arrhenius A=1 ref=\"open", 42, ["unterminated"]),
    ("r1 Cl + O3 -> ClO + O2 arrhenius A=1 ; x", 38, ["unexpected character ';'"]),
    ("r1 Cl + -> ClO + O2 arrhenius A=1", 9, ["expected a species name"]),
    ("r1 ClO + O3 -> hv + O2 arrhenius A=1", 16, ["hv can only stand on the left"]),
    ("r1 2 M + O3 -> O3 arrhenius A=1", 4, ["M takes no coefficient"]),
    ("1r Cl + O3 -> ClO + O2 arrhenius A=1", 1, ["reaction id starts with a letter"]),
    ("r1 Cl + O3 -> ClO + O2 photolysis l=1 m=1", 24, ["all three of l=, m=, n="]),
    ("r1 Cl + O3 -> ClO + O2 photolysis", 24, ["data=NAME", "l= m= n="]),
    ("r1 Cl + O3 -> ClO + O2 arrhenius A=1 E/R=", 42, ["'' is not a number"]),
])
def test_syntax_errors(line, column, words):
    p = one(rx(line))
    assert where(p) == (FIRST, column), p.format()
    for w in words:
        assert w in p.message, p.message


@pytest.mark.parametrize("text, line, column, words", [
    ("O3\n", 1, 1, ["expected a section header"]),
    ("[specis]\n", 1, 2, ["unknown section [specis]", "did you mean 'species'"]),
    ("[species]\nO3\nextends \"x.mech\"\n", 3, 1, ["before the first section"]),
    ("[species]\nO3\nO3\n", 3, 1, ["declared twice", ":2:1"]),
    ("[species]\nO(1D) formula=O\n", 2, 2, ["letters, digits and '_'"]),
    ("[species]\nO3 fixed bogus\n", 2, 10, ["unknown species option 'bogus'"]),
    ("[species]\nX lumped formula=O\n", 2, 18, ["lumped and also given a formula"]),
    ("[species]\nhv\n", 2, 1, ["reserved word"]),
    ("[species]\nM\n", 2, 1, ["'M fixed'"]),
    ("[species]\nO3 formula=Qz\n", 2, 12, ["'Qz' is not an element symbol"]),
    ("[species]\nO2 fixed 1.5\n", 2, 4, ["fixed mole fraction must be in (0, 1]"]),
    ("[species]\nO3\n[families]\nOx O3\n", 4, 1, ["NAME = SPECIES"]),
    ("[species]\nO3\n[cycles]\nc1 eats Ox = r1\n", 4, 1, ["NAME destroys FAMILY"]),
    ("[species]\nO3\n[dropped reactions]\nr9\n", 4, 1, ["no reaction with id 'r9'"]),
    ("[species]\nO3\n[changed reactions]\nr9 O3 -> O3 constant k=1\n", 4, 1,
     ["no reaction with id 'r9' to change"]),
])
def test_line_errors(text, line, column, words):
    p = one(text)
    assert where(p) == (line, column), p.format()
    for w in words:
        assert w in p.message, p.message


def test_photolysis_structure():
    p = one(rx("r1 O3 + hv -> O + O2 arrhenius A=1"))
    assert "needs the photolysis law" in p.message
    p = one(rx("r1 O3 + O -> O2 + O2 photolysis data=O3"))
    assert "needs hv on the left" in p.message


def test_m_on_right_only():
    p = one(rx("r1 O + O2 -> O3 + M arrhenius A=6e-34"))
    assert where(p) == (FIRST, 19) and "M on the right needs M on the left" in p.message


def test_many_errors_are_reported_together():
    text = rx("r1 Cl + O3 -> ClO + O2 arhenius A=1\n"
              "r2 ClO + O -> Cl + O3 arrhenius A=1\n"
              "r3 Cl + Ozone -> ClO + O2 arrhenius A=1")
    found = problems(text)
    assert [p.location.line for p in found] == [FIRST, FIRST + 1, FIRST + 2]
    with pytest.raises(MechanismError, match="3 problems in mechanism"):
        parse_mechanism(text)


def test_no_follow_on_errors_for_broken_definitions():
    # the species line fails; reactions using the name are not reported again
    text = "[species]\nO3\nO1D\nO\nO2 fixed 0.21\n[reactions]\nr1 O1D + O3 -> O2 + O2 constant k=1 unbalanced\n"
    assert len(problems(text)) == 1


def test_warnings_and_strict():
    text = rx("r1 Cl + O3 -> ClO + O2 arrhenius A=2.3e-11 E/R=200\n"
              "r2 Cl + O3 -> ClO + O2 arrhenius A=2.0e-11\n"
              "r3 ClO + O -> Cl + O2 arrhenius A=2.8e-11")
    mech = parse_mechanism(text, source="t.mech")
    messages = [w.message for w in mech.warnings]
    assert all(w.severity == "warning" for w in mech.warnings)
    assert any("'r1' and 'r2' have the same equation" in m for m in messages)
    assert any("'O3' is never produced" in m for m in messages)
    assert any("'ClONO2' takes part in no reaction" in m for m in messages)
    dup = next(w for w in mech.warnings if "same equation" in w.message)
    assert where(dup) == (FIRST + 1, 12)
    with pytest.raises(MechanismError) as info:
        parse_mechanism(text, source="t.mech", strict=True)
    assert len(info.value.problems) == len(mech.warnings)
    assert all(p.severity == "error" for p in info.value.problems)


def test_same_equation_different_surface_is_no_duplicate():
    text = rx("a ClONO2 + HCl -> Cl2 + HNO3 surface gamma=0.3 on=psc\n"
              "b ClONO2 + HCl -> Cl2 + HNO3 surface gamma=0.1 on=sulfate")
    mech = parse_mechanism(text)
    assert not any("same equation" in w.message for w in mech.warnings)
