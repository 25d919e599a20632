"""Tables as text (a stand-in until the table writers land)."""

from __future__ import annotations

import numpy as np

from .figures import TableSpec
from .format import format_measured, format_number


def table_text(spec: TableSpec, rows: int | None = None) -> str:
    """The whole table: header `name [unit]`, every row (or the first and last of ``rows``)."""
    header = [c.label for c in spec.columns]
    body = []
    for i in range(spec.rows):
        line = []
        for c in spec.columns:
            if c.texts is not None:
                line.append(c.texts[i])
            elif c.sigma is not None:
                line.append(format_measured(c.values[i], c.sigma[i]))
            else:
                line.append(format_number(float(np.ravel(c.values)[i])))
        body.append(line)
    widths = [max(len(h), *(len(r[k]) for r in body)) for k, h in enumerate(header)]
    out = [f"table {spec.name}", "  " + "  ".join(h.rjust(w) for h, w in zip(header, widths))]
    shown: list[int] = list(range(len(body)))
    if rows is not None and len(body) > rows:
        head = rows - rows // 2
        shown = [*range(head), -1, *range(len(body) - rows // 2, len(body))]
    for i in shown:
        if i == -1:
            out.append(f"  … {len(body) - (rows or 0):,} rows not shown (--rows {rows})")
        else:
            out.append("  " + "  ".join(v.rjust(w) for v, w in zip(body[i], widths)))
    return "\n".join(out)
