"""Schemas of /v1/responses (and the grid and mask pieces /v1/tolerance shares)."""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import Quantity, StrictInteger
from service.api.schemas.common import FloatList, NumberOrPair, ReplySchema, StrictSchema, one_of
from service.api.schemas.designs import DesignDocumentSchema
from service.api.schemas.electrical import (HeadroomRequestSchema, NoiseRequestSchema, ResponseHeadroomSchema,
                                            ResponseNoiseSchema)
from service.api.schemas.filters import (
    BAND_RESPONSES, FREQ_RANGE, FilterSchema, FrequencyOrPair, GroupDelayLimitSchema, SectionSchema, _ATTEN, _RIPPLE,
    _check_pair,
    requirement_from,
)
from service.api.schemas.verdicts import VerdictSchema
from service.approximation import (CutoffAt, Excess, Family, GroupDelayLimit, ResponseType, Section, SectionKind,
                                   SectionOrder)
from service.response import FrequencyGrid, TimeGrid
from service.workflows import (DesignDocument, HeadroomRequest, MaskSegment, NoiseRequest, Requirement,
                               ResponseRequest, Zpk)

MAX_LIST = 10_000
_FREQ0 = ma.validate.Range(min=0, max=1e10)


class FrequencyGridSchema(StrictSchema):
    start_hz = Quantity(unit="Hz", required=True, validate=_FREQ0, metadata={"description": "First frequency (Hz)."})
    stop_hz = Quantity(unit="Hz", required=True, validate=FREQ_RANGE, metadata={"description": "Last frequency (Hz)."})
    points = StrictInteger(load_default=501, validate=ma.validate.Range(min=2), metadata={
        "description": "Number of points, at most ROLLOFF_MAX_FREQUENCY_POINTS (see the catalog)."})
    spacing = one_of(["log", "linear"], load_default="log", description="`log` (start_hz > 0) or `linear`.")

    @ma.validates_schema
    def _ordered(self, data, **kwargs):
        if "start_hz" in data and "stop_hz" in data:
            if not data["stop_hz"] > data["start_hz"]:
                raise ma.ValidationError("stop_hz must be above start_hz", "stop_hz")
            if data.get("spacing", "log") == "log" and data["start_hz"] <= 0:
                raise ma.ValidationError("log spacing needs start_hz > 0", "start_hz")


class FrequenciesField(ma.fields.Field):
    """A grid object, or an explicit list of frequencies (Hz)."""

    def __init__(self, **kwargs):
        self._grid = ma.fields.Nested(FrequencyGridSchema)
        self._list = ma.fields.List(Quantity(unit="Hz", validate=_FREQ0), validate=ma.validate.Length(min=1))
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, dict):
            return self._grid.deserialize(value)
        if isinstance(value, list):
            values = self._list.deserialize(value)
            if any(b <= a for a, b in zip(values, values[1:])):
                raise ma.ValidationError("an explicit frequency list must be strictly increasing")
            return values
        raise ma.ValidationError("expected {start_hz, stop_hz, points, spacing} or a list of frequencies (Hz)")

    def openapi_properties(self) -> dict:
        item = Quantity(unit="Hz").openapi_properties() | {"minimum": 0, "maximum": 1e10}
        return {"oneOf": [{"$ref": "#/components/schemas/FrequencyGrid"},
                          {"type": "array", "items": item, "minItems": 1}]}


class TimeGridSchema(StrictSchema):
    stop_s = Quantity(unit="s", validate=ma.validate.Range(min=1e-12, max=1e6, min_inclusive=False), metadata={
        "description": "End time (s); default: long enough for the slowest pole to settle."})
    points = StrictInteger(validate=ma.validate.Range(min=2), metadata={
        "description": "Number of samples, at most ROLLOFF_MAX_TIME_POINTS; default: resolves the fastest pole."})


class MaskSegmentSchema(StrictSchema):
    start_hz = Quantity(unit="Hz", required=True, validate=_FREQ0)
    stop_hz = Quantity(unit="Hz", allow_none=True, validate=FREQ_RANGE, metadata={
        "description": "Upper end (Hz); null or absent: to infinity (a stopband only)."})
    max_loss_db = ma.fields.Float(validate=ma.validate.Range(min=-200, max=400), metadata={
        "description": "Largest allowed loss in the band (a passband bound, dB)."})
    min_loss_db = ma.fields.Float(validate=ma.validate.Range(min=-200, max=400), metadata={
        "description": "Smallest required loss in the band (a stopband bound, dB)."})

    @ma.validates_schema
    def _bounds(self, data, **kwargs):
        if "max_loss_db" not in data and "min_loss_db" not in data:
            raise ma.ValidationError("a segment needs max_loss_db or min_loss_db", "max_loss_db")
        if data.get("start_hz") is not None and data.get("stop_hz") is not None \
                and not data["stop_hz"] > data["start_hz"]:
            raise ma.ValidationError("stop_hz must be above start_hz", "stop_hz")
        if data.get("stop_hz") is None and "max_loss_db" in data:
            raise ma.ValidationError("a segment with max_loss_db needs a finite stop_hz", "stop_hz")


_AS_SENT = "Accepted (may be null) so that a design document's `requirement` can be sent as it is; not used."


class RequirementMaskSchema(StrictSchema):
    """A requirement by band edges, verified like a design's (the `requirement` object of a design document is
    accepted as it is)."""

    response = one_of(ResponseType, required=True, description="Response type of the requirement.")
    passband_hz = FrequencyOrPair(required=True)
    stopband_hz = FrequencyOrPair(required=True)
    passband_ripple_db = ma.fields.Float(required=True, validate=_RIPPLE)
    stopband_attenuation_db = ma.fields.Float(required=True, validate=_ATTEN)
    passband_upper_hz = Quantity(unit="Hz", allow_none=True, validate=FREQ_RANGE, metadata={
        "description": "Highpass and bandstop: where the open passband's check ends (Hz); default 10 x its edge."})
    group_delay = ma.fields.Nested(GroupDelayLimitSchema, allow_none=True, metadata={
        "description": "Bessel lowpass requirements: the delay limit, verified too."})
    family = one_of(Family, allow_none=True, description="The family, for the delay limit's rule. " + _AS_SENT)
    order = StrictInteger(allow_none=True, validate=ma.validate.Range(min=1, max=20), metadata={"description": _AS_SENT})
    cutoff_hz = FrequencyOrPair(allow_none=True, metadata={"description": _AS_SENT})
    cutoff_at = one_of(CutoffAt, allow_none=True, description=_AS_SENT)
    excess = one_of(Excess, allow_none=True, description=_AS_SENT)
    section_order = one_of(SectionOrder, allow_none=True, description=_AS_SENT)

    @ma.validates_schema
    def _pairs(self, data, **kwargs):
        band = data.get("response") in BAND_RESPONSES
        for name in ("passband_hz", "stopband_hz"):
            if name in data:
                _check_pair(data, name, band)


def mask_from(spec: dict | None):
    """A loaded ``mask`` field as the workflow's mask: a Requirement or a tuple of MaskSegment (None stays None)."""
    if spec is None:
        return None
    if "requirement" in spec:
        given = {k: v for k, v in spec["requirement"].items()
                 if v is not None and k not in ("order", "cutoff_hz", "cutoff_at", "excess", "section_order")}
        if given.get("group_delay") is not None:
            given["group_delay"] = GroupDelayLimit(**given["group_delay"])
        return Requirement(**given)
    return tuple(MaskSegment(seg["start_hz"], seg.get("stop_hz"), seg.get("max_loss_db"), seg.get("min_loss_db"))
                 for seg in spec["segments"])


def frequencies_from(spec):
    """A loaded ``frequencies`` field as a FrequencyGrid or a list of Hz (None stays None)."""
    if isinstance(spec, dict):
        return FrequencyGrid(spec["start_hz"], spec["stop_hz"], spec["points"], spec["spacing"])
    return spec


class MaskField(ma.fields.Field):
    """A requirement (passband/stopband fields) or a list of segments."""

    def __init__(self, **kwargs):
        self._req = ma.fields.Nested(RequirementMaskSchema)
        self._segments = ma.fields.List(ma.fields.Nested(MaskSegmentSchema), validate=ma.validate.Length(min=1, max=64))
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, dict):
            return {"requirement": self._req.deserialize(value)}
        if isinstance(value, list):
            return {"segments": self._segments.deserialize(value)}
        raise ma.ValidationError("expected the requirement fields or a list of segments")

    def openapi_properties(self) -> dict:
        return {"oneOf": [{"$ref": "#/components/schemas/RequirementMask"},
                          {"type": "array", "items": {"$ref": "#/components/schemas/MaskSegment"},
                           "minItems": 1, "maxItems": 64}]}


class RootField(ma.fields.List):
    """``[re, im]`` in rad/s."""

    def __init__(self, **kwargs):
        super().__init__(ma.fields.Float(validate=ma.validate.Range(min=-1e12, max=1e12)),
                         validate=ma.validate.Length(equal=2), **kwargs)


class ResponseRequestSchema(StrictSchema):
    """Exactly one of `filter`, `zeros`+`poles`+`gain`, `sections`, `design`; then the grids and the mask."""

    filter = ma.fields.Nested(FilterSchema, metadata={"description": "A requirement or order as in /v1/approximations."})
    zeros = ma.fields.List(RootField(), validate=ma.validate.Length(max=80), metadata={
        "description": "Finite zeros, each [re, im] in rad/s (conjugates paired)."})
    poles = ma.fields.List(RootField(), validate=ma.validate.Length(min=1, max=80), metadata={
        "description": "Poles, each [re, im] in rad/s, in the left half-plane."})
    gain = ma.fields.Float(validate=ma.validate.Range(min=-1e300, max=1e300), metadata={
        "description": "k of H(s) = k·∏(s − z)/∏(s − p)."})
    sections = ma.fields.List(ma.fields.Nested(SectionSchema), validate=ma.validate.Length(min=1, max=40))
    design = ma.fields.Nested(DesignDocumentSchema, metadata={
        "description": "A design document from /v1/designs: analysed at circuit level with its part values."})
    frequencies = FrequenciesField(metadata={
        "description": "{start_hz, stop_hz, points, spacing} or a list (Hz); default 501 log-spaced points "
                       "two decades either side of the poles."})
    time = ma.fields.Nested(TimeGridSchema, metadata={"description": "Time grid of the step and impulse responses."})
    mask = MaskField(metadata={"description": "Requirement mask: the requirement fields, or a list of segments "
                                              "{start_hz, stop_hz, max_loss_db | min_loss_db}."})
    passband_hz = FrequencyOrPair(metadata={"description": "Passband edge(s) for ripple and delay variation."})
    attenuation_at_hz = ma.fields.List(Quantity(unit="Hz", validate=_FREQ0), validate=ma.validate.Length(max=64),
                                       metadata={"description": "Report the loss at these frequencies (Hz)."})
    format = one_of(["json", "csv", "svg"], load_default="json", description=(
        "`csv`: a row per frequency (or per time point with `table: time`); `svg`: magnitude and phase, group "
        "delay and step response, with the mask."))
    table = one_of(["frequency", "time"], name="ResponseTable", load_default="frequency",
                   description="Rows of the CSV table.")
    noise = ma.fields.Nested(NoiseRequestSchema, metadata={
        "description": "Design documents: output noise density on the grid, integrated noise over `band_hz`, "
                       "per-part and per-stage contributions ranked, and SNR and dynamic range."})
    headroom = ma.fields.Nested(HeadroomRequestSchema, metadata={
        "description": "Design documents: every op-amp output's peak level over frequency against its range, at "
                       "`input_peak_v` or `output_peak_v`, with a warning where a stage clips before the output."})

    @ma.validates_schema
    def _exactly_one_system(self, data, **kwargs):
        given = [name for name in ("filter", "poles", "sections", "design") if name in data]
        if ("zeros" in data or "gain" in data) and "poles" not in data:
            raise ma.ValidationError({"poles": ["zeros and gain need poles"]})
        if len(given) != 1:
            raise ma.ValidationError(
                "give exactly one of filter, zeros + poles + gain, sections or design"
                + (f" (got {', '.join(given)})" if given else ""), "_schema")
        if "poles" in data and "gain" not in data:
            raise ma.ValidationError({"gain": ["Missing data for required field."]})

    @ma.post_load
    def _typed(self, data, **kwargs):
        if "filter" in data:
            system = requirement_from(data["filter"])
        elif "poles" in data:
            system = Zpk(tuple(complex(*z) for z in data.get("zeros", [])),
                         tuple(complex(*p) for p in data["poles"]), data["gain"])
        elif "sections" in data:
            system = tuple(Section(SectionKind(s["kind"]), s["order"], s["f0_hz"], s.get("q"), s.get("fz_hz"),
                                   s["gain"]) for s in data["sections"])
        else:
            system = DesignDocument.from_json(data["design"], "design")
        time = data.get("time")
        return {"request": ResponseRequest(
            system=system, frequencies=frequencies_from(data.get("frequencies")),
            time=TimeGrid(time.get("stop_s"), time.get("points")) if time else None,
            mask=mask_from(data.get("mask")), passband_hz=data.get("passband_hz"),
            attenuation_at_hz=tuple(data.get("attenuation_at_hz") or ()), figure=data["format"] == "svg",
            noise=None if "noise" not in data else NoiseRequest.from_json(data["noise"], "noise"),
            headroom=None if "headroom" not in data else HeadroomRequest.from_json(data["headroom"], "headroom")),
            "format": data["format"], "table": data["table"]}


class TimeResponseSchema(ma.Schema):
    time_s = FloatList()
    value = FloatList()
    dirac_weight = ma.fields.Float(allow_none=True, metadata={
        "description": "Impulse response: weight of the Dirac delta at t = 0 (the transfer function's value at "
                       "infinite frequency, nonzero for highpass and notch kinds); 0 for the step."})


class AttenuationSchema(ma.Schema):
    frequency_hz = ma.fields.Float()
    loss_db = ma.fields.Float()


class MetricsSchema(ma.Schema):
    passband_gain_db = ma.fields.Float(allow_none=True)
    f3db_hz = NumberOrPair(allow_none=True, metadata={"description": "−3 dB frequency (Hz); [low, high] for band "
                                                                        "responses."})
    passband_ripple_db = ma.fields.Float(allow_none=True)
    attenuation_db = ma.fields.List(ma.fields.Nested(AttenuationSchema))
    peak_gain_db = ma.fields.Float(allow_none=True)
    peak_frequency_hz = ma.fields.Float(allow_none=True)
    group_delay_s = ma.fields.Float(allow_none=True, metadata={"description": "At DC (or at the band centre)."})
    group_delay_variation_s = ma.fields.Float(allow_none=True, metadata={"description": "Across the passband."})
    overshoot_pct = ma.fields.Float(allow_none=True)
    rise_time_s = ma.fields.Float(allow_none=True, metadata={"description": "10-90 % of the step."})
    settling_time_1pct_s = ma.fields.Float(allow_none=True)
    settling_time_01pct_s = ma.fields.Float(allow_none=True)
    unavailable = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.String(), metadata={
        "description": "Metrics that do not apply, with the reason."})


class ResponseSchema(ReplySchema):
    EXACT = ("frequency_hz", "step.time_s", "impulse.time_s", "metrics.attenuation_db.*.frequency_hz",
             "mask_result.segments.*.start_hz", "mask_result.segments.*.stop_hz", "mask_result.segments.*.limit_db",
             "mask_result.segments.*.checked_to_hz", "mask_result.group_delay.stop_hz",
             "mask_result.group_delay.limit_pct")

    response_type = ma.fields.String()
    frequency_hz = FloatList()
    magnitude_db = FloatList()
    phase_deg = FloatList(metadata={"description": "Unwrapped (degrees)."})
    group_delay_s = FloatList()
    step = ma.fields.Nested(TimeResponseSchema, allow_none=True)
    impulse = ma.fields.Nested(TimeResponseSchema, allow_none=True)
    metrics = ma.fields.Nested(MetricsSchema)
    mask_result = ma.fields.Nested(VerdictSchema, allow_none=True, metadata={
        "description": "With a mask: the verdict of the one verifier (the same as a design's)."})
    notes = ma.fields.List(ma.fields.String())
    noise = ma.fields.Nested(ResponseNoiseSchema, allow_none=True, metadata={
        "description": "With `noise` (design documents): the noise section; null otherwise."})
    headroom = ma.fields.Nested(ResponseHeadroomSchema, allow_none=True, metadata={
        "description": "With `headroom` (design documents): the level of every op-amp output; null otherwise."})


#: Schemas referenced by name from custom fields (registered as OpenAPI components by the app).
REFERENCED_COMPONENTS = {
    "FrequencyGrid": FrequencyGridSchema,
    "RequirementMask": RequirementMaskSchema,
    "MaskSegment": MaskSegmentSchema,
}
