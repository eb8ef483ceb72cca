"""GET /v1/catalog: what this running service offers, from the registries it dispatches through."""

from __future__ import annotations

import dataclasses

import marshmallow as ma
from flask import current_app
from flask.views import MethodView

from service.api.extension import Blueprint
from service.api.schemas.common import ReplySchema, StrictSchema
from service.approximation import ResponseType, SectionKind, all_family_info
from service.components import SERIES, SERIES_TOLERANCE, series_mantissas
from service.realization.topologies import describe_all, describe_auto
from service.response.verification import TOLERANCE_DB
from service.workflows.requirement import OPEN_BAND_RULE, REFERENCE_GAIN_RULE
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


class FamilySchema(ma.Schema):
    family = ma.fields.String()
    cutoff_meaning = ma.fields.String(metadata={"description": "What `cutoff_hz` of a by-order design is."})
    cutoff_loss = ma.fields.String()
    needs_ripple = ma.fields.Boolean(metadata={"description": "By order, passband_ripple_db is needed."})
    needs_attenuation = ma.fields.Boolean(metadata={"description": "By order, stopband_attenuation_db is needed."})
    max_order = ma.fields.Integer(metadata={"description": "Highest order (accuracy limit, and ROLLOFF_MAX_ORDER)."})
    even_only = ma.fields.Boolean()
    order_selection = ma.fields.String(metadata={"description": "`closed form` or `search`."})
    reference = ma.fields.String()


class AutoTopologySchema(ma.Schema):
    rule = ma.fields.String(metadata={"description": "The rule, in words."})
    limits = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Raw(), metadata={
        "description": "The limits it applies (max_q per topology, spreads, sum of |S^Q|, the op-amp's shift)."})
    candidates = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.List(ma.fields.String()), metadata={
        "description": "Topologies considered per section kind, in order of preference."})


class TopologySchema(ma.Schema):
    name = ma.fields.String()
    kinds = ma.fields.List(ma.fields.String(), metadata={"description": "Section kinds it realizes."})
    order = ma.fields.Integer(metadata={"description": "Section order (1 or 2)."})
    strategies = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.List(ma.fields.String()),
                                metadata={"description": "Design strategies per section kind (first: default)."})
    arbitrary_gain = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.List(ma.fields.String()),
                                    metadata={"description": "Strategies that can set any gain, per kind."})
    opamps = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Integer(),
                            metadata={"description": "Op-amps per stage, per kind."})
    reference = ma.fields.String(metadata={"description": "Published source of its design equations."})


class VerificationRulesSchema(ma.Schema):
    reference = ma.fields.String(metadata={"description": "The gain loss is measured from."})
    open_bands = ma.fields.String(metadata={"description": "How far open passbands and stopbands are checked."})
    numerical_tolerance_db = ma.fields.Float(metadata={"description": "Margins within this of 0 dB are 0 (met)."})
    method = ma.fields.String()
    stage_numbering = ma.fields.String()


class CatalogSchema(ReplySchema):
    api_version = ma.fields.String()
    responses = ma.fields.List(ma.fields.String(), metadata={"description": "Response types."})
    families = ma.fields.List(ma.fields.Nested(FamilySchema))
    section_kinds = ma.fields.List(ma.fields.String())
    topologies = ma.fields.List(ma.fields.Nested(TopologySchema))
    auto_topology = ma.fields.Nested(AutoTopologySchema, metadata={
        "description": "How `topology: \"auto\"` chooses a stage's topology: the rule and its limits."})
    series = ma.fields.List(ma.fields.Nested(SeriesSchema))
    limits = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Nested(LimitSchema))
    endpoints = ma.fields.List(ma.fields.String(), metadata={"description": "Operations this service answers."})
    verification = ma.fields.Nested(VerificationRulesSchema, metadata={
        "description": "What \"meets\" means, for every verdict the service gives (designs, edited documents, "
                       "response masks, Monte Carlo trials)."})


def build_catalog(settings) -> dict:
    """The catalog document (pure function of the registries and the settings)."""
    rules = sorted({f"{m} {r.rule}" for r in current_app.url_map.iter_rules() if r.rule.startswith("/v1")
                    for m in r.methods - {"HEAD", "OPTIONS"}})
    families = []
    for info in all_family_info():
        entry = {f.name: getattr(info, f.name) for f in dataclasses.fields(info)}
        entry["family"] = info.family.value
        entry["max_order"] = min(info.max_order, settings.max_order)
        families.append(entry)
    return {
        "api_version": API_VERSION,
        "service_version": SERVICE_VERSION,
        "responses": [r.value for r in ResponseType],
        "families": families,
        "section_kinds": [k.value for k in SectionKind],
        "topologies": describe_all(),
        "auto_topology": describe_auto(),
        "series": [{"name": s, "values_per_decade": len(series_mantissas(s)), "tolerance": SERIES_TOLERANCE[s],
                    "values": list(series_mantissas(s))} for s in SERIES],
        "limits": settings.limits(),
        "endpoints": rules,
        "verification": {
            "reference": REFERENCE_GAIN_RULE, "open_bands": OPEN_BAND_RULE, "numerical_tolerance_db": TOLERANCE_DB,
            "method": "every band checked whole: branch-and-bound over interval bounds of the gain and delay from the "
                      "circuit's poles and zeros (with its op-amp models); a pole in the closed right half-plane "
                      "makes the circuit unstable, meeting nothing",
            "stage_numbering": "stage numbers count from 1 (fields named stage or number, and messages); field "
                               "paths in problems count array entries from 0 (stages[0] is stage 1)",
        },
    }


class NoQuerySchema(StrictSchema):
    """No query parameters (any given is rejected)."""


@blp.route("/catalog")
class Catalog(MethodView):
    @blp.arguments(NoQuerySchema, location="query", unknown="raise")
    @blp.response(200, CatalogSchema)
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="An unknown query parameter was given.")
    @blp.doc(summary="What this service offers",
             description="Service and API versions, response types, approximation families (what their cutoff "
                         "means, highest order), section kinds, topologies with the section kinds each realizes and "
                         "their strategies, preferred-number series, the configured limits (with the environment "
                         "variable of each) and the operations answered. Built from the same registries the service "
                         "dispatches through.")
    def get(self, _args):
        return build_catalog(current_app.config["ROLLOFF_SETTINGS"])
