"""Requirement and transfer-function schemas (shared by approximations, compare, designs, responses)."""

from __future__ import annotations

import marshmallow as ma
from webargs.fields import DelimitedList

from service.api.fields import Quantity, StrictInteger
from service.api.schemas.common import ReplySchema, StrictSchema, one_of
from service.approximation import CutoffAt, Excess, Family, GroupDelayLimit, ResponseType, SectionKind, SectionOrder
from service.workflows import Requirement
from service.workflows import limits as L
from service.workflows.requirement import OPEN_PASSBAND_FACTOR

BAND_RESPONSES = {"bandpass", "bandstop"}

# Ranges the approximation engine is accurate over (service.approximation.validation).
FREQ_RANGE = ma.validate.Range(min=1e-3, max=1e10)


class FrequencyOrPair(ma.fields.Field):
    """A frequency (Hz), or ``[low, high]`` for band responses."""

    def __init__(self, **kwargs):
        self._single = Quantity(unit="Hz", validate=FREQ_RANGE)
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, (list, tuple)):
            if len(value) != 2:
                raise ma.ValidationError("expected one frequency or a pair [low, high]")
            low, high = (self._single.deserialize(v) for v in value)
            if not low < high:
                raise ma.ValidationError("a pair must be [low, high] with low < high")
            return (low, high)
        return self._single.deserialize(value)

    def _serialize(self, value, attr, obj, **kwargs):
        if isinstance(value, (tuple, list)):
            return [float(v) for v in value]
        return None if value is None else float(value)

    def openapi_properties(self) -> dict:
        single = dict(self._single.openapi_properties(), minimum=1e-3, maximum=1e10)
        forms = [single, {"type": "array", "items": single, "minItems": 2, "maxItems": 2}]
        if self.allow_none:
            forms.append({"type": "null"})
        return {"oneOf": forms}


class GroupDelayLimitSchema(StrictSchema):
    frequency_hz = Quantity(unit="Hz", required=True, validate=FREQ_RANGE,
                            metadata={"description": "Up to this frequency (Hz) ..."})
    max_deviation_pct = ma.fields.Float(required=True, validate=ma.validate.Range(min=0, max=100, min_inclusive=False),
                                        metadata={"description": "... the group delay stays within this many percent "
                                                  "of its DC value."})


ORDER_RANGE = ma.validate.Range(
    min=1, max=20, error="Must be from {min} to {max}: 20 is the highest order computed accurately, and "
                         "ROLLOFF_MAX_ORDER may set a lower limit.")
_RIPPLE = ma.validate.Range(min=0.001, max=3.0)
_ATTEN = ma.validate.Range(min=0.0, max=150.0, min_inclusive=False)

REQUIREMENT_FIELDS = ("passband_hz", "stopband_hz", "passband_ripple_db", "stopband_attenuation_db")


class FilterSchema(StrictSchema):
    """A filter asked for by order (``order`` + ``cutoff_hz``) or by requirement (band edges and losses)."""

    response = one_of(ResponseType, required=True, description="lowpass, highpass, bandpass or bandstop.")
    family = one_of(Family, required=True, description="Approximation family.")
    order = StrictInteger(validate=ORDER_RANGE,
                          metadata={"description": "Prototype order (by-order designs). Band responses have twice "
                                    "this transfer-function degree. At most ROLLOFF_MAX_ORDER."})
    cutoff_hz = FrequencyOrPair(metadata={
        "description": "By-order designs: the cutoff (Hz), a pair [low, high] for band responses. What it means "
                       "depends on the family (see `cutoff_meaning` in the reply and the catalog): the -3 dB point "
                       "(Butterworth, Bessel, Legendre), the ripple-band edge (Chebyshev I, elliptic), the stopband "
                       "edge (Chebyshev II), the -6.02 dB crossover (Linkwitz-Riley); `cutoff_at: \"-3db\"` puts "
                       "every family's -3 dB point there."})
    cutoff_at = one_of(CutoffAt, load_default="family", description="`family` (natural meaning) or `-3db`.")
    passband_hz = FrequencyOrPair(metadata={"description": "Requirement: passband edge (Hz), a pair for band responses."})
    stopband_hz = FrequencyOrPair(metadata={"description": "Requirement: stopband edge (Hz), a pair for band responses."})
    passband_ripple_db = ma.fields.Float(validate=_RIPPLE, metadata={
        "description": "Largest loss allowed across the passband (dB), 0.001-3. By order: the ripple of Chebyshev I "
                       "and elliptic."})
    stopband_attenuation_db = ma.fields.Float(validate=_ATTEN, metadata={
        "description": "Smallest loss required across the stopband (dB), up to 150. By order: the stopband level of "
                       "Chebyshev II and elliptic."})
    excess = one_of(Excess, load_default="stopband",
                    description="Requirement designs: where the excess selectivity of the integer order goes.")
    passband_upper_hz = Quantity(unit="Hz", validate=FREQ_RANGE, metadata={
        "description": "Requirement, highpass and bandstop: where the open passband's check ends (Hz). Default "
                       f"{OPEN_PASSBAND_FACTOR:g} x the passband edge; with the default, real op-amps may end the "
                       "passband earlier (reported, not a failure); a stated value is checked as stated."})
    group_delay = ma.fields.Nested(GroupDelayLimitSchema, metadata={
        "description": "Bessel lowpass requirement: a limit on the group delay's deviation from its DC value up to "
                       "a frequency, verified on the circuit."})
    section_order = one_of(SectionOrder, load_default="ascending_q", description=(
        "Order of the sections: `ascending_q`, `descending_q`, `as_computed` (as the approximation lists them), "
        "`max_dynamic_range` (designs: the order that maximizes the undistorted output over the noise)."))

    @ma.validates_schema
    def _one_way_of_asking(self, data, **kwargs):
        by_order = "order" in data or "cutoff_hz" in data
        by_requirement = any(f in data for f in ("passband_hz", "stopband_hz"))
        if by_order and by_requirement:
            raise ma.ValidationError("give either order + cutoff_hz, or passband_hz + stopband_hz + "
                                     "passband_ripple_db + stopband_attenuation_db, not both", "_schema")
        band = data.get("response") in BAND_RESPONSES
        if by_order:
            missing = [f for f in ("order", "cutoff_hz") if f not in data]
            if missing:
                raise ma.ValidationError({f: ["Missing data for required field."] for f in missing})
            _check_pair(data, "cutoff_hz", band)
        elif by_requirement:
            missing = [f for f in REQUIREMENT_FIELDS if f not in data]
            if missing:
                raise ma.ValidationError({f: ["Missing data for required field."] for f in missing})
            _check_pair(data, "passband_hz", band)
            _check_pair(data, "stopband_hz", band)
        else:
            raise ma.ValidationError("give order + cutoff_hz, or passband_hz + stopband_hz + passband_ripple_db + "
                                     "stopband_attenuation_db", "_schema")


REQUIREMENT_KEYS = ("response", "family", "order", "cutoff_hz", "cutoff_at", "passband_hz", "stopband_hz",
                    "passband_ripple_db", "stopband_attenuation_db", "passband_upper_hz", "group_delay", "excess",
                    "section_order")


def requirement_from(data: dict) -> Requirement:
    """The typed requirement of loaded filter fields (the workflow checks its sense: edges, limits)."""
    fields = {k: data[k] for k in REQUIREMENT_KEYS if data.get(k) is not None}
    gd = fields.get("group_delay")
    if gd is not None:
        fields["group_delay"] = GroupDelayLimit(gd["frequency_hz"], gd["max_deviation_pct"])
    return Requirement(**fields)


def _check_pair(data: dict, name: str, band: bool) -> None:
    is_pair = isinstance(data[name], tuple)
    if band and not is_pair:
        raise ma.ValidationError({name: ["a band response needs a pair [low, high]"]})
    if not band and is_pair:
        raise ma.ValidationError({name: ["a lowpass or highpass needs one frequency, not a pair"]})


SECTION_FREQ_RANGE = ma.validate.Range(min=L.SECTION_FREQUENCY_RANGE_HZ[0], max=L.SECTION_FREQUENCY_RANGE_HZ[1])


class SectionSchema(StrictSchema):
    """One section in the standard forms (DESIGN.md). The bounds are wide: band transforms of extreme
    requirements give sections outside the input frequency range and Q far below 1/2."""

    kind = one_of(SectionKind, required=True, description="Standard form of the section.")
    order = StrictInteger(required=True, validate=ma.validate.OneOf([1, 2]))
    f0_hz = Quantity(unit="Hz", required=True, validate=SECTION_FREQ_RANGE,
                     metadata={"description": "Pole frequency (Hz)."})
    q = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=L.SECTION_Q_RANGE[0], max=L.SECTION_Q_RANGE[1]),
                        metadata={"description": "Pole Q (null for first order)."})
    fz_hz = Quantity(unit="Hz", allow_none=True, validate=SECTION_FREQ_RANGE,
                     metadata={"description": "Zero frequency (Hz) of the notch kinds, else null."})
    gain = ma.fields.Float(required=True, validate=ma.validate.Range(min=-L.MAX_SECTION_GAIN, max=L.MAX_SECTION_GAIN),
                           metadata={"description": "Gain g of the standard form."})


class EdgeSchema(ma.Schema):
    frequency_hz = ma.fields.Float()
    band = ma.fields.String(metadata={"description": "`passband` or `stopband`."})
    loss_db = ma.fields.Float(metadata={"description": "Achieved loss relative to the passband peak (dB)."})
    required_db = ma.fields.Float(metadata={"description": "Largest (passband) or smallest (stopband) loss asked (dB)."})
    margin_db = ma.fields.Float(metadata={"description": "Positive when met (dB)."})


class GroupDelayResultSchema(ma.Schema):
    frequency_hz = ma.fields.Float()
    deviation_pct = ma.fields.Float()
    limit_pct = ma.fields.Float()
    margin_pct = ma.fields.Float()
    dc_delay_s = ma.fields.Float()


class ApproximationSchema(ReplySchema):
    """A transfer function as zeros/poles/gain and as sections."""

    family = ma.fields.String()
    response = ma.fields.String()
    order = ma.fields.Integer(metadata={"description": "Prototype order."})
    degree = ma.fields.Integer(metadata={"description": "Transfer-function degree (number of poles)."})
    zeros = ma.fields.List(ma.fields.List(ma.fields.Float()), metadata={"description": "Finite zeros, [re, im] in rad/s."})
    poles = ma.fields.List(ma.fields.List(ma.fields.Float()), metadata={"description": "Poles, [re, im] in rad/s."})
    gain = ma.fields.Float(metadata={"description": "k of H(s) = k·∏(s − z)/∏(s − p); passband peak 0 dB."})
    sections = ma.fields.List(ma.fields.Nested(SectionSchema), metadata={
        "description": "Sections whose product is the transfer function."})
    cutoff_hz = FrequencyOrPair(metadata={"description": "The cutoff used (Hz)."})
    cutoff_meaning = ma.fields.String(metadata={"description": "What `cutoff_hz` is for this family."})
    edges = ma.fields.List(ma.fields.Nested(EdgeSchema), allow_none=True, metadata={
        "description": "Requirement designs: achieved, required and margin at each requested edge."})
    excess = ma.fields.String(allow_none=True)
    passband_ripple_db = ma.fields.Float(allow_none=True)
    stopband_attenuation_db = ma.fields.Float(allow_none=True)
    group_delay = ma.fields.Nested(GroupDelayResultSchema, allow_none=True)
    notes = ma.fields.List(ma.fields.String())


class ApproximationQuerySchema(StrictSchema):
    """The by-order request as query parameters (for spreadsheets)."""

    response = one_of(ResponseType, required=True, description="lowpass, highpass, bandpass or bandstop.")
    family = one_of(Family, required=True, description="Approximation family.")
    order = ma.fields.Integer(required=True, validate=ORDER_RANGE, metadata={"description": "Prototype order."})
    cutoff_hz = DelimitedList(Quantity(unit="Hz", validate=FREQ_RANGE), required=True,
                                        validate=ma.validate.Length(min=1, max=2), metadata={
        "description": "Cutoff (Hz); `low,high` for band responses, e.g. `35k,45k`."})
    passband_ripple_db = ma.fields.Float(validate=_RIPPLE)
    stopband_attenuation_db = ma.fields.Float(validate=_ATTEN)
    cutoff_at = one_of(CutoffAt, load_default="family", description="`family` or `-3db`.")
    section_order = one_of(SectionOrder, load_default="ascending_q", description="Order of the sections.")
    format = one_of(["json", "csv"], load_default="json", description="`csv`: the sections as a table.")

    @ma.post_load
    def _as_filter(self, data, **kwargs):
        cut = data["cutoff_hz"]
        band = data["response"] in BAND_RESPONSES
        if band and len(cut) != 2:
            raise ma.ValidationError({"cutoff_hz": ["a band response needs `low,high`"]})
        if not band and len(cut) != 1:
            raise ma.ValidationError({"cutoff_hz": ["a lowpass or highpass needs one frequency"]})
        if band and not cut[0] < cut[1]:
            raise ma.ValidationError({"cutoff_hz": ["low must be below high"]})
        data["cutoff_hz"] = tuple(cut) if band else cut[0]
        return data


class ApproximationRequestSchema(FilterSchema):
    format = one_of(["json", "csv"], load_default="json", description="`csv`: the sections as a table.")


class CompareRequestSchema(StrictSchema):
    """One requirement, every family."""

    response = one_of(ResponseType, required=True, description="lowpass, highpass, bandpass or bandstop.")
    passband_hz = FrequencyOrPair(required=True, metadata={"description": "Passband edge (Hz) or pair."})
    stopband_hz = FrequencyOrPair(required=True, metadata={"description": "Stopband edge (Hz) or pair."})
    passband_ripple_db = ma.fields.Float(required=True, validate=_RIPPLE)
    stopband_attenuation_db = ma.fields.Float(required=True, validate=_ATTEN)
    passband_upper_hz = Quantity(unit="Hz", validate=FREQ_RANGE, metadata={
        "description": "Highpass and bandstop: where the open passband's check ends (Hz); default 10 x its edge."})
    overshoot_limit_pct = ma.fields.Float(validate=ma.validate.Range(min=0, max=100), metadata={
        "description": "Recommend only a family whose step overshoot stays within this (%)."})
    group_delay_variation_limit_s = Quantity(unit="s", validate=ma.validate.Range(min=0, max=1e3), metadata={
        "description": "Recommend only a family whose passband group-delay variation stays within this (s)."})
    format = one_of(["json", "csv"], load_default="json", description="`csv`: a row per family.")

    @ma.validates_schema
    def _pairs(self, data, **kwargs):
        band = data.get("response") in BAND_RESPONSES
        for name in ("passband_hz", "stopband_hz"):
            if name in data:
                _check_pair(data, name, band)


class FamilyComparisonSchema(ma.Schema):
    family = ma.fields.String()
    meets = ma.fields.Boolean(metadata={"description": "The family meets the requirement within ROLLOFF_MAX_ORDER."})
    order = ma.fields.Integer(allow_none=True)
    sections = ma.fields.Integer(allow_none=True, metadata={"description": "Number of second-order sections."})
    first_order_sections = ma.fields.Integer(allow_none=True)
    max_q = ma.fields.Float(allow_none=True, metadata={"description": "Highest section Q (a sensitivity warning sign)."})
    group_delay_variation_s = ma.fields.Float(allow_none=True, metadata={"description": "Across the passband (s)."})
    overshoot_pct = ma.fields.Float(allow_none=True, metadata={"description": "Step overshoot (%)."})
    settling_time_1pct_s = ma.fields.Float(allow_none=True, metadata={"description": "Step settling to 1 % (s)."})
    margin_db = ma.fields.Float(allow_none=True, metadata={"description": "Smallest attenuation margin (dB)."})
    within_limits = ma.fields.Boolean(allow_none=True, metadata={"description": "Meets the overshoot/delay limits."})
    reason = ma.fields.String(allow_none=True)


class ComparisonSchema(ReplySchema):
    response = ma.fields.String()
    families = ma.fields.List(ma.fields.Nested(FamilyComparisonSchema))
    recommended = ma.fields.String(allow_none=True, metadata={
        "description": "Lowest-order family that meets the requirement and the stated limits."})
    recommended_reason = ma.fields.String()
