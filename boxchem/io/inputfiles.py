"""Which input files a run actually read: the record written to its result file.

``input_file_record(scenario, mechanism)`` lists the files behind the
scenario's path-valued keys as they were resolved for this run (after any
``--set``/``--vary``/Python override): the mechanism file, the trajectory
file and each ``[photolysis].cross_sections`` file, each with the SHA-256 of
its bytes, so that a result file names the inputs that ran, not the ones the
scenario text mentions.
"""
from __future__ import annotations

import hashlib
import json
from pathlib import Path
from typing import Any

__all__ = ["input_file_record", "input_files_attribute", "INPUT_FILES_ATTRIBUTE"]

#: global attribute of a result file holding the JSON record
INPUT_FILES_ATTRIBUTE = "input_sources"


def _sha256(path: Path) -> str:
    try:
        digest = hashlib.sha256()
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                digest.update(block)
        return digest.hexdigest()
    except OSError:
        return ""


def input_file_record(scenario: Any, mechanism: Any) -> dict[str, dict[str, str]]:
    """``{"[run].mechanism": {"path": ..., "sha256": ...}, "[environment].trajectory": ..., ...}``."""
    record: dict[str, dict[str, str]] = {}
    mech_path = getattr(mechanism, "source", None) or getattr(scenario, "mechanism_path", None)
    if mech_path and Path(str(mech_path)).is_file():
        # the mechanism's hash covers every file it includes (Mechanism.text_sha256)
        record["[run].mechanism"] = {"path": str(Path(str(mech_path)).resolve()),
                                     "text_sha256": str(getattr(mechanism, "text_sha256", ""))}
    trajectory = getattr(scenario, "trajectory", None)
    if trajectory is not None:
        path = Path(trajectory).resolve()
        record["[environment].trajectory"] = {"path": str(path), "sha256": _sha256(path)}
    for rid, path in sorted(dict(getattr(scenario, "photolysis_cross_sections", {}) or {}).items()):
        path = Path(path).resolve()
        record[f"[photolysis].cross_sections.{rid}"] = {"path": str(path), "sha256": _sha256(path)}
    return record


def input_files_attribute(scenario: Any, mechanism: Any) -> str:
    """:func:`input_file_record` as the JSON text of the ``input_sources`` attribute."""
    return json.dumps(input_file_record(scenario, mechanism), sort_keys=True)
