"""Parsing the mechanism language: forms, defaults, extends / changed / dropped reactions."""
import hashlib
import math
from pathlib import Path

import pytest

from boxchem.errors import MechanismError
from boxchem.mechanism import load_mechanism, parse_mechanism
from boxchem.mechanism.model import Term

DATA = Path(__file__).parent / "data" / "mech"

HEAD = """[species]
O
O3
O1D formula=O
ClO
Cl2O2
HO2
OH
H2O
Cl
ClOO
M fixed
O2 fixed 0.2095
N2 fixed 0.7808
"""


def parse(reactions: str, extra: str = "", **kw):
    return parse_mechanism(HEAD + extra + "[reactions]\n" + reactions, **kw)


def test_small_file_structure():
    mech = load_mechanism(DATA / "small.mech")
    assert mech.species_names[:3] == ("O3", "O", "O1D")
    o1d = mech.species_by_name("O1D")
    assert dict(o1d.formula) == {"O": 1}
    assert mech.species_by_name("O2").fixed and mech.species_by_name("O2").mole_fraction == 0.2095
    assert mech.species_by_name("Clx_aer").lumped and mech.species_by_name("Clx_aer").formula is None
    # molar mass from IUPAC standard atomic weights (recalled from memory): Cl2O2 = 2*35.45 + 2*15.999
    assert math.isclose(mech.species_by_name("Cl2O2").molar_mass, 2 * 35.45 + 2 * 15.999, rel_tol=1e-12)
    assert mech.reaction_ids[0] == "o_o2"
    assert [f.name for f in mech.families] == ["Ox", "ClOx", "Cly"]
    assert dict(mech.family("ClOx").members) == {"Cl": 1.0, "ClO": 1.0, "Cl2O2": 2.0}
    assert dict(mech.family("Cly").members) == {"Cl": 1, "ClO": 1, "Cl2O2": 2, "ClOO": 1, "OClO": 1}
    assert mech.family("Cly").element == "Cl"
    assert dict(mech.cycles[0].terms) == {"j_dimer": 2.0} and mech.cycles[0].family == "Ox"
    assert mech.text == (DATA / "small.mech").read_text()
    assert mech.text_sha256 == hashlib.sha256(mech.text.encode()).hexdigest()


def test_defaults_are_stored_explicitly():
    mech = load_mechanism(DATA / "small.mech")
    assert dict(mech.reaction("cl_o3").parameters) == {"A": 2.3e-11, "E/R": 200.0, "n": 0.0, "Tref": 300.0}
    assert mech.reaction("cl_o3").f298 == 1.15 and mech.reaction("cl_o3").g == 100.0
    assert mech.reaction("cl_o3").ref == "test"
    assert mech.reaction("clo_dimer").parameters["Fc"] == 0.6
    assert mech.reaction("clo_dimer").parameters["Tref"] == 300.0
    j = mech.reaction("j_dimer").parameters
    assert j["data"] == "Cl2O2" and j["qy"] == 1.0 and j["scale"] == 1.0 and j["l"] == 1e-3
    assert mech.reaction("oclo_loss").parameters["on"] == "psc"


def test_reverse_records_forward_law():
    mech = load_mechanism(DATA / "small.mech")
    back = mech.reaction("dimer_back")
    assert back.parameters["_of_law"] == "falloff"
    assert back.rate_includes_air and not back.air_multiplies_rate
    assert back.rate_coefficient_units == "s-1"


@pytest.mark.parametrize("equation", ["2 O -> O2", "2O -> O2", "O + O -> O2", "2*O -> O2", "1.0 O + O -> O2"])
def test_coefficient_forms(equation):
    mech = parse(f"r {equation} constant k=1\n")
    assert mech.reactions[0].reactants == (Term("O", 2.0),)


def test_fractional_coefficients_and_unbalanced():
    mech = parse("r OH + OH -> H2O + 0.5 O2 constant k=1e-12 unbalanced\n")
    r = mech.reactions[0]
    assert r.products == (Term("H2O", 1.0), Term("O2", 0.5)) and r.unbalanced


def test_third_body_and_hv():
    mech = parse("r1 O + O2 + M -> O3 + M arrhenius A=6e-34 n=-2.4\n"
                 "r2 O3 + hv -> O1D + O2 photolysis l=1e-5 m=1 n=1\n"
                 "r3 O + O2 + M -> O3 arrhenius A=6e-34\n")
    r1, r2, r3 = mech.reactions
    assert r1.third_body and r1.air_multiplies_rate and r1.reactants == (Term("O"), Term("O2"))
    assert r1.products == (Term("O3"),) and r1.rate_coefficient_units == "cm6 s-1"
    assert r2.photolysis and r2.reactants == (Term("O3"),) and r2.rate_coefficient_units == "s-1"
    assert r3.third_body  # M on the left only is allowed
    assert r1.equation == "O + O2 + M -> O3 + M"


def test_comments_quotes_and_blank_lines():
    mech = parse("\n   # a comment line\n"
                 "r O + O3 -> 2 O2 arrhenius A=8e-12 E/R=2060 ref=\"JPL #19-5, table 1\"  # trailing\n")
    assert mech.reactions[0].ref == "JPL #19-5, table 1"


def test_empty_product_side():
    mech = parse("r ClO -> constant k=1e-5 unbalanced\n")
    assert mech.reactions[0].products == ()


def test_air_species_m_is_optional():
    mech = parse_mechanism("[species]\nO\nO3\nO2 fixed 0.21\n[reactions]\nr O + O2 + M -> O3 + M arrhenius A=6e-34\n")
    assert mech.reactions[0].third_body


def test_extends_changed_dropped_reactions():
    mech = load_mechanism(DATA / "override.mech")
    ids = mech.reaction_ids
    assert "oclo_make" not in ids and "oclo_loss" not in ids
    assert ids[-1] == "oh_o3"
    # replaced in place: same position as in the base file
    base = load_mechanism(DATA / "small.mech")
    assert ids.index("clo_dimer") == base.reaction_ids.index("clo_dimer")
    dimer = mech.reaction("clo_dimer")
    assert dimer.parameters["k0"] == 2.0e-32 and dimer.parameters["Tref"] == 298.0 and dimer.ref == "lab value"
    assert "OH" in mech.species_names and "O3" in mech.species_names
    # the hash covers every file read
    assert (DATA / "small.mech").read_text() in mech.text
    assert (DATA / "override.mech").read_text() in mech.text
    assert mech.source.endswith("override.mech")


def test_include_relative_to_base_dir():
    text = 'extends "small.mech"\n[dropped reactions]\nclo_het\n'
    mech = parse_mechanism(text, base_dir=DATA)
    assert "clo_het" not in mech.reaction_ids and "cl_o3" in mech.reaction_ids


def test_include_loop_is_an_error():
    with pytest.raises(MechanismError, match="extends loop"):
        load_mechanism(DATA / "loop_a.mech")


def test_include_missing_file():
    with pytest.raises(MechanismError) as info:
        parse_mechanism('extends "nope/missing.mech"\n', base_dir=DATA)
    p = info.value.problems[0]
    assert p.location.line == 1 and p.location.column == 10 and "missing.mech" in p.message


def test_load_by_missing_name():
    with pytest.raises(MechanismError, match="no mechanism file"):
        load_mechanism("surely_not_a_shipped_mechanism")


def test_parse_is_deterministic_and_frozen():
    a = load_mechanism(DATA / "small.mech")
    b = load_mechanism(DATA / "small.mech")
    assert a.reactions == b.reactions and a.species == b.species
    with pytest.raises(TypeError):
        a.reactions[0].parameters["A"] = 1.0


def _doc_examples():
    doc = (Path(__file__).parents[1] / "docs" / "mechanism-language.md").read_text()
    tail = doc.split("## A complete example", 1)[1]
    blocks, current = [], None
    for line in tail.splitlines():
        if line.startswith("    "):
            current = (current or []) + [line[4:]]
        elif current is not None and line.strip():
            blocks.append("\n".join(current) + "\n")
            current = None
    return blocks


def test_documented_example_parses(tmp_path):
    base, override = _doc_examples()[:2]
    (tmp_path / "chlorine.mech").write_text(base)
    mech = parse_mechanism(base, source="chlorine.mech")
    assert len(mech.reactions) == 14 and [c.name for c in mech.cycles] == ["dimer", "clo_o"]
    changed = parse_mechanism(override, base_dir=tmp_path)
    assert "het_sulf" not in changed.reaction_ids
    assert changed.reaction("clo_dimer").parameters["Tref"] == 298.0
