"""Plain aligned text tables and the member option the result commands share."""
from __future__ import annotations

__all__ = ["format_table", "add_member_option", "value_with_range", "MEMBER_HELP"]

MEMBER_HELP = ("for a member file (sweep, ensemble): one member by index or label; without it the "
               "table is the median and 5-95 %% range across the successful members")


def _numeric(cell: str) -> bool:
    try:
        float(cell.replace(" h", "").split(" [")[0])
    except ValueError:
        return False
    return True


def format_table(headers: list[str], rows: list[list], title: str = "") -> str:
    """Plain aligned text table; numbers as given (already formatted strings)."""
    cells = [headers] + [[str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    lines = [title] if title else []
    for k, r in enumerate(cells):
        lines.append("  " + "  ".join(c.rjust(w) if _numeric(c) else c.ljust(w)
                                      for c, w in zip(r, widths)))
        if k == 0:
            lines.append("  " + "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def value_with_range(row: dict, field: str, fmt: str) -> str:
    """'1.23' for one run; '1.23 [1.10, 1.41]' (median [5 %, 95 %]) for a row across members."""
    text = format(row[field], fmt)
    if f"{field}_p05" in row:
        text += f" [{format(row[f'{field}_p05'], fmt)}, {format(row[f'{field}_p95'], fmt)}]"
    return text


def add_member_option(parser, flag: str = "--member", dest: str = "member", help_text: str = MEMBER_HELP) -> None:
    parser.add_argument(flag, default=None, metavar="INDEX|LABEL", dest=dest, help=help_text)

#: species listed by default (the same tuple as boxchem.diagnostics.comparison.DEFAULT_SPECIES
#: and boxchem.plotting.DEFAULT_SPECIES, checked by a test; kept here so that building the
#: command line does not import xarray)
DEFAULT_SPECIES = ("O3", "ClO", "Cl2O2", "HCl", "ClONO2", "HOCl", "BrO", "NO2", "HNO3")
