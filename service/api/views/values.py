"""GET/POST /v1/values/nearest: nearest preferred values (IEC 60063)."""

from __future__ import annotations

from flask.views import MethodView

from service.api.extension import Blueprint, representation
from service.api.formats import csv_response, text_response
from service.api.schemas.common import representation_query
from service.api.schemas.values import NEAREST_FORMATS, NearestQuerySchema, NearestRequestSchema, NearestSchema
from service.components import nearest_preferred
from service.units import format_quantity

blp = Blueprint("values", __name__, url_prefix="/v1/values",
                description="Preferred component values (IEC 60063 E series).")

_DESCRIPTION = """\
The nearest preferred value of a component value in an IEC 60063 series
(E3, E6, E12, E24, E48, E96, E192, any decade), with the next value below and
above and the relative error of each. Nearest is by ratio (logarithmic
distance). The series are the values the standard lists (E24's 2.7, 3.0, 3.3,
3.6, 3.9, 4.3, 4.7, 8.2; E192's 9.20), not the rounded formula.

Example (Larkspur Fluidics PM-7, accelerometer anti-aliasing stage): a design
equation asks for 4.87 kΩ; `value=4.87k&series=E24` answers 4.7 kΩ.

`format=csv` returns a one-row table; `format=text` the nearest value alone as
a plain number, for a spreadsheet cell's web query (or another value with
`field=`, e.g. `field=above`).
"""


def _answer(args: dict):
    found = nearest_preferred(args["value"], args["series"])
    body = {
        "value": found.value, "series": found.series, "nearest": found.nearest, "below": found.below,
        "above": found.above, "nearest_error": found.nearest_error, "below_error": found.below_error,
        "above_error": found.above_error,
        "formatted": {k: format_quantity(getattr(found, k)) for k in ("nearest", "below", "above")},
    }
    fmt = representation().produce
    if fmt == "text":
        return text_response(found.nearest)
    if fmt == "csv":
        columns = {k: [body[k]] for k in ("value", "series", "nearest", "below", "above",
                                           "nearest_error", "below_error", "above_error")}
        return csv_response(columns, filename="nearest.csv")
    return body


_EXAMPLE = {
    "value": 4870.0, "series": "E24", "nearest": 4700.0, "below": 4700.0, "above": 5100.0,
    "nearest_error": -0.0349, "below_error": -0.0349, "above_error": 0.0472,
    "formatted": {"nearest": "4.7k", "below": "4.7k", "above": "5.1k"}, "service_version": "0.1.0"}

_REPLY = dict(description="Nearest preferred values (JSON), a one-row CSV table, or the nearest value as text.",
              example=_EXAMPLE, text_needs_field=False)
NearestRepresentation = representation_query("NearestRepresentation", NEAREST_FORMATS)


@blp.route("/nearest")
class Nearest(MethodView):
    @blp.arguments(NearestQuerySchema, location="query", unknown="raise")
    @blp.reply(NearestSchema, *NEAREST_FORMATS[1:], **_REPLY)
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="A field is missing or invalid.")
    @blp.doc(summary="Nearest preferred value (query parameters)", description=_DESCRIPTION,
             operationId="find_nearest_value_by_query")
    def get(self, args):
        return _answer(args)

    @blp.arguments(NearestRepresentation, location="query", unknown="raise")
    @blp.arguments(NearestRequestSchema, example={"value": "4.87k", "series": "E24"})
    @blp.reply(NearestSchema, *NEAREST_FORMATS[1:], **_REPLY)
    @blp.alt_response(400, response="BAD_REQUEST", description="The body is not valid JSON.")
    @blp.alt_response(413, response="REQUEST_ENTITY_TOO_LARGE", description="The body is too large.")
    @blp.alt_response(415, response="UNSUPPORTED_MEDIA_TYPE", description="The body is not JSON.")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="A field is missing or invalid.")
    @blp.doc(summary="Nearest preferred value (JSON body)", description=_DESCRIPTION,
             operationId="find_nearest_value")
    def post(self, _query, args):
        return _answer(args)
