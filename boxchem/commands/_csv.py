"""CSV output shared by the table-printing commands."""
from __future__ import annotations

import csv
import io


def csv_text(rows: list[dict], fields: list[str]) -> str:
    """Rows as CSV text with a header; floats to 6 significant digits, unknown keys ignored."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=fields, extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for r in rows:
        writer.writerow({k: (f"{v:.6g}" if isinstance(v, float) else v) for k, v in r.items()})
    return buf.getvalue()
