"""Find shipped mechanisms and scenarios by bare name, or user files by path.

``stratosphere`` resolves to the shipped ``stratosphere.mech``; anything that
looks like a path (has a suffix or a separator, or exists) is taken as a path.
Shipped files live in the repository's top-level ``mechanisms/`` and
``scenarios/`` folders and are installed as ``boxchem/shipped/...``.
"""
from __future__ import annotations

import difflib
from pathlib import Path

from .errors import BoxchemError

_PACKAGE_DIR = Path(__file__).resolve().parent
_SUFFIX = {"mechanisms": ".mech", "scenarios": ".toml"}


def shipped_dir(kind: str) -> Path:
    """Folder of shipped ``mechanisms`` or ``scenarios`` (installed or source checkout)."""
    installed = _PACKAGE_DIR / "shipped" / kind
    if installed.is_dir():
        return installed
    return _PACKAGE_DIR.parent / kind


def shipped_names(kind: str) -> list[str]:
    folder = shipped_dir(kind)
    if not folder.is_dir():
        return []
    return sorted(p.stem for p in folder.glob(f"*{_SUFFIX[kind]}"))


def resolve(name_or_path: str | Path, kind: str, *, relative_to: Path | None = None) -> Path:
    """Path of a mechanism/scenario given by bare shipped name or by path.

    ``relative_to`` is the folder relative paths are read against (the folder
    of the scenario file that names a mechanism); default the working folder.
    """
    text = str(name_or_path)
    candidate = Path(text).expanduser()
    if not candidate.is_absolute() and relative_to is not None:
        candidate = relative_to / candidate
    looks_like_path = candidate.suffix != "" or "/" in text or "\\" in text
    try:
        is_file = candidate.is_file()
    except OSError:                 # name too long, a NUL byte, ...: not a file we can read
        is_file = False
    except ValueError:
        is_file = False
    if is_file:
        return candidate
    if not looks_like_path:
        shipped = shipped_dir(kind) / f"{text}{_SUFFIX[kind]}"
        try:
            if shipped.is_file():
                return shipped
        except (OSError, ValueError):
            pass
    names = shipped_names(kind)
    hint = difflib.get_close_matches(text, names, n=1) if len(text) < 200 else []
    if len(text) > 120:
        text = f"{text[:60]}...{text[-40:]} ({len(text)} characters)"
        candidate = Path(text)
    label = kind.rstrip("s")
    msg = f"no {label} file {str(candidate)!r} and no shipped {label} named {text!r}"
    if hint:
        msg += f" - did you mean {hint[0]!r}?"
    elif names:
        msg += f"; shipped {kind}: {', '.join(names)}"
    raise BoxchemError(msg)
