"""Content negotiation for tables: JSON (default), CSV, plain text.

A view that returns a table builds it once as ordered columns; :func:`csv_response`
writes one row per entry. Spreadsheets fetch ``format=csv``; a cell fetches
``format=text`` for a single number.
"""

from __future__ import annotations

import csv
import io
from typing import Any, Mapping, Sequence

import numpy as np
from flask import Response

CSV_MEDIA_TYPE = "text/csv"
TEXT_MEDIA_TYPE = "text/plain"
SVG_MEDIA_TYPE = "image/svg+xml"


def _cell(value: Any) -> Any:
    if value is None:
        return ""
    if isinstance(value, (float, np.floating)):
        return repr(float(value))
    if isinstance(value, (list, tuple)):
        return " ".join(str(_cell(v)) for v in value)
    return value


def csv_text(columns: Mapping[str, Sequence[Any]]) -> str:
    """Columns of equal length -> CSV text with a header row (floats in full precision)."""
    names = list(columns)
    lengths = {len(columns[n]) for n in names}
    if len(lengths) > 1:
        raise ValueError("columns differ in length")
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(names)
    numeric = all(isinstance(columns[n], np.ndarray) and columns[n].dtype.kind in "fi" for n in names)
    if numeric and names:
        block = np.column_stack([np.asarray(columns[n], dtype=float) for n in names])
        np.savetxt(buf, block, delimiter=",", fmt="%.17g")
    else:
        for row in zip(*(columns[n] for n in names)):
            writer.writerow([_cell(v) for v in row])
    return buf.getvalue()


def csv_response(columns: Mapping[str, Sequence[Any]], *, filename: str) -> Response:
    """A ``text/csv`` response offered as a download named ``filename``."""
    resp = Response(csv_text(columns), mimetype=CSV_MEDIA_TYPE)
    resp.headers["Content-Disposition"] = f'inline; filename="{filename}"'
    return resp


def text_response(value: Any) -> Response:
    """A bare value as ``text/plain`` (no trailing newline), for spreadsheet cells."""
    return Response(str(_cell(value)), mimetype=TEXT_MEDIA_TYPE)


def svg_response(svg: bytes) -> Response:
    """An SVG figure."""
    return Response(svg, mimetype=SVG_MEDIA_TYPE)


def alternative_content(*media_types: str, description: str, schema: str, example: Any = None) -> dict:
    """OpenAPI ``responses`` fragment documenting the 200 response in JSON and other media types.

    flask-smorest's ``@blp.doc`` replaces the 200's content when it merges, so
    the JSON media type (with the component schema ``schema``) is restated here.
    """
    json_content: dict[str, Any] = {"schema": {"$ref": f"#/components/schemas/{schema}"}}
    if example is not None:
        json_content["example"] = example
    content: dict[str, Any] = {"application/json": json_content}
    for mt in media_types:
        content[mt] = {"schema": {"type": "string", "format": "binary"} if mt == SVG_MEDIA_TYPE else {"type": "string"}}
    return {"responses": {"200": {"description": description, "content": content}}}
