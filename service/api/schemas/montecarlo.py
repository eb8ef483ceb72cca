"""Monte Carlo options shared by /v1/tolerance and the yield of /v1/designs and /v1/approximations/compare."""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import StrictInteger
from service.api.schemas.common import ENUMS, StrictSchema, one_of

DISTRIBUTIONS = ["uniform", "gaussian"]
ENUMS.setdefault("DistributionName", list(DISTRIBUTIONS))


class DistributionField(ma.fields.Field):
    """``"uniform"``, ``"gaussian"``, or one per kind ``{"resistor", "capacitor", "opamp"}``."""

    KINDS = ("resistor", "capacitor", "opamp")

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, str):
            if value not in DISTRIBUTIONS:
                raise ma.ValidationError(f"expected one of {', '.join(DISTRIBUTIONS)}")
            return value
        if isinstance(value, dict):
            errors = {}
            for key, v in value.items():
                if key not in self.KINDS:
                    errors[key] = [f"unknown part kind: expected {', '.join(self.KINDS)}"]
                elif v not in DISTRIBUTIONS:
                    errors[key] = [f"expected one of {', '.join(DISTRIBUTIONS)}"]
            if errors:
                raise ma.ValidationError(errors)
            return dict(value)
        raise ma.ValidationError("expected \"uniform\", \"gaussian\" or {resistor, capacitor, opamp: ...}")

    def openapi_properties(self) -> dict:
        return {"oneOf": [{"$ref": "#/components/schemas/DistributionName"},
                          {"$ref": "#/components/schemas/DistributionByKind"}]}


class DistributionByKindSchema(StrictSchema):
    """One distribution per part kind; a kind left out is gaussian (documentation of :class:`DistributionField`,
    whose one type in generated clients this is)."""

    resistor = one_of(DISTRIBUTIONS, name="DistributionName", description="Resistors' distribution.")
    capacitor = one_of(DISTRIBUTIONS, name="DistributionName", description="Capacitors' distribution.")
    opamp = one_of(DISTRIBUTIONS, name="DistributionName", description="Op-amps' gain-bandwidth distribution.")


#: Schemas referenced by name from custom fields (registered as OpenAPI components by the app).
REFERENCED_COMPONENTS = {"DistributionByKind": DistributionByKindSchema}


class TemperatureSchema(StrictSchema):
    min_c = ma.fields.Float(required=True, validate=ma.validate.Range(min=-273.15, max=500),
                            metadata={"description": "Lowest board temperature (°C)."})
    max_c = ma.fields.Float(required=True, validate=ma.validate.Range(min=-273.15, max=500),
                            metadata={"description": "Highest board temperature (°C)."})

    @ma.validates_schema
    def _ordered(self, data, **kwargs):
        if "min_c" in data and "max_c" in data and data["min_c"] > data["max_c"]:
            raise ma.ValidationError("min_c must not exceed max_c", "max_c")


class MonteCarloOptionsSchema(StrictSchema):
    """How boards are drawn: the options of /v1/tolerance (without its grid and figures)."""

    trials = StrictInteger(load_default=1000, validate=ma.validate.Range(min=1), metadata={
        "description": "Monte Carlo boards per check, at most ROLLOFF_MAX_TRIALS; the whole search's estimated "
                       "work at most ROLLOFF_MAX_WORK (a problem over the limit says how many trials fit)."})
    seed = StrictInteger(load_default=0, validate=ma.validate.Range(min=0, max=2**63 - 1), metadata={
        "description": "Seed of the boards: /v1/tolerance with the same trials, seed and options draws the same "
                       "boards."})
    distribution = DistributionField(load_default="gaussian", metadata={
        "description": "`uniform` within ±tolerance, or `gaussian` with the tolerance at 3σ (common practice); "
                       "or one per kind {resistor, capacitor, opamp}."})
    temperature = ma.fields.Nested(TemperatureSchema, metadata={
        "description": "Board temperature range: one temperature per board, uniform over it."})
    tempco_ppm_per_c = ma.fields.Dict(
        keys=ma.fields.String(validate=ma.validate.Length(min=1, max=32)),
        values=ma.fields.Float(validate=ma.validate.Range(min=0, max=1e5)),
        validate=ma.validate.Length(max=256), metadata={
            "description": "Temperature-coefficient bounds (ppm/°C) by ref (\"C3\"), dielectric (\"C0G\") or kind."})
    gbw_spread = ma.fields.Float(validate=ma.validate.Range(min=0, max=0.5), metadata={
        "description": "Relative op-amp gain-bandwidth tolerance (0.3 = ±30 %)."})


class YieldTargetSchema(MonteCarloOptionsSchema):
    """A yield target and how its boards are drawn."""

    target = ma.fields.Float(required=True, validate=ma.validate.Range(
        min=0, max=1, min_inclusive=False, max_inclusive=False,
        error="Must lie strictly between 0 and 1 (the share of boards that must meet the requirement)."),
        metadata={"description": "Share of boards that must meet the requirement, strictly between 0 and 1; "
                                 "reached when the lower end of the 95 % Wilson interval of the confirming Monte "
                                 "Carlo run is at or above it."})


MC_KEYS = ("trials", "seed", "distribution", "temperature", "tempco_ppm_per_c", "gbw_spread")
