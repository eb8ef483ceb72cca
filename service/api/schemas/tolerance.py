"""Schemas of /v1/tolerance."""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import Quantity, StrictInteger
from service.api.schemas.common import FloatList, ReplySchema, Scalar, StrictSchema, one_of
from service.api.schemas.designs import DesignDocumentSchema
from service.api.schemas.montecarlo import DISTRIBUTIONS, DistributionField, TemperatureSchema  # noqa: F401
from service.api.schemas.yields import CriterionFailuresSchema, WorstTrialSchema  # noqa: F401
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


class _PercentileKeys(ma.Schema):
    """Reads the percentile keys with a dot (``"p0.135"``) as they are, not as paths."""

    def get_attribute(self, obj, attr, default):
        field = self.fields.get(attr)
        key = field.data_key if field is not None and field.data_key else attr
        return obj.get(key, default) if isinstance(obj, dict) else super().get_attribute(obj, attr, default)


class DistributionSummarySchema(_PercentileKeys):
    """A figure over the Monte Carlo trials: count, mean, sample standard deviation and percentiles."""

    count = ma.fields.Integer(metadata={"description": "Trials with a finite value (the others lack the figure)."})
    mean = ma.fields.Float(allow_none=True)
    std = ma.fields.Float(allow_none=True, metadata={"description": "Sample standard deviation (n - 1)."})
    min = ma.fields.Float(allow_none=True)
    p0_135 = ma.fields.Float(allow_none=True, data_key="p0.135")
    p2_5 = ma.fields.Float(allow_none=True, data_key="p2.5")
    p50 = ma.fields.Float(allow_none=True)
    p97_5 = ma.fields.Float(allow_none=True, data_key="p97.5")
    p99_865 = ma.fields.Float(allow_none=True, data_key="p99.865")
    max = ma.fields.Float(allow_none=True)


class PercentileCurvesSchema(_PercentileKeys):
    """One figure's percentiles over the trials, each a list over frequency."""

    min = FloatList()
    p0_135 = FloatList(data_key="p0.135")
    p2_5 = FloatList(data_key="p2.5")
    p50 = FloatList()
    p97_5 = FloatList(data_key="p97.5")
    p99_865 = FloatList(data_key="p99.865")
    max = FloatList()


class StageDistributionSchema(ma.Schema):
    f0_hz = ma.fields.Nested(DistributionSummarySchema, metadata={"description": "Pole frequency (Hz)."})
    q = ma.fields.Nested(DistributionSummarySchema, allow_none=True, metadata={"description": "Q (null: first "
                                                                                                "order)."})


class ToleranceMetricsSchema(ma.Schema):
    f3db_hz = ma.fields.Nested(DistributionSummarySchema, metadata={"description": "-3 dB frequency (Hz), lowpass "
                                                                                   "and highpass."})
    f3db_low_hz = ma.fields.Nested(DistributionSummarySchema, metadata={"description": "Lower -3 dB frequency (Hz), "
                                                                                       "band responses."})
    f3db_high_hz = ma.fields.Nested(DistributionSummarySchema, metadata={"description": "Upper -3 dB frequency (Hz), "
                                                                                        "band responses."})
    passband_ripple_db = ma.fields.Nested(DistributionSummarySchema, allow_none=True)
    attenuation_db = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Nested(DistributionSummarySchema),
                                    metadata={"description": "Loss (dB) at each stopband edge, keyed by its "
                                                             "frequency in Hz (\"25600.0\")."})
    stages = ma.fields.List(ma.fields.Nested(StageDistributionSchema), metadata={
        "description": "Each stage's f0 and Q (closed form, ideal op-amps), stage 1 first."})


class YieldSchema(ma.Schema):
    fraction = ma.fields.Float(metadata={"description": "Passing trials / trials."})
    ci95_low = ma.fields.Float(metadata={"description": "95 % Wilson score interval, lower end."})
    ci95_high = ma.fields.Float(metadata={"description": "95 % Wilson score interval, upper end."})
    trials = ma.fields.Integer()
    passed = ma.fields.Integer()
    unstable = ma.fields.Integer(metadata={"description": "Trials with a pole in the closed right half-plane."})
    failures_by_criterion = ma.fields.List(ma.fields.Nested(CriterionFailuresSchema), metadata={
        "description": "Per criterion, most failures first."})
    unresolved = ma.fields.Integer(metadata={"description": "Trials whose margin was not located to the precision."})
    interval = ma.fields.String()
    verdict = ma.fields.String()


class SensitivitySchema(ma.Schema):
    ref = ma.fields.String()
    kind = ma.fields.String()
    stage = ma.fields.Integer(metadata={"description": "Stage number, from 1."})
    tolerance = ma.fields.Float()
    f0 = ma.fields.Float(allow_none=True, metadata={"description": "Normalized sensitivity of the stage's f0."})
    q = ma.fields.Float(allow_none=True, metadata={"description": "Normalized sensitivity of the stage's Q."})
    magnitude_db_per_pct = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Float(), metadata={
        "description": "Magnitude change (dB per % change of the part), keyed by frequency in Hz."})
    contribution_db = ma.fields.Float(allow_none=True, metadata={
        "description": "Largest magnitude change at the part's tolerance (dB): the ranking key."})
    contribution_f0_q = ma.fields.Float(allow_none=True)


class WorstCaseSchema(ma.Schema):
    frequency_hz = ma.fields.Float()
    band = ma.fields.String()
    direction = ma.fields.String(metadata={"description": "max_loss (passband) or min_loss (stopband)."})
    nominal_loss_db = ma.fields.Float()
    corner = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Integer(), metadata={
        "description": "Each part at +1 or -1 times its tolerance, by ref."})
    loss_db = ma.fields.Float(metadata={"description": "Loss at the corner (dB)."})
    monte_carlo_min_loss_db = ma.fields.Float()
    monte_carlo_max_loss_db = ma.fields.Float()


class TrialEdgeSchema(ma.Schema):
    frequency_hz = ma.fields.Float()
    band = ma.fields.String()
    gain_db = ma.fields.Float()
    loss_db = ma.fields.Float()


class TrialStageSchema(ma.Schema):
    f0_hz = ma.fields.Float()
    q = ma.fields.Float(allow_none=True)


class TrialSchema(ma.Schema):
    trial = ma.fields.Integer(metadata={"description": "Index of the trial (from 0)."})
    values = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Float(), metadata={
        "description": "Sampled values by ref (ohm, F; op-amp GBW in Hz)."})
    temperature_c = ma.fields.Float(allow_none=True)
    f3db_hz = ma.fields.Float(allow_none=True)
    f3db_low_hz = ma.fields.Float(allow_none=True)
    f3db_high_hz = ma.fields.Float(allow_none=True)
    passband_ripple_db = ma.fields.Float(allow_none=True)
    reference_gain_db = ma.fields.Float()
    edges = ma.fields.List(ma.fields.Nested(TrialEdgeSchema))
    stages = ma.fields.List(ma.fields.Nested(TrialStageSchema))
    margins_db = ma.fields.List(ma.fields.Float(allow_none=True))
    stable = ma.fields.Boolean()
    passes = ma.fields.Boolean(allow_none=True)


class PartDistributionsSchema(ma.Schema):
    resistor = one_of(DISTRIBUTIONS, name="DistributionName", description="Resistors' distribution.")
    capacitor = one_of(DISTRIBUTIONS, name="DistributionName", description="Capacitors' distribution.")
    opamp = one_of(DISTRIBUTIONS, name="DistributionName", description="Op-amps' gain-bandwidth distribution.")


class TemperatureRangeSchema(ma.Schema):
    min_c = ma.fields.Float()
    max_c = ma.fields.Float()


class VerifiedSegmentSchema(ma.Schema):
    band = ma.fields.String()
    start_hz = ma.fields.Float()
    stop_hz = ma.fields.Float(allow_none=True)
    limit_db = ma.fields.Float()
    open_end = ma.fields.Boolean()


class VerifiedDelaySchema(ma.Schema):
    stop_hz = ma.fields.Float()
    max_deviation_pct = ma.fields.Float()


class VerifiedMaskSchema(ma.Schema):
    segments = ma.fields.List(ma.fields.Nested(VerifiedSegmentSchema))
    group_delay = ma.fields.Nested(VerifiedDelaySchema, allow_none=True)
    reference_gain_db = ma.fields.Float(allow_none=True)


class ToleranceSchema(ReplySchema):
    EXACT = ("frequency_hz", "trials.*.values", "seed", "temperature", "mask", "sensitivity.*.tolerance",
             "worst_case.*.frequency_hz", "trials.*.edges.*.frequency_hz", "yield.failures_by_criterion.*.start_hz",
             "yield.failures_by_criterion.*.stop_hz", "yield.failures_by_criterion.*.limit_db",
             "yield.failures_by_criterion.*.limit_pct")

    frequency_hz = FloatList()
    magnitude_db_percentiles = ma.fields.Nested(PercentileCurvesSchema, metadata={
        "description": "min, p0.135, p2.5, p50, p97.5, p99.865, max of the magnitude (dB), each over frequency."})
    phase_deg_percentiles = ma.fields.Nested(PercentileCurvesSchema)
    group_delay_s_percentiles = ma.fields.Nested(PercentileCurvesSchema)
    nominal_magnitude_db = FloatList()
    metrics = ma.fields.Nested(ToleranceMetricsSchema, metadata={
        "description": "Per metric: mean, std and percentiles (−3 dB frequency, passband ripple, stopband "
                       "attenuation, each stage's f0 and Q)."})
    yield_ = ma.fields.Nested(YieldSchema, attribute="yield", data_key="yield", allow_none=True, metadata={
        "description": "Each trial verified like a design: the passing fraction, its 95 % Wilson interval and the "
                       "failures by criterion; null without a requirement or mask."})
    sensitivity = ma.fields.List(ma.fields.Nested(SensitivitySchema), metadata={
        "description": "Per part, ranked by contribution."})
    worst_case = ma.fields.List(ma.fields.Nested(WorstCaseSchema), allow_none=True, metadata={
        "description": "Per mask edge: the corner from the sensitivity signs and its loss, against the Monte Carlo "
                       "extremes."})
    trials = ma.fields.List(ma.fields.Nested(TrialSchema), allow_none=True, metadata={
        "description": "With include_trials: the sampled values and figures of each trial."})
    trial_count = ma.fields.Integer()
    distribution = ma.fields.Nested(PartDistributionsSchema, metadata={"description": "Distribution per part kind."})
    seed = ma.fields.Integer()
    temperature = ma.fields.Nested(TemperatureRangeSchema, allow_none=True)
    mask = ma.fields.Nested(VerifiedMaskSchema, allow_none=True, metadata={
        "description": "What each trial was verified against."})
    notes = ma.fields.Dict(keys=ma.fields.String(), values=Scalar(), metadata={
        "description": "How the figures were computed (methods, sources, chunking), by topic."})
