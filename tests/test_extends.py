"""Building on a mechanism: ``extends``, [changed reactions], [dropped reactions].

The syntax is boxchem's own (docs/mechanism-language.md, "Building on a
mechanism"); the spellings of earlier versions are errors that show the new one.
"""
from __future__ import annotations

from pathlib import Path

import pytest

from boxchem.cli import main
from boxchem.errors import MechanismError
from boxchem.mechanism import load_mechanism, parse_mechanism

DATA = Path(__file__).parent / "data" / "mech"
DIMER = "clo_clo_m  ClO + ClO + M -> Cl2O2 + M  falloff k0=2.0e-32 n=4.0 kinf=3.0e-12 m=1.5"


def _problems(text, tmp_path):
    with pytest.raises(MechanismError) as info:
        parse_mechanism(text, "lab.mech", base_dir=tmp_path)
    return info.value.problems


@pytest.mark.parametrize("old, line, column, new", [
    ('include "stratosphere"\n', 1, 1, 'extends "stratosphere"'),
    ('extends "stratosphere"\n[replace]\n' + DIMER + "\n", 2, 2, "[changed reactions]"),
    ('extends "stratosphere"\n[remove]\nclo_o\n', 2, 2, "[dropped reactions]"),
])
def test_old_spelling_is_an_error_that_shows_the_new_one(old, line, column, new, tmp_path):
    problems = _problems(old, tmp_path)
    assert len(problems) == 1, [p.message for p in problems]   # no follow-on errors
    p = problems[0]
    assert (p.location.file, p.location.line, p.location.column) == ("lab.mech", line, column)
    assert new in p.message and "old spelling" in p.message
    shown = p.format()
    assert shown.startswith(f"lab.mech:{line}:{column}: error:")
    assert shown.splitlines()[-1] == "    " + " " * (column - 1) + "^"


def test_old_include_with_its_sections_gives_one_error_per_old_word(tmp_path):
    problems = _problems('include "stratosphere"\n[replace]\n' + DIMER + "\n[remove]\nclo_o\n", tmp_path)
    assert [p.location.line for p in problems] == [1, 2, 4]


def test_extends_changes_drops_and_adds_by_id():
    mech = load_mechanism(DATA / "override.mech")
    base = load_mechanism(DATA / "small.mech")
    assert mech.reaction_ids.index("clo_dimer") == base.reaction_ids.index("clo_dimer")
    assert mech.reaction("clo_dimer").parameters["k0"] == 2.0e-32
    assert "oclo_make" not in mech.reaction_ids and "oclo_loss" not in mech.reaction_ids
    kinds = [(c.kind, c.reaction_id) for c in mech.changes]
    assert kinds == [("added", "oh_o3"), ("changed", "clo_dimer"), ("dropped", "oclo_make"),
                     ("dropped", "oclo_loss")]
    changed = mech.changes[1]
    assert changed.before == "falloff k0=1.9e-32 n=3.6 kinf=3.7e-12 m=1.6"
    assert changed.after.startswith("falloff k0=2.0e-32 n=4.0") and 'ref="lab value"' in changed.after
    assert changed.base_location.file.endswith("small.mech") and changed.location.line == 11
    # the base alone records no changes; both files are kept with their texts
    assert base.changes == ()
    assert [Path(f.path).name for f in mech.files] == ["override.mech", "small.mech"]
    assert mech.files[1].parent == 0 and mech.files[1].reference == "small.mech"


def test_extends_without_quotes_and_a_second_extends_is_an_error(tmp_path):
    for line in ("extends small.mech", 'extends = "small.mech"'):     # the scenario spelling too
        mech = parse_mechanism(f"{line}\n[dropped reactions]\nclo_het\n", base_dir=DATA)
        assert "clo_het" not in mech.reaction_ids
    problems = _problems('extends "stratosphere"\nextends "stratosphere"\n', tmp_path)
    assert problems[0].location.line == 2 and "one base" in problems[0].message


def test_check_lists_every_change(capsys):
    assert main(["check", str(DATA / "override.mech")]) == 0
    out = capsys.readouterr().out
    assert "changes to the base mechanism: 1 changed, 2 dropped, 1 added" in out
    assert "changed  clo_dimer" in out and "was: falloff k0=1.9e-32" in out
    assert "now: falloff k0=2.0e-32" in out and "dropped  oclo_loss" in out


def test_changing_an_unknown_id_names_it(tmp_path):
    p = _problems('extends "stratosphere"\n[changed reactions]\n'
                  'clo_clo_x  ClO + ClO + M -> Cl2O2 + M  falloff k0=2e-32 n=4 kinf=3e-12 m=1.5\n',
                  tmp_path)[0]
    assert "no reaction with id 'clo_clo_x' to change" in p.message and "clo_clo_m" in p.message


def test_shipped_files_use_the_new_spelling():
    root = Path(__file__).parents[1]
    files = [*root.glob("mechanisms/*.mech"), *root.glob("examples/**/*.mech"), *DATA.glob("*.mech")]
    assert files
    for f in files:
        for line in f.read_text().splitlines():
            word = line.split("#", 1)[0].strip()
            assert not word.startswith("include") and word not in ("[replace]", "[remove]"), (f, line)


def test_stored_files_answer_extends_without_the_disk(tmp_path):
    from boxchem.mechanism.parser import parse_stored_mechanism
    (tmp_path / "base.mech").write_text((DATA / "small.mech").read_text())
    (tmp_path / "top.mech").write_text('extends "base.mech"\n[dropped reactions]\nclo_het\n')
    mech = load_mechanism(tmp_path / "top.mech")
    (tmp_path / "base.mech").unlink()                    # gone: the stored copy must be used
    again = parse_stored_mechanism(mech.files)
    assert again.reaction_ids == mech.reaction_ids and again.text_sha256 == mech.text_sha256
    assert [c.kind for c in again.changes] == ["dropped"]
