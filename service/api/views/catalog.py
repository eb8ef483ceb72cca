"""GET /v1/catalog: what this running service offers, from the registries it dispatches through."""

from __future__ import annotations

import dataclasses

import marshmallow as ma
from flask import current_app
from flask.views import MethodView

from service.api.extension import Blueprint
from service.api.formats import FIGURE_DIGITS
from service.api.schemas.common import ReplySchema, Scalar, StrictSchema, representation_fields
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
    value = Scalar(metadata={"description": "Configured value."})
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


class AutoTopologyLimitsSchema(ma.Schema):
    max_q = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Float(), metadata={
        "description": "Highest section Q each topology is chosen for."})
    max_resistor_spread = ma.fields.Float(metadata={"description": "Largest ratio of a stage's resistors."})
    max_capacitor_spread = ma.fields.Float(metadata={"description": "Largest ratio of a stage's capacitors."})
    max_q_sensitivity = ma.fields.Float(metadata={"description": "Largest sum of |S^Q| over a stage's parts."})
    max_opamp_shift = ma.fields.Float(metadata={"description": "Largest relative f0 or Q shift the op-amp may "
                                                               "cause."})
    gbw_spread = ma.fields.Float(metadata={"description": "Relative GBW spread the op-amp figures allow for."})


class AutoTopologySchema(ma.Schema):
    rule = ma.fields.String(metadata={"description": "The rule, in words."})
    limits = ma.fields.Nested(AutoTopologyLimitsSchema, metadata={
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


class NumberRulesSchema(ma.Schema):
    figures_significant_digits = ma.fields.Integer(metadata={
        "description": "Computed figures (losses, gains, margins, errors, percentiles ...) are rounded to this many "
                       "significant digits."})
    exact = ma.fields.String(metadata={"description": "What is given exactly."})


class VerificationRulesSchema(ma.Schema):
    reference = ma.fields.String(metadata={"description": "The gain loss is measured from."})
    open_bands = ma.fields.String(metadata={"description": "How far open passbands and stopbands are checked."})
    numerical_tolerance_db = ma.fields.Float(metadata={"description": "Margins within this of 0 dB are 0 (met)."})
    method = ma.fields.String()
    stage_numbering = ma.fields.String()


class CatalogSchema(ReplySchema):
    EXACT = ("*",)

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
    fields = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.List(ma.fields.String()), metadata={
        "description": "Per operation (\"GET /v1/designs\"), the top-level fields of its JSON reply: where a "
                       "field= path starts."})
    verification = ma.fields.Nested(VerificationRulesSchema, metadata={
        "description": "What \"meets\" means, for every verdict the service gives (designs, edited documents, "
                       "response masks, Monte Carlo trials)."})
    numbers = ma.fields.Nested(NumberRulesSchema, metadata={"description": "How numbers in replies are rounded."})


def reply_fields() -> dict[str, list[str]]:
    """``"METHOD /path"`` -> top-level fields of the JSON reply, for every operation that offers field=."""
    from service.api.extension import Blueprint as RepliesBlueprint

    out: dict[str, list[str]] = {}
    for blueprint in current_app.blueprints.values():
        if not isinstance(blueprint, RepliesBlueprint):
            continue
        for rule in current_app.url_map.iter_rules():
            if not rule.endpoint.startswith(blueprint.name + "."):
                continue
            offers = blueprint.offers(rule.endpoint.split(".", 1)[1])
            for method, offer in offers.items():
                if "text" in offer.formats and "json" in offer.formats:
                    out[f"{method} {rule.rule}"] = list(offer.fields)
    return dict(sorted(out.items()))


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
        "fields": reply_fields(),
        "verification": {
            "reference": REFERENCE_GAIN_RULE, "open_bands": OPEN_BAND_RULE, "numerical_tolerance_db": TOLERANCE_DB,
            "method": "every band checked whole: branch-and-bound over interval bounds of the gain and delay from the "
                      "circuit's poles and zeros (with its op-amp models); a pole in the closed right half-plane "
                      "makes the circuit unstable, meeting nothing",
            "stage_numbering": "stage numbers count from 1 (fields named stage or number, and messages); field "
                               "paths in problems count array entries from 0 (stages[0] is stage 1); field= "
                               "paths count list entries from 1 (stages.1 is stage 1)",
        },
        "numbers": {
            "figures_significant_digits": FIGURE_DIGITS,
            "exact": "part values, sections, poles, zeros and gains of transfer functions, requirements, settings, "
                     "frequency and time grids, seeds",
        },
    }


#: The catalog's query: only the representation, ``format`` (json or text) and ``field``.
CatalogQuerySchema = StrictSchema.from_dict(representation_fields(("json", "text"), name="CatalogFormat"), name="CatalogQuerySchema")


@blp.route("/catalog")
class Catalog(MethodView):
    @blp.arguments(CatalogQuerySchema, location="query", unknown="raise")
    @blp.reply(CatalogSchema, "text", description="The catalog (JSON), or one value as text "
                                                  "(field=limits.max_order.value).")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="An unknown query parameter was given.")
    @blp.doc(summary="What this service offers",
             description="Service and API versions, response types, approximation families (what their cutoff "
                         "means, highest order), section kinds, topologies with the section kinds each realizes and "
                         "their strategies, preferred-number series, the configured limits (with the environment "
                         "variable of each) and the operations answered. Built from the same registries the service "
                         "dispatches through.", operationId="get_catalog")
    def get(self, _args):
        return build_catalog(current_app.config["ROLLOFF_SETTINGS"])
