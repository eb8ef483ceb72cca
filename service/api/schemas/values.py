"""Schemas of /v1/values/nearest."""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import Quantity
from service.api.schemas.common import ReplySchema, StrictSchema, one_of, representation_fields
from service.components import SERIES

NEAREST_FORMATS = ("json", "csv", "text")


class NearestRequestSchema(StrictSchema):
    """A component value and a preferred-number series."""

    value = Quantity(unit=("ohm", "F", "H"), required=True,
                     validate=ma.validate.Range(min=1e-15, max=1e15),
                     metadata={"description": "Component value in its SI unit (ohm, F or H): a number, or a string "
                               "such as \"4.87k\", \"4k7\", \"10nF\". From 1e-15 to 1e15.",
                               "example": "4.87k"})
    series = one_of(SERIES, description="IEC 60063 series.", load_default="E24", name="SeriesName")
    format = one_of(NEAREST_FORMATS, load_default="json", name="NearestFormat",
                    description="`json` (default), `csv` (one-row table) or `text` (the nearest value alone).")


NearestQuerySchema = NearestRequestSchema.from_dict(
    {"field": representation_fields(NEAREST_FORMATS, name="NearestFormat")["field"]}, name="NearestQuerySchema")


class FormattedValuesSchema(ma.Schema):
    nearest = ma.fields.String()
    below = ma.fields.String()
    above = ma.fields.String()


class NearestSchema(ReplySchema):
    """Nearest preferred values of one value."""

    EXACT = ("value", "nearest", "below", "above")

    value = ma.fields.Float(metadata={"description": "The value asked about (SI unit)."})
    series = ma.fields.String()
    nearest = ma.fields.Float(metadata={"description": "Nearest preferred value by ratio."})
    below = ma.fields.Float(metadata={"description": "Largest preferred value not above `value`."})
    above = ma.fields.Float(metadata={"description": "Smallest preferred value not below `value`."})
    nearest_error = ma.fields.Float(metadata={"description": "(nearest - value) / value."})
    below_error = ma.fields.Float(metadata={"description": "(below - value) / value."})
    above_error = ma.fields.Float(metadata={"description": "(above - value) / value."})
    formatted = ma.fields.Nested(FormattedValuesSchema, metadata={
        "description": "nearest/below/above in engineering notation, e.g. \"4.7k\"."})
