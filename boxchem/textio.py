"""Reading users' text files: one decoder, one line splitter, one way to show a long line.

* :func:`read_text_file` decodes UTF-8, accepts a byte-order mark, and turns
  any other encoding (a file saved as Latin-1 or UTF-16) into an error that
  names the file, the line and column of the first undecodable byte and what
  to do - never a ``UnicodeDecodeError`` traceback.
* :func:`split_lines` splits at "\\n", "\\r\\n" and "\\r" only.
  ``str.splitlines`` also splits at form feed, vertical tab, U+0085, U+2028,
  U+2029 and the file/group/record separators, which editors do not show as
  line breaks: line numbers would point at the wrong line and comment text
  after such a character would be read as code.
* :func:`shorten_line` cuts a long line to a window around a column so that
  error messages stay small (one message per key on a 25,000-key line would
  otherwise repeat the whole line each time).
"""
from __future__ import annotations

import re
from pathlib import Path

from .errors import BoxchemError

__all__ = ["LINE_BREAK", "split_lines", "strip_bom", "decode_text", "read_text_file",
           "shorten_line", "MAX_SHOWN_LINE"]

#: the only line breaks of our text formats
LINE_BREAK = re.compile(r"\r\n|\r|\n")
#: characters of a line shown in an error message
MAX_SHOWN_LINE = 160
_BOM = "\ufeff"


def split_lines(text: str) -> list[str]:
    """Lines of ``text`` split at "\\n", "\\r\\n", "\\r" (no empty last line after a final break)."""
    lines = LINE_BREAK.split(text)
    if lines and lines[-1] == "":
        lines.pop()
    return lines


def strip_bom(text: str) -> str:
    """``text`` without a leading UTF-8 byte-order mark."""
    return text[1:] if text.startswith(_BOM) else text


def _position(data: bytes, offset: int) -> tuple[int, int]:
    """1-based (line, column) of byte ``offset`` (lines as :func:`split_lines` counts them)."""
    head = data[:offset]
    line = 1 + len(re.findall(rb"\r\n|\r|\n", head))
    last = max(head.rfind(b"\n"), head.rfind(b"\r"))
    column = len(head[last + 1:].decode("utf-8", errors="replace")) + 1
    return line, column


def decode_text(data: bytes, source: str, error: type[BoxchemError] = BoxchemError,
                what: str = "file") -> str:
    """UTF-8 bytes (with or without BOM) -> text; anything else -> ``error`` naming file:line:col."""
    try:
        return strip_bom(data.decode("utf-8"))
    except UnicodeDecodeError as exc:
        line, column = _position(data, exc.start)
        byte = data[exc.start:exc.start + 1].hex().upper()
        hint = ("it looks like UTF-16; " if data[:2] in (b"\xff\xfe", b"\xfe\xff") else
                "it may be Latin-1 or Windows-1252; ")
        raise error(f"{source}:{line}:{column}: the {what} is not UTF-8 text (byte 0x{byte} cannot "
                    f"be decoded); {hint}save it as UTF-8 (e.g. iconv -f latin1 -t utf-8)") from None


def read_text_file(path: str | Path, error: type[BoxchemError] = BoxchemError,
                   what: str = "file") -> str:
    """Read a UTF-8 text file (BOM accepted); errors are ``error`` instances naming the file."""
    p = Path(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise error(f"{p}: no such file") from None
    except IsADirectoryError:
        raise error(f"{p}: is a folder, not a {what}") from None
    except OSError as exc:
        raise error(f"{p}: cannot read the {what} ({exc.strerror or exc})") from None
    return decode_text(data, str(p), error, what)


def shorten_line(text: str, column: int, width: int = MAX_SHOWN_LINE) -> tuple[str, int]:
    """(shown text, caret column) of a line cut to ``width`` characters around ``column``."""
    if len(text) <= width:
        return text, column
    start = max(0, min(column - 1 - width // 2, len(text) - width))
    shown = text[start:start + width]
    prefix = "..." if start > 0 else ""
    suffix = "..." if start + width < len(text) else ""
    return f"{prefix}{shown}{suffix}", column - start + len(prefix)
