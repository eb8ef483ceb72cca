"""Plain-text renderings of result tables (CSV)."""

from __future__ import annotations

import io
from typing import Mapping

import numpy as np


def table_to_csv(table: Mapping[str, np.ndarray], float_format: str = "%.10g") -> str:
    """Render an ordered column table as CSV text (header row, then a row per index).

    Numeric columns are formatted with ``float_format`` (default 10 significant
    digits); NaN becomes an empty cell; other columns with :class:`str`.

    Parameters
    ----------
    table : mapping of str -> 1-D array, all of one length
    """
    names = list(table)
    cols = [np.asarray(table[n]) for n in names]
    n = cols[0].shape[0] if cols else 0
    if any(c.shape[0] != n for c in cols):
        raise ValueError("table columns differ in length")
    if n and all(c.dtype.kind in "fiu" for c in cols):
        # all numeric: one %-format over the row-major values (fast path)
        data = np.column_stack([c.astype(float) for c in cols])
        row = ",".join([float_format] * len(cols)) + "\r\n"
        body = (row * n) % tuple(data.ravel().tolist())
        body = body.replace("nan", "")
        return ",".join(names) + "\r\n" + body
    text_cols = []
    for c in cols:
        if c.dtype.kind in "fiu":
            c = c.astype(float)
            s = np.char.mod(float_format, c)
            s = np.where(np.isnan(c), "", s)
        elif c.dtype.kind == "b":
            s = np.where(c, "true", "false")
        else:
            s = np.array(["" if v is None else str(v) for v in c.tolist()], dtype=object)
            s = np.array([('"' + v.replace('"', '""') + '"') if any(ch in v for ch in ',"\n') else v
                          for v in s], dtype=object)
        text_cols.append(np.asarray(s, dtype=object))
    out = io.StringIO()
    out.write(",".join(names) + "\r\n")
    if n:
        rows = text_cols[0]
        for c in text_cols[1:]:
            rows = rows + "," + c
        out.write("\r\n".join(rows.tolist()))
        out.write("\r\n")
    return out.getvalue()
