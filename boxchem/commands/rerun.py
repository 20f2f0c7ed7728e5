"""``boxchem rerun RESULT.nc``: run a result file's scenario and mechanism again, from the file alone."""
from __future__ import annotations

import argparse
import json
import sys
import tempfile
from pathlib import Path

EXAMPLE = """examples:
  boxchem rerun lab.nc                  # -> lab.rerun.nc, and whether it matches lab.nc
  boxchem rerun lab.nc -o again.nc --rtol 1e-6

The mechanism (every file, as it was when the run was made), the scenario
table (files merged, overrides applied) and the user data files (lab spectra,
trajectories up to 2 MB) are read from RESULT.nc itself, so later edits of
those files do not matter (a data file that changed since is named).
Exit status 0 when the new result matches, 1 when it differs (or the
integration failed), 2 for input errors."""

#: relative difference below which two results count as the same (same machine: bitwise, usually)
DEFAULT_RTOL = 1e-9
#: data variables compared (those the run computes; the rest follow from them)
_COMPARED = ("number_density", "rate_coefficient", "reaction_rate", "cycle_rate")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "rerun", help="run a result file's scenario and mechanism again and check the result matches",
        description="Re-run the scenario and mechanism stored in a boxchem result file and report "
                    "whether the new result matches the stored one.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("result", metavar="RESULT.nc", help="a result file written by boxchem run")
    p.add_argument("-o", "--output", metavar="NEW.nc",
                   help="where to write the new result (default: RESULT.rerun.nc beside RESULT.nc)")
    p.add_argument("--rtol", type=float, default=DEFAULT_RTOL,
                   help=f"largest relative difference that counts as a match (default {DEFAULT_RTOL:g})")
    p.add_argument("--data-from-disk", action="store_true",
                   help="read data files (lab spectra, trajectories) from the disk as they are now, "
                        "not the copies stored in RESULT.nc")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=main)


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value) if isinstance(value, int) else repr(float(value)).replace("inf", "inf")
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{json.dumps(k)} = {_toml_value(v)}" for k, v in value.items()) + " }"
    raise TypeError(f"cannot write {value!r} as TOML")


def scenario_toml(data: dict) -> str:
    """A scenario table (as stored in ``scenario_data``) written back as TOML text."""
    top = [f"{json.dumps(k)} = {_toml_value(v)}" for k, v in data.items() if not isinstance(v, dict)]
    lines = top + [""] if top else []
    for section, table in data.items():
        if isinstance(table, dict):
            lines.append(f"[{json.dumps(section)}]")
            lines += [f"{json.dumps(k)} = {_toml_value(v)}" for k, v in table.items()]
            lines.append("")
    return "\n".join(lines)


def stored_scenario(attrs, data_dir: Path | None = None):
    """The Scenario (with its stored mechanism) of a result file's attributes.

    With ``data_dir``, the stored copies of the run's data files are written
    there and used instead of the files on disk (which may have changed).
    """
    import dataclasses
    from types import MappingProxyType
    from ..io.provenance import mechanism_files, scenario_data
    from ..mechanism.parser import parse_stored_mechanism
    from ..scenario import Scenario

    mechanism = parse_stored_mechanism(mechanism_files(attrs))
    table = scenario_data(attrs)
    moved = _stored_copies(attrs, data_dir) if data_dir is not None else {}
    if moved:
        reactions = []
        for r in mechanism.reactions:
            params = {k: moved.get(v, v) if k in ("data", "qy") and isinstance(v, str) else v
                      for k, v in r.parameters.items()}
            reactions.append(dataclasses.replace(r, parameters=MappingProxyType(params)))
        mechanism = dataclasses.replace(mechanism, reactions=tuple(reactions))
        phot = table.get("photolysis", {})
        if isinstance(phot.get("cross_sections"), dict):
            phot["cross_sections"] = {k: moved.get(v, v) for k, v in phot["cross_sections"].items()}
        env = table.get("environment", {})
        if isinstance(env.get("trajectory"), str):
            env["trajectory"] = moved.get(env["trajectory"], env["trajectory"])
    run_table = table.get("run", {})
    if isinstance(run_table.get("mechanism"), str):
        # the stored mechanism is used; a [run].mechanism file deleted since must not stop that
        from ..errors import BoxchemError
        from ..resources import resolve
        try:
            resolve(run_table["mechanism"], "mechanisms",
                    relative_to=Path(str(attrs.get("scenario_base_dir", "."))))
        except BoxchemError:
            run_table.pop("mechanism")
    text = scenario_toml(table)
    return Scenario.from_text(text, base_dir=str(attrs.get("scenario_base_dir", ".")),
                              source=str(attrs.get("scenario_source", "<stored scenario>")),
                              mechanism=mechanism)


def _stored_copies(attrs, folder: Path) -> dict[str, str]:
    """Write the stored data files into ``folder``; original path -> path of the copy."""
    moved = {}
    for i, entry in enumerate(json.loads(str(attrs.get("input_files", "[]")))):
        if "text" in entry:
            copy = folder / str(i) / Path(entry["path"]).name      # same file name as in the run
            copy.parent.mkdir()
            copy.write_text(entry["text"], encoding="utf-8")
            moved[entry["path"]] = str(copy)
    return moved


def changed_inputs(attrs) -> list[tuple[str, str]]:
    """(path, what) of data files whose content differs from (or is missing since) the run."""
    from ..io.provenance import _sha256
    out = []
    for entry in json.loads(str(attrs.get("input_files", "[]"))):
        now = _sha256(Path(entry["path"]))
        if now != entry["sha256"]:
            out.append((entry["path"], "missing" if not now else "changed since the run"))
    return out


def differences(old, new, rtol: float) -> list[str]:
    """What differs between two results: shapes, times, and each compared variable beyond rtol."""
    import numpy as np
    out = []
    for dim in ("time", "species", "reaction"):
        if old.sizes.get(dim) != new.sizes.get(dim):
            out.append(f"{dim}: {old.sizes.get(dim)} in the stored result, {new.sizes.get(dim)} now")
    if out:
        return out
    if not np.array_equal(old["time"].values, new["time"].values):
        out.append("output times differ")
    for name in _COMPARED:
        if name not in old or name not in new:
            continue
        a, b = np.asarray(old[name].values, float), np.asarray(new[name].values, float)
        scale = np.maximum(np.maximum(np.abs(a), np.abs(b)), np.finfo(float).tiny)
        rel = np.where((a == b) | (np.isnan(a) & np.isnan(b)), 0.0, np.abs(a - b) / scale)
        worst = float(np.nanmax(rel)) if rel.size else 0.0
        if worst > rtol or np.isnan(rel).any():
            idx = np.unravel_index(int(np.nanargmax(rel)), rel.shape)
            label = ", ".join(f"{d}={old[d].values[i]}" for d, i in zip(old[name].dims, idx))
            out.append(f"{name}: largest relative difference {worst:.3g} at {label}")
    return out


def main(args) -> int:
    from ..errors import IntegrationError
    from ..io.netcdf import open_result, write_dataset
    from ..runner import run

    path = Path(args.result)
    if not path.is_file():
        from ..errors import BoxchemError
        raise BoxchemError(f"{path}: no such result file")
    old = open_result(path)
    if old.attrs.get("boxchem_result_kind") == "members":
        from ..errors import BoxchemError
        raise BoxchemError(f"{path}: a member file (sweep or ensemble); rerun re-runs single-run "
                           f"files - repeat the command that made it (attribute command_line: "
                           f"{old.attrs.get('command_line', 'not recorded')})")
    stored = {e["path"] for e in json.loads(str(old.attrs.get("input_files", "[]"))) if "text" in e}
    for file, note in changed_inputs(old.attrs):
        use = ("the file as it is now is used" if args.data_from_disk or file not in stored else
               f"the copy stored in {path.name} is used (--data-from-disk: the file as it is now)")
        print(f"boxchem rerun: note: {file}: {note}; {use}", file=sys.stderr)
    out = Path(args.output) if args.output else path.with_name(f"{path.stem}.rerun.nc")
    with tempfile.TemporaryDirectory(prefix="boxchem-rerun-") as folder:
        scenario = stored_scenario(old.attrs, None if args.data_from_disk else Path(folder))
        try:
            new = run(scenario, progress=not args.quiet)
        except IntegrationError as exc:
            print(f"boxchem rerun: integration failed: {exc}", file=sys.stderr)
            return 1
    # the scenario as the user gave it (its files and overrides), not the table it became
    for key in ("scenario", "scenario_overrides", "scenario_source"):
        if key in old.attrs:
            new.attrs[key] = old.attrs[key]
    new.attrs["history"] = f"{new.attrs.get('history', '')}\n{new.attrs['date_created']}: re-run of {path}"
    write_dataset(new, out)
    same_mechanism = old.attrs.get("mechanism_sha256") == new.attrs.get("mechanism_sha256")
    found = differences(old, new, args.rtol)
    print(f"wrote {out}")
    print(f"  mechanism: {'the same text' if same_mechanism else 'DIFFERENT text'} "
          f"(sha256 {str(new.attrs.get('mechanism_sha256'))[:12]}...)")
    if found or not same_mechanism:
        print(f"  result: DIFFERS from {path} (relative tolerance {args.rtol:g})")
        for line in found:
            print(f"    {line}")
        return 1
    print(f"  result: matches {path} ({', '.join(v for v in _COMPARED if v in old)} within "
          f"relative {args.rtol:g})")
    return 0
