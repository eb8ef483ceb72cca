"""GET /v1/catalog: what this running service offers, from the registries it dispatches through."""

from __future__ import annotations

import marshmallow as ma
from flask import current_app
from flask.views import MethodView

from service.api.extension import Blueprint
from service.api.schemas.common import ReplySchema, StrictSchema
from service.components import SERIES, SERIES_TOLERANCE, series_mantissas
from service.version import API_VERSION, SERVICE_VERSION

blp = Blueprint("catalog", __name__, url_prefix="/v1", description="What the service offers.")


class SeriesSchema(ma.Schema):
    name = ma.fields.String()
    values_per_decade = ma.fields.Integer()
    tolerance = ma.fields.Float(metadata={"description": "Tolerance IEC 60063 associates with the series."})
    values = ma.fields.List(ma.fields.Float(), metadata={"description": "The listed values of one decade."})


class LimitSchema(ma.Schema):
    value = ma.fields.Raw(metadata={"description": "Configured value."})
    setting = ma.fields.String(metadata={"description": "Environment variable that sets it."})
    description = ma.fields.String()


class CatalogSchema(ReplySchema):
    api_version = ma.fields.String()
    series = ma.fields.List(ma.fields.Nested(SeriesSchema))
    limits = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Nested(LimitSchema))
    endpoints = ma.fields.List(ma.fields.String(), metadata={"description": "Operations this service answers."})


def build_catalog(settings) -> dict:
    """The catalog document (pure function of the registries and the settings)."""
    rules = sorted({f"{m} {r.rule}" for r in current_app.url_map.iter_rules() if r.rule.startswith("/v1")
                    for m in r.methods - {"HEAD", "OPTIONS"}})
    return {
        "api_version": API_VERSION,
        "service_version": SERVICE_VERSION,
        "series": [{"name": s, "values_per_decade": len(series_mantissas(s)), "tolerance": SERIES_TOLERANCE[s],
                    "values": list(series_mantissas(s))} for s in SERIES],
        "limits": settings.limits(),
        "endpoints": rules,
    }


class NoQuerySchema(StrictSchema):
    """No query parameters (any given is rejected)."""


@blp.route("/catalog")
class Catalog(MethodView):
    @blp.arguments(NoQuerySchema, location="query", unknown="raise")
    @blp.response(200, CatalogSchema)
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="An unknown query parameter was given.")
    @blp.doc(summary="What this service offers",
             description="Service and API versions, preferred-number series, the configured limits (with the "
                         "environment variable of each) and the operations answered. Built from the same "
                         "registries the service dispatches through.")
    def get(self, _args):
        return build_catalog(current_app.config["ROLLOFF_SETTINGS"])
