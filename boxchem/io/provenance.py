"""What ran, stored in the result so that the file alone reproduces it.

A run's Dataset gets (docs/provenance.md):

* ``mechanism_text`` (global attribute): every mechanism file read, the
  top-level file first, each after a line ``#>>> boxchem mechanism file N:
  PATH``; ``mechanism_files`` (JSON) indexes it: path, the file that extends
  it (``parent``), the name as written on that ``extends`` line
  (``reference``), offset and length of its text in ``mechanism_text``;
* ``mechanism_changes``: one line per reaction a file changed, dropped or
  added on top of its base (as ``boxchem check`` lists them);
* ``reaction_definition`` and ``reaction_reference`` (reaction, str):
  auxiliary coordinates with each reaction's law and parameters as written
  and its ``ref=``, so two files can be compared reaction by reaction;
* ``photolysis_data`` (reaction, str): the cross-section data set each J
  came from, and what a partial user spectrum did;
* ``scenario_data`` (JSON): the scenario table that ran (its files merged,
  overrides applied, file paths made absolute); ``command_line``;
  ``input_files`` (JSON): the user data files read, as resolved for this run
  after every override, each with the scenario key or mechanism line it came
  from, its sha256 and (up to ``MAX_STORED_FILE_BYTES``) its text.

:func:`mechanism_files` and :func:`scenario_data` read them back
(``boxchem rerun`` uses them).
"""
from __future__ import annotations

import json
from pathlib import Path
from typing import Any, Mapping

import numpy as np

__all__ = ["MECHANISM_FILE_MARKER", "provenance_attrs", "input_files", "reaction_coordinates", "mechanism_files",
           "scenario_data", "command_line"]

MECHANISM_FILE_MARKER = "#>>> boxchem mechanism file "
#: user data files up to this size are stored in the result (input_files), bigger ones by hash only
MAX_STORED_FILE_BYTES = 2_000_000


def command_line() -> str:
    from ..invocation import command_line as current
    return current()


def _mechanism_text_and_index(mechanism) -> tuple[str, list[dict]]:
    parts, index, offset = [], [], 0
    for i, f in enumerate(mechanism.files):
        marker = f"{MECHANISM_FILE_MARKER}{i}: {f.path}\n"
        offset += len(marker)
        parts += [marker, f.text]
        index.append({"path": f.path, "parent": f.parent, "reference": f.reference,
                      "offset": offset, "length": len(f.text)})
        offset += len(f.text)
        if not f.text.endswith("\n"):
            parts.append("\n")
            offset += 1
    return "".join(parts), index


def _scenario_table(scenario) -> dict:
    """The scenario table that ran, file paths absolute (they were relative to their files)."""
    # TOML dates and times (unquoted in the file) become ISO 8601 strings, which scenarios read too
    data = json.loads(json.dumps(dict(scenario.data),
                                 default=lambda v: v.isoformat() if hasattr(v, "isoformat") else str(v)))
    if scenario.trajectory is not None:
        data.setdefault("environment", {})["trajectory"] = str(scenario.trajectory)
    if scenario.photolysis_cross_sections:
        data.setdefault("photolysis", {})["cross_sections"] = {
            rid: str(path) for rid, path in scenario.photolysis_cross_sections.items()}
    return data


def _sha256(path: Path) -> str:
    import hashlib
    try:
        digest = hashlib.sha256()
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                digest.update(block)
        return digest.hexdigest()
    except OSError:
        return ""


def _data_file_keys(mechanism, scenario) -> dict[str, str]:
    """Path -> where the run took it from, for every user data file it read.

    Keys name the place as a user would look for it: ``[environment].trajectory``,
    ``[photolysis].cross_sections.ID`` (after every override), or
    ``reaction ID data=`` / ``qy=`` for files a mechanism line names.
    """
    from ..photolysis.crosssections import DATA_DIR
    keys: dict[str, str] = {}
    for r in mechanism.reactions:
        for key in ("data", "qy"):
            value = r.parameters.get(key)
            if isinstance(value, str) and Path(value).is_absolute() and \
                    not value.startswith(str(DATA_DIR)):
                keys.setdefault(value, f"reaction {r.id} {key}=")
    for rid, path in sorted(dict(scenario.photolysis_cross_sections or {}).items()):
        keys.setdefault(str(Path(path).resolve()), f"[photolysis].cross_sections.{rid}")
    if scenario.trajectory is not None:
        keys.setdefault(str(Path(scenario.trajectory).resolve()), "[environment].trajectory")
    return keys


def input_files(mechanism, scenario) -> list[dict]:
    """The user data files the run read, as resolved for this run (after every override).

    One entry per file: ``key`` (:func:`_data_file_keys`), ``path``, ``sha256``
    of its bytes and, up to MAX_STORED_FILE_BYTES, its ``text`` (``boxchem rerun``
    runs the stored copies).  The mechanism's own files are in ``mechanism_text``.
    """
    out = []
    for p, key in _data_file_keys(mechanism, scenario).items():
        entry = {"key": key, "path": p, "sha256": _sha256(Path(p))}
        try:
            if Path(p).stat().st_size <= MAX_STORED_FILE_BYTES:
                entry["text"] = Path(p).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError):
            pass
        out.append(entry)
    return out


def provenance_attrs(mechanism, scenario) -> dict[str, str]:
    """Global attributes: mechanism files and changes, scenario table, command line."""
    text, index = _mechanism_text_and_index(mechanism)
    return {
        "input_files": json.dumps(input_files(mechanism, scenario)),
        "mechanism_text": text,
        "mechanism_files": json.dumps(index),
        "mechanism_changes": "\n".join(c.describe() for c in mechanism.changes),
        "scenario_data": json.dumps(_scenario_table(scenario)),
        "scenario_base_dir": str(scenario.base_dir),
        "command_line": command_line(),
    }


def reaction_coordinates(mechanism, photolysis_data: Mapping[str, str] | None = None) -> dict:
    """Auxiliary string coordinates along ``reaction`` (xarray coordinate tuples)."""
    coords = {
        "reaction_definition": ("reaction", np.array([r.definition for r in mechanism.reactions],
                                                     dtype=object),
                                {"long_name": "rate law and its parameters as written in the "
                                              "mechanism (spacing normalised)"}),
        "reaction_reference": ("reaction", np.array([r.ref for r in mechanism.reactions], dtype=object),
                               {"long_name": "source of the reaction's parameters (ref= in the "
                                             "mechanism)"}),
    }
    if photolysis_data is not None:
        coords["photolysis_data"] = ("reaction", np.array(
            [photolysis_data.get(r.id, "") for r in mechanism.reactions], dtype=object),
            {"long_name": "cross-section data set of each J (empty: not photolysis or parametric)"})
    return coords


def mechanism_files(attrs: Mapping[str, Any]):
    """The MechanismFile records of a result's attributes (top-level file first)."""
    from ..errors import BoxchemError
    from ..mechanism.model import MechanismFile
    if "mechanism_text" not in attrs or "mechanism_files" not in attrs:
        raise BoxchemError("the result file holds no mechanism text (attributes mechanism_text and "
                           "mechanism_files); it was written by an older boxchem - re-run its "
                           "scenario instead")
    text = str(attrs["mechanism_text"])
    out = []
    for entry in json.loads(str(attrs["mechanism_files"])):
        body = text[entry["offset"]: entry["offset"] + entry["length"]]
        out.append(MechanismFile(entry["path"], body, int(entry["parent"]), entry["reference"]))
    return tuple(out)


def scenario_data(attrs: Mapping[str, Any]) -> dict:
    from ..errors import BoxchemError
    if "scenario_data" not in attrs:
        raise BoxchemError("the result file holds no scenario table (attribute scenario_data); it "
                           "was written by an older boxchem - re-run its scenario instead")
    return json.loads(str(attrs["scenario_data"]))
