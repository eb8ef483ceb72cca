"""Representations of a reply: JSON (default), CSV, SVG, a SPICE netlist, one value as text.

Every operation offers JSON and, where it has them, further representations
(:data:`MEDIA_TYPES`). A client picks one in this order of precedence:

1. the path's suffix (``/v1/designs.csv``): an operation of its own per
   representation, whose reply has one media type -- what generated clients
   need, since they parse a reply by the first media type documented;
2. the ``format`` parameter (``?format=csv``), for browsers and spreadsheets;
3. the ``Accept`` header (content negotiation, RFC 9110 section 12.5.1);
   ``field=`` without ``format`` prefers ``text/plain``.

:func:`negotiate` makes that choice once per request; ``Accept`` matching none
of an operation's representations is a 406 problem listing them.

Numbers: a reply's computed figures are rounded to :data:`FIGURE_DIGITS`
significant digits (:func:`round_figures`); values a caller builds with or
sends back (part values, sections, poles and zeros, requirements, settings,
frequency grids) are exact.

CSV (RFC 4180): one header row, then rows, CRLF line ends, ``true``/``false``
for booleans, and every text cell that a spreadsheet would read as a formula
(one beginning with ``=``, ``+``, ``-``, ``@``, tab or carriage return, after
any spaces) prefixed with a single quote (OWASP, "CSV Injection").
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from typing import Any, Iterable, Mapping, Sequence

import numpy as np
from flask import Response
from werkzeug.datastructures import MIMEAccept

from service.errors import InvalidParameter
from service.values import FloatValues

JSON_MEDIA_TYPE = "application/json"
CSV_MEDIA_TYPE = "text/csv"
TEXT_MEDIA_TYPE = "text/plain"
SVG_MEDIA_TYPE = "image/svg+xml"
#: A SPICE netlist: no media type is registered for one; this name is in the unregistered ``x.`` tree of
#: RFC 6838 (section 3.4) and under ``text/`` so that browsers show it and clients read it as text.
SPICE_MEDIA_TYPE = "text/x.spice-netlist"

#: Representation name (the ``format`` parameter and the path suffix) -> media type.
MEDIA_TYPES: dict[str, str] = {
    "json": JSON_MEDIA_TYPE, "csv": CSV_MEDIA_TYPE, "svg": SVG_MEDIA_TYPE, "spice": SPICE_MEDIA_TYPE,
    "text": TEXT_MEDIA_TYPE,
}
#: Representations a ``field=`` selection can take.
SELECTION_FORMATS = ("text", "csv")

#: Significant digits of a computed figure in a reply (JSON and CSV).
FIGURE_DIGITS = 6


@dataclass(frozen=True)
class Representation:
    """The representation one request asked for.

    Attributes
    ----------
    name : str
        ``json``, ``csv``, ``svg``, ``spice`` or ``text`` (a key of :data:`MEDIA_TYPES`).
    field : str or None
        A ``field=`` path: the reply is that value of the JSON reply (as text or CSV).
    """

    name: str
    field: str | None = None

    @property
    def media_type(self) -> str:
        return MEDIA_TYPES[self.name]

    @property
    def produce(self) -> str:
        """What the view computes: ``json`` when a field is selected from the JSON reply, else :attr:`name`."""
        return "json" if self.field is not None else self.name


def _accepted(accept, offered: Sequence[str]) -> str | None:
    """The offered representation ``accept`` (a werkzeug ``MIMEAccept``) prefers; ties go to the first offered.

    No ``Accept`` header (or an empty one) accepts anything (RFC 9110 section 12.5.1).
    """
    if not accept:
        accept = MIMEAccept([("*/*", 1)])
    by_type = {MEDIA_TYPES[name]: name for name in offered}
    best = accept.best_match(list(by_type), default=None)
    return None if best is None else by_type[best]


def not_acceptable(offered: Sequence[str], accept_header: str, why: str = ""):
    """The 406 problem (a ``ProblemException``, raised by the caller) for an ``Accept`` header no representation matches."""
    from service.api.problems import ProblemException

    types = [MEDIA_TYPES[n] for n in offered]
    return ProblemException(
        406, f"No representation of this operation matches Accept: {accept_header!r}{why}. It answers in "
             f"{', '.join(types)}; or ask with ?format={'|'.join(offered)}.",
        slug="not-acceptable", title="Not Acceptable", extra={"available": types})


def negotiate(offered: Sequence[str], *, accept, accept_header: str = "", suffix: str | None = None,
              explicit: str | None = None, field: str | None = None,
              text_needs_field: bool = True, fields: Iterable[str] = ()) -> Representation:
    """Choose the representation of one request (see the module notes for the precedence).

    Parameters
    ----------
    offered : sequence of str
        The operation's representations, JSON first.
    accept : werkzeug.datastructures.MIMEAccept
    suffix : str, optional
        The representation named by the path (``/v1/designs.csv``).
    explicit : str, optional
        The ``format`` parameter, when given.
    field : str, optional
        The ``field=`` path, when given.
    text_needs_field : bool
        ``text`` is one selected value (True), or the operation has a text reply of its own (False).
    fields : iterable of str
        Top-level fields of the JSON reply (named in the messages).

    Raises
    ------
    InvalidParameter
        ``format`` contradicting the path's suffix; ``field`` with a representation that is not text or
        CSV; ``text`` without ``field`` (422, field ``format`` or ``field``).
    ProblemException
        406, when no offered representation matches ``Accept``.
    """
    if suffix is not None:
        if explicit is not None and explicit != suffix:
            raise InvalidParameter(f"format={explicit} contradicts the path, which asks for {suffix}: give one",
                                   field="format")
        name = suffix
    elif explicit is not None:
        name = explicit
    else:
        candidates = [n for n in offered if n in SELECTION_FORMATS] if field is not None else \
            [n for n in offered if not (n == "text" and text_needs_field)]
        if field is not None:
            candidates.sort(key=SELECTION_FORMATS.index)
        name = _accepted(accept, candidates)
        if name is None:
            raise not_acceptable(candidates or offered, accept_header,
                                 " (with field=, text/plain or text/csv)" if field is not None else "")
    if name not in offered:
        raise InvalidParameter(f"format {name} is not offered here: one of {', '.join(offered)}", field="format")
    if field is not None and name not in SELECTION_FORMATS:
        raise InvalidParameter(f"field selects one value as text (format=text) or a table (format=csv), not "
                               f"{name}", field="field")
    if name == "text" and field is None and text_needs_field:
        listed = ", ".join(fields)
        raise InvalidParameter("format=text answers one value: name it with field=<path>"
                               + (f" (top-level fields: {listed})" if listed else ""), field="field")
    return Representation(name, field)


# ----------------------------------------------------------------------------------------------- numbers

def round_figure(x: float, digits: int = FIGURE_DIGITS) -> float:
    """``x`` rounded to ``digits`` significant digits, as the nearest float64 (non-finite unchanged)."""
    if not math.isfinite(x) or x == 0.0:
        return x
    return float(f"{x:.{digits}g}")


def round_figure_list(values: list) -> list:
    """A list of floats, each rounded as :func:`round_figure` does (the same float64 bits), vectorized.

    Each value ``x`` is scaled by an exact power of ten ``10^k`` (``|k| <= 22``) to six integer digits,
    rounded to an integer and scaled back with one correctly rounded division or product -- the float64
    nearest the decimal, as the text route gives.  Values whose scaled fraction lies within 1e-6 of a half
    (where the scaling's own rounding could tip the integer), outside that range of ``k``, zero or
    non-finite take the text route one by one.
    """
    x = np.asarray(values, dtype=np.float64)
    ax = np.abs(x)
    usable = np.isfinite(ax) & (ax > 0)
    e = np.floor(np.log10(np.where(usable, ax, 1.0))).astype(np.int64)
    k = FIGURE_DIGITS - 1 - e
    up = 10.0 ** np.clip(k, 0, 22)
    down = 10.0 ** np.clip(-k, 0, 22)
    y = x * up / down
    r = np.round(y)
    out = r / up * down
    with np.errstate(invalid="ignore"):
        risky = ~usable | (np.abs(k) > 22) | (np.abs(np.abs(y - np.trunc(y)) - 0.5) < 1e-6) | ~np.isfinite(out)
    result = out.tolist()
    for i in np.flatnonzero(risky).tolist():
        result[i] = round_figure(values[i])
    return result


def _exact_trie(paths: Iterable[str]) -> dict:
    trie: dict = {}
    for path in paths:
        node = trie
        parts = path.split(".")
        for i, part in enumerate(parts):
            if i == len(parts) - 1:
                node[part] = True
            else:
                nxt = node.setdefault(part, {})
                if nxt is True:
                    break
                node = nxt
    return trie


def _rounded(node: Any, trie: Any) -> Any:
    if trie is True:
        return node
    if isinstance(node, float):
        return round_figure(node)
    if isinstance(node, dict):
        if not trie:
            return {k: _rounded(v, None) for k, v in node.items()}
        return {k: _rounded(v, trie.get(k, trie.get("*"))) for k, v in node.items()}
    if isinstance(node, list):
        sub = trie.get("*") if trie else None
        if sub is None and type(node) is FloatValues:          # floats by construction: rounded as a whole
            return FloatValues(round_figure_list(node))
        if sub is None and len(node) > 8 and all(type(v) is float for v in node):
            return round_figure_list(node)
        return [_rounded(v, sub) for v in node]
    return node


def round_figures(data: Any, exact: Iterable[str] = ()) -> Any:
    """A JSON value with every float rounded to :data:`FIGURE_DIGITS` significant digits except under ``exact``.

    ``exact`` holds dotted paths; ``*`` stands for any key or any list entry (``stages.*.components``).
    """
    return _rounded(data, _exact_trie(exact))


# ----------------------------------------------------------------------------------------------- CSV

#: First characters a spreadsheet reads as the start of a formula (OWASP, "CSV Injection").
FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")


def neutralized(text: str) -> str:
    """``text`` with a leading single quote when a spreadsheet would read it as a formula.

    A cell beginning (after any spaces) with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return is
    prefixed with ``'``, which spreadsheets show as text (OWASP, "CSV Injection"). Numbers the service
    writes are not text and are never changed.
    """
    return "'" + text if text.lstrip(" ").startswith(FORMULA_TRIGGERS) else text


def number_text(value: float | int, *, digits: int | None = None) -> str:
    """A number as a spreadsheet reads it: 4700.0 -> ``"4700"``, 1e-08 -> ``"1e-08"`` (shortest exact form).

    ``digits`` rounds to that many significant digits first.
    """
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    x = float(value)
    if not math.isfinite(x):
        return ""
    if digits is not None:
        x = round_figure(x, digits)
    if x.is_integer() and abs(x) < 1e15:
        return str(int(x))
    return repr(x)


def cell(value: Any, *, digits: int | None = None) -> str:
    """One CSV cell: ``""`` for null, ``true``/``false``, numbers in their shortest form, neutralized text."""
    if value is None:
        return ""
    if isinstance(value, (bool, np.bool_, int, float, np.integer, np.floating)):
        return number_text(value, digits=digits)
    if isinstance(value, (list, tuple)):
        return neutralized(" ".join(cell(v, digits=digits) for v in value))
    return neutralized(str(value))


def csv_text(columns: Mapping[str, Sequence[Any]], *, digits: int | None = None) -> str:
    """Columns of equal length -> RFC 4180 CSV: one header row, then one row per entry.

    Parameters
    ----------
    columns : mapping of str to sequence
        Column name -> values (numbers, booleans, text, None, lists).
    digits : int, optional
        Round numbers to this many significant digits (figures); None writes them exactly.
    """
    names = list(columns)
    lengths = {len(columns[n]) for n in names}
    if len(lengths) > 1:
        raise ValueError("columns differ in length")
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow([neutralized(n) for n in names])
    numeric = all(isinstance(columns[n], np.ndarray) and columns[n].dtype.kind in "fi" for n in names)
    if numeric and names:
        block = np.column_stack([np.asarray(columns[n], dtype=float) for n in names])
        np.savetxt(buf, block, delimiter=",", fmt=f"%.{digits}g" if digits else "%.17g", newline="\r\n")
    else:
        for row in zip(*(columns[n] for n in names)):
            writer.writerow([cell(v, digits=digits) for v in row])
    return buf.getvalue()


def csv_response(columns: Mapping[str, Sequence[Any]], *, filename: str, digits: int | None = None) -> Response:
    """A ``text/csv`` response offered as a download named ``filename``."""
    resp = Response(csv_text(columns, digits=digits), mimetype=CSV_MEDIA_TYPE)
    resp.headers["Content-Disposition"] = f'attachment; filename="{filename}"'
    return resp


def text_response(value: Any) -> Response:
    """One value as ``text/plain``: no trailing newline (a spreadsheet cell reads ``"6"``, not ``"6\\n"``)."""
    if value is None:
        text = ""
    elif isinstance(value, (bool, np.bool_, int, float, np.integer, np.floating)):
        text = number_text(value)
    else:
        text = str(value)
    return Response(text, mimetype=TEXT_MEDIA_TYPE)


def spice_response(netlist: str, *, filename: str = "filter.cir") -> Response:
    """A SPICE netlist (``text/x.spice-netlist``), shown inline and saved as ``filename``."""
    resp = Response(netlist, mimetype=SPICE_MEDIA_TYPE)
    resp.headers["Content-Disposition"] = f'inline; filename="{filename}"'
    return resp


def svg_response(svg: bytes) -> Response:
    """An SVG figure."""
    return Response(svg, mimetype=SVG_MEDIA_TYPE)


def content_doc(formats: Sequence[str], *, schema: str, description: str, example: Any = None) -> dict:
    """OpenAPI ``responses`` fragment: the 200 in JSON (component ``schema``) and every other representation.

    flask-smorest's ``@blp.doc`` replaces the 200's content when it merges, so the JSON media type is
    restated here, first (the one generated clients parse).
    """
    json_content: dict[str, Any] = {"schema": {"$ref": f"#/components/schemas/{schema}"}}
    if example is not None:
        json_content["example"] = example
    content: dict[str, Any] = {JSON_MEDIA_TYPE: json_content}
    for name in formats:
        if name != "json":
            content[MEDIA_TYPES[name]] = media_doc(name)
    return {"responses": {"200": {"description": description, "content": content}}}


#: What each non-JSON representation is, for the documentation.
REPRESENTATION_DOC = {
    "csv": "CSV (RFC 4180): one header row, then one row per entry; with field=, the selected value as a table.",
    "svg": "An SVG figure.",
    "spice": "The SPICE netlist of the whole filter (VIN in 0 AC 1, output node out); runs in ngspice batch mode.",
    "text": "One value of the JSON reply, named by field= (a number, true/false, text; empty for null), "
            "with no trailing newline.",
}


def media_doc(name: str) -> dict:
    """The OpenAPI media-type object of a non-JSON representation."""
    return {"schema": {"type": "string", "description": REPRESENTATION_DOC[name]}}


def alternative_content(*media_types: str, description: str, schema: str, example: Any = None) -> dict:
    """:func:`content_doc` by media type (kept for views that list media types)."""
    names = [n for n, mt in MEDIA_TYPES.items() if mt in media_types]
    return content_doc(names, schema=schema, description=description, example=example)
