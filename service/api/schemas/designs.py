"""Schemas of /v1/designs and /v1/designs/evaluate: parts, op-amp, the design document."""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import Quantity, StrictInteger
from service.api.schemas.common import ReplySchema, StrictSchema, one_of
from service.api.schemas.filters import FilterSchema, SectionSchema
from service.approximation import Family, ResponseType
from service.components import SERIES
from service.realization import TOPOLOGIES

TOPOLOGY_NAMES = ["auto", *TOPOLOGIES]
#: Default reserve for part errors: a quarter of the passband ripple, and this much stopband loss (dB).
#: Our own defaults, chosen so that E96/E12 designs of the test requirements meet them with snapped values.
DEFAULT_PASSBAND_MARGIN_FRACTION = 0.25
DEFAULT_STOPBAND_MARGIN_DB = 2.0
_TOLERANCE = ma.validate.Range(min=0.0, max=0.5)
_ID = ma.validate.Length(max=128)
_DIELECTRIC = ma.validate.Length(min=1, max=32)


class NameOrList(ma.fields.Field):
    """One name for every section, or a list with one name per section."""

    def __init__(self, names: list[str] | None, *, max_items: int = 64, **kwargs):
        self.names = names
        self.max_items = max_items
        super().__init__(**kwargs)

    def _one(self, value):
        if not isinstance(value, str):
            raise ma.ValidationError("expected a name or a list of names")
        if self.names is not None and value not in self.names:
            raise ma.ValidationError(f"unknown name {value!r}: expected one of {', '.join(self.names)}")
        if len(value) > 64:
            raise ma.ValidationError("name too long")
        return value

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, list):
            if not 1 <= len(value) <= self.max_items:
                raise ma.ValidationError(f"expected 1 to {self.max_items} names, one per section")
            errors, out = {}, []
            for i, v in enumerate(value):
                try:
                    out.append(self._one(v))
                except ma.ValidationError as exc:
                    errors[i] = exc.messages
            if errors:
                raise ma.ValidationError(errors)
            return out
        return self._one(value)

    def openapi_properties(self) -> dict:
        one = {"type": "string", "maxLength": 64}
        if self.names is not None:
            one = {"type": "string", "enum": list(self.names)}
        return {"oneOf": [one, {"type": "array", "items": one, "minItems": 1, "maxItems": self.max_items}]}


class RangeField(ma.fields.List):
    """``[low, high]`` in the component's unit."""

    def __init__(self, unit: str, **kwargs):
        super().__init__(Quantity(unit=unit, validate=ma.validate.Range(min=1e-15, max=1e12)),
                         validate=ma.validate.Length(equal=2), **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        low, high = super()._deserialize(value, attr, data, **kwargs)
        if not low <= high:
            raise ma.ValidationError("expected [low, high] with low <= high")
        return [low, high]


class ResistorPolicySchema(StrictSchema):
    series = one_of(SERIES, description="IEC 60063 series the resistors come from (default E96).")
    range = RangeField("ohm", metadata={"description": "[lowest, highest] resistor (Ω), default [1k, 1M]."})
    tolerance = ma.fields.Float(validate=_TOLERANCE, metadata={"description": "Relative tolerance (0.01 = 1 %)."})


class CapacitorPolicySchema(StrictSchema):
    series = one_of(SERIES, description="IEC 60063 series the capacitors come from (default E12).")
    range = RangeField("F", metadata={"description": "[lowest, highest] capacitor (F), default [100p, 10u]."})
    tolerance = ma.fields.Float(validate=_TOLERANCE, metadata={"description": "Relative tolerance (0.05 = 5 %)."})
    dielectric = ma.fields.String(validate=_DIELECTRIC, metadata={
        "description": "Dielectric (C0G, film, X7R ...). High-permittivity ceramics draw a warning."})


class StockPartSchema(StrictSchema):
    kind = one_of(["resistor", "capacitor"], required=True, description="Part kind.")
    value = Quantity(unit=("ohm", "F"), required=True, validate=ma.validate.Range(min=1e-15, max=1e12),
                     metadata={"description": "Nominal value (Ω or F)."})
    tolerance = ma.fields.Float(required=True, validate=_TOLERANCE)
    dielectric = ma.fields.String(validate=_DIELECTRIC, allow_none=True)
    part_id = ma.fields.String(validate=_ID, allow_none=True, metadata={
        "description": "The caller's id (component database), returned on the BOM line."})


class PartsSchema(StrictSchema):
    resistors = ma.fields.Nested(ResistorPolicySchema)
    capacitors = ma.fields.Nested(CapacitorPolicySchema)
    stock = ma.fields.List(ma.fields.Nested(StockPartSchema), validate=ma.validate.Length(max=2000), metadata={
        "description": "Explicit stock: the entries of a kind replace that kind's series. At most "
                       "ROLLOFF_MAX_STOCK_ENTRIES entries."})


class OpAmpSchema(StrictSchema):
    gbw_hz = Quantity(unit="Hz", required=True, validate=ma.validate.Range(min=1.0, max=1e12),
                      metadata={"description": "Gain-bandwidth product (Hz)."})
    slew_v_per_us = ma.fields.Float(validate=ma.validate.Range(min=1e-6, max=1e6, min_inclusive=False))
    a0_db = ma.fields.Float(validate=ma.validate.Range(min=20, max=200), metadata={
        "description": "Open-loop DC gain (dB); 100 dB when not given."})
    output_swing_v = ma.fields.Float(validate=ma.validate.Range(min=1e-3, max=1e4))
    supply_v = ma.fields.Float(validate=ma.validate.Range(min=1e-3, max=1e4))
    rout_ohm = ma.fields.Float(validate=ma.validate.Range(min=0, max=1e6), metadata={
        "description": "Open-loop output resistance (Ω), default 0."})
    part_id = ma.fields.String(validate=_ID, allow_none=True)


class DesignRequestSchema(FilterSchema):
    """A requirement (or order) and what the realization may use."""

    topology = NameOrList(TOPOLOGY_NAMES, load_default="auto", metadata={
        "description": "`auto`, one topology for every section, or a list with one per section."})
    strategy = NameOrList(None, metadata={
        "description": "Design strategy for every section or one per section (see the catalog)."})
    parts = ma.fields.Nested(PartsSchema, metadata={"description": "What can be bought."})
    opamp = ma.fields.Nested(OpAmpSchema, metadata={"description": "The op-amp in every position (default ideal)."})
    exact = ma.fields.Boolean(load_default=False, truthy={True}, falsy={False},
                              metadata={"description": "Keep computed values unsnapped."})
    gain = ma.fields.Float(load_default=1.0, validate=ma.validate.Range(min=1e-3, max=1e4), metadata={
        "description": "Passband gain of the whole filter (V/V), distributed over the stages; default 1."})
    impedance_ohm = Quantity(unit="ohm", validate=ma.validate.Range(min=10, max=1e8), metadata={
        "description": "Preferred resistor level (Ω) steering the value search."})
    stage_peak_margin_db = ma.fields.Float(validate=ma.validate.Range(min=0, max=40), metadata={
        "description": "How far an intermediate stage output may peak above the output level (dB)."})
    output_amplitude_v = ma.fields.Float(validate=ma.validate.Range(min=1e-3, max=1e3), metadata={
        "description": "Peak output voltage the slew-rate figures are for (V)."})
    gbw_error = ma.fields.Float(validate=ma.validate.Range(min=1e-4, max=0.5), metadata={
        "description": "Relative f0/Q error the GBW figures are for (0.01 = 1 %)."})
    passband_margin_db = ma.fields.Float(validate=ma.validate.Range(min=0, max=3), metadata={
        "description": "Requirement designs: passband loss kept in reserve for part errors (dB). The transfer "
                       "function is computed for passband_ripple_db minus this. Default: a quarter of the ripple."})
    stopband_margin_db = ma.fields.Float(load_default=DEFAULT_STOPBAND_MARGIN_DB,
                                         validate=ma.validate.Range(min=0, max=60), metadata={
        "description": "Requirement designs: extra stopband loss kept in reserve for part errors (dB). "
                       "Set both margins to 0 for the minimum order of /v1/approximations."})
    format = one_of(["json", "csv", "spice", "svg"], load_default="json",
                    description="`csv`: the BOM as a table; `spice`: the netlist as text; `svg`: the schematic.")
    stage = StrictInteger(validate=ma.validate.Range(min=1), metadata={
        "description": "With `format: svg`: draw only this stage (numbered from 1); default the whole filter."})

    @ma.validates_schema
    def _margins(self, data, **kwargs):
        ripple = data.get("passband_ripple_db")
        margin = data.get("passband_margin_db")
        if ripple is not None and margin is not None and margin >= ripple:
            raise ma.ValidationError("passband_margin_db must be below passband_ripple_db", "passband_margin_db")


class ComponentSchema(StrictSchema):
    ref = ma.fields.String(required=True, validate=ma.validate.Length(min=1, max=32),
                           metadata={"description": "Reference unique across the design (R7, C3)."})
    role = ma.fields.String(validate=ma.validate.Length(max=32), metadata={
        "description": "Position in the topology (R1, Rf ...); optional when editing."})
    kind = one_of(["resistor", "capacitor"], required=True, description="Part kind.")
    value = Quantity(unit=("ohm", "F"), required=True, validate=ma.validate.Range(min=1e-15, max=1e12),
                     metadata={"description": "Chosen value (Ω or F)."})
    ideal = ma.fields.Float(allow_none=True, metadata={"description": "Value the design equations asked for."})
    tolerance = ma.fields.Float(allow_none=True, validate=_TOLERANCE)
    dielectric = ma.fields.String(allow_none=True, validate=_DIELECTRIC)
    part_id = ma.fields.String(allow_none=True, validate=_ID)


class OpAmpUseSchema(StrictSchema):
    ref = ma.fields.String(required=True, validate=ma.validate.Length(min=1, max=32))
    role = ma.fields.String(validate=ma.validate.Length(max=32))
    gbw_hz = Quantity(unit="Hz", allow_none=True, validate=ma.validate.Range(min=1.0, max=1e12),
                      metadata={"description": "Null: ideal op-amp."})
    slew_v_per_us = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=1e-6, max=1e6))
    a0_db = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=20, max=200))
    output_swing_v = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=1e-3, max=1e4))
    supply_v = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=1e-3, max=1e4))
    rout_ohm = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=0, max=1e6))
    part_id = ma.fields.String(allow_none=True, validate=_ID)


def _object_or_null(value) -> None:
    if value is not None and not isinstance(value, dict):
        raise ma.ValidationError("expected an object or null")


_FIGURES = dict(keys=ma.fields.String(), values=ma.fields.Float(allow_none=True), allow_none=True)


class StageSchema(StrictSchema):
    """One stage of a design document. Only section, topology, strategy, components and opamps are read;
    the figures are recomputed."""

    section = ma.fields.Nested(SectionSchema, required=True)
    topology = one_of(list(TOPOLOGIES), required=True, description="Topology of the stage.")
    strategy = ma.fields.String(validate=ma.validate.Length(max=64), metadata={
        "description": "Design strategy (default: the topology's first)."})
    components = ma.fields.List(ma.fields.Nested(ComponentSchema), required=True,
                                validate=ma.validate.Length(max=64))
    opamps = ma.fields.List(ma.fields.Nested(OpAmpUseSchema), required=True, validate=ma.validate.Length(max=8))
    achieved = ma.fields.Dict(**_FIGURES, metadata={
        "description": "f0_hz, q, gain, fz_hz and their relative errors with ideal op-amps (circuit engine)."})
    achieved_macromodel = ma.fields.Dict(**_FIGURES, metadata={"description": "The same with the given op-amp."})
    opamp_requirement = ma.fields.Raw(allow_none=True, validate=_object_or_null, metadata={
        "description": "An object, or null: GBW needed (rule of thumb and exact from the macromodel) and slew "
                       "rate needed."})
    peak_gain_db = ma.fields.Float(allow_none=True, metadata={
        "description": "Largest gain from the filter input to this stage's output (dB)."})
    peak_frequency_hz = ma.fields.Float(allow_none=True)
    output_node = ma.fields.String(allow_none=True, validate=ma.validate.Length(max=64))


class BomLineSchema(ma.Schema):
    ref = ma.fields.String()
    kind = ma.fields.String(metadata={"description": "resistor, capacitor or opamp."})
    value = ma.fields.Float(allow_none=True, metadata={"description": "Ω or F; null for op-amps."})
    tolerance = ma.fields.Float(allow_none=True)
    dielectric = ma.fields.String(allow_none=True)
    part_id = ma.fields.String(allow_none=True)


class SummaryEdgeSchema(ma.Schema):
    frequency_hz = ma.fields.Float()
    band = ma.fields.String()
    loss_db = ma.fields.Float(metadata={"description": "Loss with the chosen parts (dB)."})
    required_db = ma.fields.Float()
    margin_db = ma.fields.Float()
    ideal_loss_db = ma.fields.Float(metadata={"description": "Loss of the ideal transfer function (dB)."})


class SummarySchema(ma.Schema):
    edges = ma.fields.List(ma.fields.Nested(SummaryEdgeSchema))
    meets = ma.fields.Boolean(allow_none=True, metadata={"description": "Null for by-order designs."})


class WarningSchema(ma.Schema):
    code = ma.fields.String()
    message = ma.fields.String()
    stage = ma.fields.Integer()


class DesignDocumentSchema(StrictSchema):
    """A design document as /v1/designs returns it, possibly edited. The derived fields (bom, netlist,
    summary, warnings, figures) may be sent back; they are recomputed."""

    response = one_of(ResponseType, description="Response type.")
    family = one_of(Family, description="Approximation family.", allow_none=True)
    order = StrictInteger(allow_none=True, validate=ma.validate.Range(min=0, max=64))
    stages = ma.fields.List(ma.fields.Nested(StageSchema), required=True, validate=ma.validate.Length(min=1, max=64))
    # Free-form objects as /v1/designs returned them; documented without a schema of their own (their
    # content is checked by the realization when it reads them).
    requirement = ma.fields.Raw(allow_none=True, validate=_object_or_null, metadata={
        "description": "An object, or null: the passband/stopband fields the design was made for (redo the "
                       "summary)."})
    settings = ma.fields.Raw(allow_none=True, validate=_object_or_null, metadata={
        "description": "An object, or null: the realization settings (ranges, series, GBW error ...)."})
    bom = ma.fields.Raw(allow_none=True, metadata={"description": "Ignored on input (recomputed)."})
    netlist = ma.fields.Raw(allow_none=True, metadata={"description": "Ignored on input (recomputed)."})
    summary = ma.fields.Raw(allow_none=True, metadata={"description": "Ignored on input (recomputed)."})
    warnings = ma.fields.Raw(allow_none=True, metadata={"description": "Ignored on input (recomputed)."})
    overall_gain = ma.fields.Raw(allow_none=True, metadata={"description": "Ignored on input (recomputed)."})
    output_peak_gain_db = ma.fields.Raw(allow_none=True, metadata={"description": "Ignored on input (recomputed)."})
    service_version = ma.fields.Raw(allow_none=True, metadata={"description": "Ignored on input."})

    DERIVED = ("bom", "netlist", "summary", "warnings", "overall_gain", "output_peak_gain_db", "service_version")

    @ma.post_load
    def _drop_derived(self, data, **kwargs):
        for name in self.DERIVED:
            data.pop(name, None)
        for stage in data["stages"]:
            for name in ("achieved", "achieved_macromodel", "opamp_requirement", "peak_gain_db",
                         "peak_frequency_hz", "output_node"):
                stage.pop(name, None)
        return data


class DesignSchema(ReplySchema):
    """The design document, BOM, netlist, summary and warnings."""

    response = ma.fields.String()
    family = ma.fields.String(allow_none=True)
    order = ma.fields.Integer(allow_none=True)
    stages = ma.fields.List(ma.fields.Nested(StageSchema))
    requirement = ma.fields.Dict(allow_none=True)
    settings = ma.fields.Dict(allow_none=True)
    bom = ma.fields.List(ma.fields.Nested(BomLineSchema), metadata={
        "description": "A line per part: {ref, kind, value, tolerance, dielectric, part_id}."})
    netlist = ma.fields.String(metadata={"description": "SPICE netlist of the whole filter (VIN in 0 AC 1, output "
                                                        "node out); runs in ngspice batch mode unchanged."})
    summary = ma.fields.Nested(SummarySchema, metadata={
        "description": "Achieved against required loss at each requirement edge, with the chosen parts."})
    warnings = ma.fields.List(ma.fields.Nested(WarningSchema))
    overall_gain = ma.fields.Float(allow_none=True)
    output_peak_gain_db = ma.fields.Float(allow_none=True)
