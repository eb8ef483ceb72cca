"""Schemas of /v1/tolerance."""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import Quantity, StrictInteger
from service.api.schemas.common import ReplySchema, StrictSchema, one_of
from service.api.schemas.designs import DesignDocumentSchema
from service.api.schemas.montecarlo import DISTRIBUTIONS, DistributionField, TemperatureSchema  # noqa: F401
from service.api.schemas.responses import FrequenciesField, MaskField, frequencies_from, mask_from
from service.workflows import DesignDocument, ToleranceRequest

class ToleranceRequestSchema(StrictSchema):
    design = ma.fields.Nested(DesignDocumentSchema, required=True, metadata={
        "description": "A design document from /v1/designs (each part's tolerance, or 1 % R / 5 % C)."})
    trials = StrictInteger(load_default=1000, validate=ma.validate.Range(min=1), metadata={
        "description": "Monte Carlo trials, at most ROLLOFF_MAX_TRIALS (see the catalog); the run's estimated work "
                       "(trials x frequency points x the circuit's cost, plus each trial's verification) at most "
                       "ROLLOFF_MAX_WORK — a problem over the limit says how many trials fit."})
    seed = StrictInteger(load_default=0, validate=ma.validate.Range(min=0, max=2**63 - 1), metadata={
        "description": "Same request and seed, same numbers."})
    distribution = DistributionField(load_default="gaussian", metadata={
        "description": "`uniform` within ±tolerance, or `gaussian` with the tolerance at 3σ (common practice); "
                       "or one per kind {resistor, capacitor, opamp}."})
    temperature = ma.fields.Nested(TemperatureSchema, metadata={
        "description": "Board temperature range: one temperature per trial, uniform over it."})
    tempco_ppm_per_c = ma.fields.Dict(
        keys=ma.fields.String(validate=ma.validate.Length(min=1, max=32)),
        values=ma.fields.Float(validate=ma.validate.Range(min=-1e5, max=1e5)),
        validate=ma.validate.Length(max=256), metadata={
            "description": "Temperature-coefficient bounds (ppm/°C) by ref (\"C3\"), dielectric (\"C0G\") or kind."})
    gbw_spread = ma.fields.Float(validate=ma.validate.Range(min=0, max=0.5), metadata={
        "description": "Relative op-amp gain-bandwidth tolerance (0.3 = ±30 %)."})
    frequencies = FrequenciesField(metadata={
        "description": "Grid of the percentiles: {start_hz, stop_hz, points, spacing} or a list (Hz); default 501 "
                       "log-spaced points around the stages' frequencies."})
    mask = MaskField(metadata={"description": "What each trial is verified against for the yield (default: the "
                                              "design's requirement): requirement fields or segments."})
    sensitivity_frequencies_hz = ma.fields.List(
        Quantity(unit="Hz", validate=ma.validate.Range(min=0, max=1e10)), validate=ma.validate.Length(max=64),
        metadata={"description": "Where to report the magnitude sensitivities (default: the mask edges)."})
    include_trials = StrictInteger(load_default=0, validate=ma.validate.Range(min=0, max=1000), metadata={
        "description": "Return the sampled part values and figures of the first N trials."})
    format = one_of(["json", "csv", "svg"], load_default="json",
                    description="`csv`: percentiles per frequency; `svg`: the magnitude envelope with the mask.")

    @ma.post_load
    def _typed(self, data, **kwargs):
        return {"request": ToleranceRequest(
            document=DesignDocument.from_json(data["design"], "design"), trials=data["trials"], seed=data["seed"],
            distribution=data["distribution"], temperature=data.get("temperature"),
            tempco_ppm_per_c=data.get("tempco_ppm_per_c"), gbw_spread=data.get("gbw_spread"),
            frequencies=frequencies_from(data.get("frequencies")), mask=mask_from(data.get("mask")),
            sensitivity_frequencies_hz=tuple(data.get("sensitivity_frequencies_hz") or ()),
            include_trials=data["include_trials"], reply=data["format"]),
            "format": data["format"]}


class FloatList(ma.fields.List):
    """A list of numbers in the reply, documented as ``List(Float)``.

    The computation hands over plain Python floats already (``ndarray.tolist``),
    so the reply is encoded without a per-number Python call; anything else is
    serialized item by item as a ``List(Float)``.
    """

    def __init__(self, **kwargs):
        super().__init__(ma.fields.Float(), **kwargs)

    def _serialize(self, value, attr, obj, **kwargs):
        if type(value) is list and all(type(v) is float for v in value[:1]):
            return value
        return super()._serialize(value, attr, obj, **kwargs)


class PercentileRows(ma.fields.Dict):
    """``{percentile name: [number per frequency]}``, documented as ``Dict(String, List(Float))``."""

    def __init__(self, **kwargs):
        super().__init__(keys=ma.fields.String(), values=FloatList(), **kwargs)

    def _serialize(self, value, attr, obj, **kwargs):
        if type(value) is dict and all(type(v) is list for v in value.values()):
            return {k: self.value_field._serialize(v, None, None) for k, v in value.items()}
        return super()._serialize(value, attr, obj, **kwargs)


class ToleranceSchema(ReplySchema):
    frequency_hz = FloatList()
    magnitude_db_percentiles = PercentileRows(metadata={"description": "min, p0.135, p2.5, p50, p97.5, p99.865, max "
                                                                       "of the magnitude (dB), each over frequency."})
    phase_deg_percentiles = PercentileRows()
    group_delay_s_percentiles = PercentileRows()
    nominal_magnitude_db = FloatList()
    metrics = ma.fields.Dict(metadata={"description": "Per metric: mean, std and percentiles (−3 dB frequency, "
                                                      "passband ripple, stopband attenuation, each stage's f0 and Q)."})
    yield_ = ma.fields.Dict(attribute="yield", data_key="yield", allow_none=True, metadata={
        "description": "{fraction, ci95_low, ci95_high (Wilson score interval), trials, failures_by_criterion}."})
    sensitivity = ma.fields.List(ma.fields.Dict(), metadata={
        "description": "Per part, ranked: {ref, stage, f0, q, magnitude_db_per_pct}."})
    worst_case = ma.fields.List(ma.fields.Dict(), allow_none=True, metadata={
        "description": "Per mask edge: the corner from the sensitivity signs and its loss, against the Monte Carlo "
                       "extremes."})
    trials = ma.fields.List(ma.fields.Dict(), allow_none=True, metadata={
        "description": "With include_trials: the sampled values {ref: value} and figures of each trial."})
    trial_count = ma.fields.Integer()
    distribution = ma.fields.Dict()
    seed = ma.fields.Integer()
    temperature = ma.fields.Dict(allow_none=True)
    mask = ma.fields.Dict(allow_none=True)
    notes = ma.fields.Dict()
