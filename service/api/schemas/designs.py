"""Schemas of /v1/designs and /v1/designs/evaluate: parts, op-amp, the design document."""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import PART_REF, Quantity, StrictInteger
from service.api.schemas.common import ReplySchema, StrictSchema, one_of
from service.api.schemas.electrical import SUPPLY_DESCRIPTION, DesignNoiseSchema, SupplyReportSchema, SupplySchema
from service.api.schemas.filters import (FREQ_RANGE, FilterSchema, FrequencyOrPair, GroupDelayLimitSchema,
                                         SectionSchema, requirement_from)
from service.api.schemas.verdicts import VerdictSchema
from service.approximation import CutoffAt, Excess, Family, ResponseType, SectionOrder
from service.components import SERIES
from service.realization import TOPOLOGIES, OpAmpSpec, PartsPolicy
from service.workflows import DesignRequest, SupplySettings
from service.workflows import limits as L
from service.workflows.document import (COMPONENT_KEYS, DOCUMENT_DERIVED, DOCUMENT_KEYS, OPAMP_KEYS, STAGE_DERIVED,
                                        STAGE_KEYS, DesignSettings)
from service.workflows.policy import DEFAULT_PASSBAND_MARGIN_FRACTION, DEFAULT_STOPBAND_MARGIN_DB

TOPOLOGY_NAMES = ["auto", *TOPOLOGIES]
_TOLERANCE = ma.validate.Range(min=L.TOLERANCE_RANGE[0], max=L.TOLERANCE_RANGE[1])
_ID = ma.validate.Length(min=1, max=L.MAX_ID_LENGTH)
_DIELECTRIC = ma.validate.Length(min=1, max=L.MAX_DIELECTRIC_LENGTH)
_REF = ma.validate.Length(min=1, max=L.MAX_REF_LENGTH)
_VALUE = ma.validate.Range(min=min(L.RESISTOR_RANGE_OHM[0], L.CAPACITOR_RANGE_F[0]),
                           max=max(L.RESISTOR_RANGE_OHM[1], L.CAPACITOR_RANGE_F[1]))


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
        lo, hi = L.VALUE_RANGE["resistor" if unit == "ohm" else "capacitor"]
        super().__init__(Quantity(unit=unit, validate=ma.validate.Range(min=lo, max=hi)),
                         validate=ma.validate.Length(equal=2), **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, (list, tuple)) and len(value) != 2:
            raise ma.ValidationError(f"expected [low, high]: 2 values, got {len(value)}")
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
    value = Quantity(unit=("ohm", "F"), required=True, validate=_VALUE, metadata={
        "description": f"Nominal value (Ω or F): resistors {L.RESISTOR_RANGE_OHM[0]:g} to {L.RESISTOR_RANGE_OHM[1]:g} Ω, "
                       f"capacitors {L.CAPACITOR_RANGE_F[0]:g} to {L.CAPACITOR_RANGE_F[1]:g} F."})
    tolerance = ma.fields.Float(required=True, validate=_TOLERANCE)
    dielectric = ma.fields.String(validate=_DIELECTRIC, allow_none=True)
    part_id = ma.fields.String(validate=_ID, allow_none=True, metadata={
        "description": "The caller's id (component database), returned on the BOM line."})


class PartsSchema(StrictSchema):
    resistors = ma.fields.Nested(ResistorPolicySchema)
    capacitors = ma.fields.Nested(CapacitorPolicySchema)
    stock = ma.fields.List(ma.fields.Nested(StockPartSchema), metadata={
        "description": "Explicit stock: the entries of a kind replace that kind's series. At most "
                       "ROLLOFF_MAX_STOCK_ENTRIES entries."})


#: Op-amp figures a request or a document may give: field -> (range, unit for SI strings, description).
OPAMP_FIGURES = {
    "slew_v_per_us": (L.SLEW_RANGE_V_PER_US, None, "Slew rate (V/us)."),
    "a0_db": (L.A0_RANGE_DB, None, "Open-loop DC gain (dB); 100 dB when not given."),
    "output_swing_v": (L.VOLTAGE_RANGE_V, "V", "Peak output swing (V)."),
    "supply_v": (L.VOLTAGE_RANGE_V, "V", "Total supply (V), for the swing when output_swing_v is not given."),
    "rout_ohm": (L.ROUT_RANGE_OHM, "ohm", "Open-loop output resistance (Ω), default 0; above 0 the stages load "
                                         "each other and the whole circuit is solved at once (costlier)."),
    "en_nv_rthz": (L.OPAMP_FIGURE_RANGES["en_nv_rthz"], None, "Input voltage noise density (nV/√Hz)."),
    "in_pa_rthz": (L.OPAMP_FIGURE_RANGES["in_pa_rthz"], None, "Input current noise density (pA/√Hz)."),
    "en_corner_hz": (L.OPAMP_FIGURE_RANGES["en_corner_hz"], "Hz", "1/f corner of the voltage noise (Hz)."),
    "in_corner_hz": (L.OPAMP_FIGURE_RANGES["in_corner_hz"], "Hz", "1/f corner of the current noise (Hz)."),
    "vos_v": (L.OPAMP_FIGURE_RANGES["vos_v"], "V", "Input offset voltage (V)."),
    "ib_a": (L.OPAMP_FIGURE_RANGES["ib_a"], None, "Input bias current (A)."),
    "rail_headroom_v": (L.OPAMP_FIGURE_RANGES["rail_headroom_v"], "V",
                        "How close to each rail the output swings (V)."),
}


def _opamp_fields(allow_none: bool) -> dict:
    out = {}
    for name, ((lo, hi), unit, doc) in OPAMP_FIGURES.items():
        rng = ma.validate.Range(min=lo, max=hi)
        if unit is None:
            out[name] = ma.fields.Float(allow_none=allow_none, validate=rng, metadata={"description": doc})
        else:
            out[name] = Quantity(unit=unit, allow_none=allow_none, validate=rng, metadata={"description": doc})
    return out


OpAmpSchema = StrictSchema.from_dict({
    "gbw_hz": Quantity(unit="Hz", required=True, validate=ma.validate.Range(min=L.GBW_RANGE_HZ[0],
                                                                             max=L.GBW_RANGE_HZ[1]),
                       metadata={"description": "Gain-bandwidth product (Hz)."}),
    **_opamp_fields(False),
    "part_id": ma.fields.String(validate=_ID, allow_none=True),
}, name="OpAmp")


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
    stage_peak_margin_db = ma.fields.Float(load_default=1.0, validate=ma.validate.Range(min=0, max=40), metadata={
        "description": "How far an intermediate stage output may peak above the output level (dB)."})
    output_amplitude_v = ma.fields.Float(load_default=1.0, validate=ma.validate.Range(min=1e-3, max=1e3), metadata={
        "description": "Peak output voltage the slew-rate figures are for (V)."})
    gbw_error = ma.fields.Float(load_default=0.01, validate=ma.validate.Range(min=1e-4, max=0.5), metadata={
        "description": "Relative f0/Q error the GBW figures are for (0.01 = 1 %); a stage off by more than twice "
                       "this draws a warning."})
    passband_margin_db = ma.fields.Float(validate=ma.validate.Range(min=0, max=3), metadata={
        "description": "Requirement designs: passband loss kept in reserve for part errors (dB). The transfer "
                       "function is computed for passband_ripple_db minus this. Default: "
                       f"{DEFAULT_PASSBAND_MARGIN_FRACTION:g} x the ripple."})
    stopband_margin_db = ma.fields.Float(validate=ma.validate.Range(min=0, max=60), metadata={
        "description": "Requirement designs: extra stopband loss kept in reserve for part errors (dB); default "
                       f"{DEFAULT_STOPBAND_MARGIN_DB:g}. Set both margins to 0 for the minimum order of "
                       "/v1/approximations."})
    format = one_of(["json", "csv", "spice", "svg"], load_default="json",
                    description="`csv`: the BOM as a table; `spice`: the netlist as text; `svg`: the schematic.")
    stage = StrictInteger(validate=ma.validate.Range(min=1), metadata={
        "description": "With `format: svg`: draw only this stage (numbered from 1); default the whole filter."})
    supply = ma.fields.Nested(SupplySchema, metadata={"description": SUPPLY_DESCRIPTION})

    @ma.validates_schema
    def _margins(self, data, **kwargs):
        ripple = data.get("passband_ripple_db")
        margin = data.get("passband_margin_db")
        if ripple is not None and margin is not None and margin >= ripple:
            raise ma.ValidationError("passband_margin_db must be below passband_ripple_db", "passband_margin_db")

    @ma.post_load
    def _typed(self, data, **kwargs):
        parts = data.get("parts")
        stock = (parts or {}).get("stock") or []
        return {"request": DesignRequest(
            requirement=requirement_from(data),
            topology=tuple(data["topology"]) if isinstance(data["topology"], list) else data["topology"],
            strategy=tuple(data["strategy"]) if isinstance(data.get("strategy"), list) else data.get("strategy"),
            parts=None if parts is None else PartsPolicy.from_dict(_parts_policy(parts)),
            opamp=None if data.get("opamp") is None else OpAmpSpec.from_dict(data["opamp"]),
            exact=data["exact"], gain=data["gain"], impedance_ohm=data.get("impedance_ohm"),
            stage_peak_margin_db=data["stage_peak_margin_db"], output_amplitude_v=data["output_amplitude_v"],
            gbw_error=data["gbw_error"], passband_margin_db=data.get("passband_margin_db"),
            stopband_margin_db=data.get("stopband_margin_db"), stock_entries=len(stock),
            supply=None if data.get("supply") is None else SupplySettings.from_json(data["supply"], "supply")),
            "format": data["format"], "stage": data.get("stage")}


def _parts_policy(parts: dict) -> dict:
    """The request's ``parts`` as the policy realization reads (``min_value``/``max_value``, stock per kind)."""
    stock = parts.get("stock") or []
    policy: dict = {}
    for key, kind in (("resistors", "resistor"), ("capacitors", "capacitor")):
        given = dict(parts.get(key) or {})
        rng = given.pop("range", None)
        if rng is not None:
            given["min_value"], given["max_value"] = rng
        entries = [{k: v for k, v in e.items() if k != "kind"} for e in stock if e["kind"] == kind]
        if entries:
            given["stock"] = entries
        if given or key in parts:
            policy[key] = given
    return policy


class ComponentSchema(StrictSchema):
    ref = ma.fields.String(required=True, validate=[_REF, PART_REF],
                           metadata={"description": "Reference unique across the design (R7, C3)."})
    role = ma.fields.String(allow_none=True, validate=ma.validate.Length(min=1, max=L.MAX_REF_LENGTH), metadata={
        "description": "Position in the topology (R1, Rf ...); optional when editing."})
    kind = one_of(["resistor", "capacitor"], required=True, description="Part kind.")
    value = Quantity(unit=("ohm", "F"), required=True, validate=_VALUE, metadata={
        "description": f"Chosen value (Ω or F): resistors {L.RESISTOR_RANGE_OHM[0]:g} to {L.RESISTOR_RANGE_OHM[1]:g} Ω, "
                       f"capacitors {L.CAPACITOR_RANGE_F[0]:g} to {L.CAPACITOR_RANGE_F[1]:g} F."})
    ideal = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=0, max=1e300, min_inclusive=False),
                            metadata={"description": "Value the design equations asked for (Ω or F)."})
    tolerance = ma.fields.Float(allow_none=True, validate=_TOLERANCE)
    dielectric = ma.fields.String(allow_none=True, validate=_DIELECTRIC)
    part_id = ma.fields.String(allow_none=True, validate=_ID)


OpAmpUseSchema = StrictSchema.from_dict({
    "ref": ma.fields.String(required=True, validate=[_REF, PART_REF]),
    "role": ma.fields.String(allow_none=True, validate=ma.validate.Length(min=1, max=L.MAX_REF_LENGTH)),
    "gbw_hz": Quantity(unit="Hz", allow_none=True, validate=ma.validate.Range(min=L.GBW_RANGE_HZ[0],
                                                                               max=L.GBW_RANGE_HZ[1]),
                       metadata={"description": "Gain-bandwidth product (Hz); null: ideal op-amp."}),
    **_opamp_fields(True),
    "part_id": ma.fields.String(allow_none=True, validate=_ID),
}, name="OpAmpUse")


_FIGURES = dict(keys=ma.fields.String(), values=ma.fields.Float(allow_none=True), allow_none=True)


class OpAmpRequirementSchema(ma.Schema):
    error = ma.fields.Float(allow_none=True, metadata={"description": "Relative f0/Q error the GBW figures are for."})
    gbw_rule_hz = ma.fields.Float(allow_none=True, metadata={"description": "Rule-of-thumb GBW (Hz)."})
    gbw_rule = ma.fields.String(allow_none=True)
    gbw_required_hz = ma.fields.Float(allow_none=True, metadata={
        "description": "Smallest GBW (Hz) keeping f0 and Q within the error with the single-pole model."})
    slew_required_v_per_us = ma.fields.Float(allow_none=True)
    slew_rule = ma.fields.String(allow_none=True)
    signal_frequency_hz = ma.fields.Float(allow_none=True)
    output_peak_v = ma.fields.Float(allow_none=True)
    gbw_required_predistorted_hz = ma.fields.Float(allow_none=True, metadata={
        "description": "With an op-amp given: smallest GBW (Hz) for which the stage, its parts designed for that "
                       "GBW (predistorted), keeps f0 and Q within the error when the part's GBW is off by "
                       "`gbw_spread`; null when no op-amp was given or no GBW does."})
    gbw_spread = ma.fields.Float(allow_none=True, metadata={
        "description": "Relative GBW spread (part to part) the predistorted figure allows for."})
    predistorted = ma.fields.Boolean(allow_none=True, metadata={
        "description": "Whether this reply's design chose the stage's parts for its op-amp (its section's f0 and Q "
                       "moved so that with the op-amp they land on target). An evaluated document takes its parts as "
                       "given and reports false."})
    design_section = ma.fields.Dict(allow_none=True, metadata={
        "description": "When predistorted: what the design equations were asked for (f0_hz, q, fz_hz, gain)."})


class StageSchema(StrictSchema):
    """One stage of a design document. Only section, topology, strategy, components and opamps are read;
    the figures are recomputed."""

    number = StrictInteger(allow_none=True, validate=ma.validate.Range(min=1, max=L.MAX_STAGES), metadata={
        "description": "Stage number, from 1 (ignored on input)."})
    section = ma.fields.Nested(SectionSchema, required=True)
    topology = one_of(list(TOPOLOGIES), required=True, description="Topology of the stage.")
    strategy = ma.fields.String(allow_none=True, validate=ma.validate.Length(min=1, max=64), metadata={
        "description": "Design strategy (default: the topology's first)."})
    components = ma.fields.List(ma.fields.Nested(ComponentSchema), required=True,
                                validate=ma.validate.Length(max=L.MAX_COMPONENTS_PER_STAGE))
    opamps = ma.fields.List(ma.fields.Nested(OpAmpUseSchema), required=True,
                            validate=ma.validate.Length(max=L.MAX_OPAMPS_PER_STAGE))
    achieved = ma.fields.Dict(**_FIGURES, metadata={
        "description": "f0_hz, q, gain, fz_hz and their relative errors with ideal op-amps (circuit engine)."})
    achieved_macromodel = ma.fields.Dict(**_FIGURES, metadata={"description": "The same with the given op-amp."})
    opamp_requirement = ma.fields.Nested(OpAmpRequirementSchema, allow_none=True, metadata={
        "description": "GBW needed (rule of thumb and exact from the macromodel) and slew rate needed."})
    peak_gain_db = ma.fields.Float(allow_none=True, metadata={
        "description": "Largest gain from the filter input to this stage's output (dB)."})
    peak_frequency_hz = ma.fields.Float(allow_none=True)
    output_node = ma.fields.String(allow_none=True, validate=ma.validate.Length(max=64))
    schematic = ma.fields.Raw(allow_none=True, metadata={"description": "Ignored on input."})


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
    loss_db = ma.fields.Float(metadata={"description": "Loss at the edge with the chosen parts, below the verdict's "
                                                       "reference gain (dB)."})
    required_db = ma.fields.Float()
    margin_db = ma.fields.Float()


class SummarySchema(ma.Schema):
    meets = ma.fields.Boolean(allow_none=True, metadata={"description": "The verdict (null for by-order designs)."})
    status = ma.fields.String(allow_none=True, metadata={"description": "`meets`, `misses`, `unstable`, `unproved`."})
    worst_margin_db = ma.fields.Float(allow_none=True)
    edges = ma.fields.List(ma.fields.Nested(SummaryEdgeSchema), metadata={
        "description": "Loss at each requirement edge (the verdict checks the whole bands)."})


class WarningSchema(ma.Schema):
    code = ma.fields.String()
    message = ma.fields.String()
    stage = ma.fields.Integer(allow_none=True, metadata={"description": "Stage number, from 1."})


_NUMBER_OR_PAIR = FrequencyOrPair


class RequirementObjectSchema(StrictSchema):
    """The requirement a design document carries (as /v1/designs wrote it, or edited): the filter request's
    fields, every one nullable. Evaluation recomputes the verdict from it."""

    response = one_of(ResponseType, required=True, description="Response type.")
    family = one_of(Family, allow_none=True, description="Approximation family.")
    order = StrictInteger(allow_none=True, validate=ma.validate.Range(min=1, max=20))
    cutoff_hz = FrequencyOrPair(allow_none=True)
    cutoff_at = one_of(CutoffAt, allow_none=True, description="`family` or `-3db`.")
    passband_hz = FrequencyOrPair(allow_none=True)
    stopband_hz = FrequencyOrPair(allow_none=True)
    passband_ripple_db = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=0.001, max=3.0))
    stopband_attenuation_db = ma.fields.Float(allow_none=True, validate=ma.validate.Range(
        min=0.0, max=150.0, min_inclusive=False))
    passband_upper_hz = Quantity(unit="Hz", allow_none=True, validate=FREQ_RANGE)
    group_delay = ma.fields.Nested(GroupDelayLimitSchema, allow_none=True)
    excess = one_of(Excess, allow_none=True, description="Where the excess selectivity went.")
    section_order = one_of(SectionOrder, allow_none=True, description="Order of the sections.")


class RangesSchema(StrictSchema):
    resistor = RangeField("ohm", allow_none=True)
    capacitor = RangeField("F", allow_none=True)


class SeriesNamesSchema(StrictSchema):
    resistor = ma.fields.String(allow_none=True, validate=ma.validate.Length(min=1, max=16))
    capacitor = ma.fields.String(allow_none=True, validate=ma.validate.Length(min=1, max=16))


class SettingsObjectSchema(StrictSchema):
    """The options a design was made with; evaluation redoes its figures with them."""

    gbw_error = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=1e-4, max=0.5))
    output_amplitude_v = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=1e-3, max=1e3))
    stage_peak_margin_db = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=0, max=40))
    section_order = one_of(SectionOrder, allow_none=True, description="Order of the sections.")
    exact = ma.fields.Boolean(allow_none=True, truthy={True}, falsy={False})
    impedance_ohm = Quantity(unit="ohm", allow_none=True, validate=ma.validate.Range(min=10, max=1e8))
    ranges = ma.fields.Nested(RangesSchema, allow_none=True, metadata={
        "description": "Allowed range per part kind; parts outside draw a warning."})
    series = ma.fields.Nested(SeriesNamesSchema, allow_none=True)
    passband_margin_db = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=0, max=3))
    stopband_margin_db = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=0, max=60))
    gain = ma.fields.Float(allow_none=True, validate=ma.validate.Range(min=1e-3, max=1e4))
    supply = ma.fields.Nested(SupplySchema, allow_none=True, metadata={"description": SUPPLY_DESCRIPTION})


_IGNORED = {"description": "Ignored on input (recomputed)."}


class DesignDocumentSchema(StrictSchema):
    """A design document as /v1/designs returns it, possibly edited. The derived fields (bom, netlist,
    summary, verdict, warnings, figures) may be sent back; they are recomputed."""

    response = one_of(ResponseType, allow_none=True, description="Response type.")
    family = one_of(Family, description="Approximation family.", allow_none=True)
    order = StrictInteger(allow_none=True, validate=ma.validate.Range(min=0, max=2 * L.MAX_STAGES))
    stages = ma.fields.List(ma.fields.Nested(StageSchema), required=True,
                            validate=ma.validate.Length(min=1, max=L.MAX_STAGES))
    requirement = ma.fields.Nested(RequirementObjectSchema, allow_none=True, metadata={
        "description": "What the design must meet; evaluation verifies the circuit against it (edit it to "
                       "re-verify). Null for designs by order."})
    settings = ma.fields.Nested(SettingsObjectSchema, allow_none=True)
    bom = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    bom_lines = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    netlist = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    summary = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    verdict = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    warnings = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    overall_gain = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    output_peak_gain_db = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    service_version = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    steps = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    yield_ = ma.fields.Raw(allow_none=True, data_key="yield", attribute="yield", metadata=_IGNORED)
    noise = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    supply = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    grades = ma.fields.Raw(allow_none=True, metadata=_IGNORED)
    cost = ma.fields.Raw(allow_none=True, metadata=_IGNORED)


class DesignStepSchema(ma.Schema):
    action = one_of(["design", "reselect", "margin", "order"], description=(
        "`design`: the first design; `reselect`: other part choices of the stages furthest off, verified "
        "whole; `margin`: the reserve of the band that missed widened; `order`: one more order."))
    detail = ma.fields.String(metadata={"description": "What changed, with values."})
    order = ma.fields.Integer(metadata={"description": "Order of the transfer function after the step."})
    passband_margin_db = ma.fields.Float(metadata={"description": "Passband reserve the step designed with (dB)."})
    stopband_margin_db = ma.fields.Float(metadata={"description": "Stopband reserve the step designed with (dB)."})
    status = ma.fields.String(allow_none=True, metadata={
        "description": "The verdict after the step: meets, misses, unstable or unproved (null: the step could "
                       "not be made, or no requirement to verify)."})
    worst_margin_db = ma.fields.Float(allow_none=True, metadata={"description": "Worst margin after the step (dB)."})


class DesignSchema(ReplySchema):
    """The design document: stages, requirement, settings, BOM, netlist, summary, verdict and warnings."""

    response = ma.fields.String(allow_none=True)
    family = ma.fields.String(allow_none=True)
    order = ma.fields.Integer(allow_none=True)
    stages = ma.fields.List(ma.fields.Nested(StageSchema))
    requirement = ma.fields.Nested(RequirementObjectSchema, allow_none=True)
    settings = ma.fields.Nested(SettingsObjectSchema, allow_none=True)
    bom = ma.fields.List(ma.fields.Nested(BomLineSchema), metadata={
        "description": "A line per part: {ref, kind, value, tolerance, dielectric, part_id}."})
    netlist = ma.fields.String(metadata={"description": "SPICE netlist of the whole filter (VIN in 0 AC 1, output "
                                                        "node out); runs in ngspice batch mode unchanged."})
    summary = ma.fields.Nested(SummarySchema)
    verdict = ma.fields.Nested(VerdictSchema, allow_none=True, metadata={
        "description": "The circuit verified against the requirement as asked, on the whole band, with its "
                       "op-amp models (null for designs by order)."})
    steps = ma.fields.List(ma.fields.Nested(DesignStepSchema), metadata={
        "description": "What the design loop did, in order: the first design, then (only when it missed) other "
                       "part choices, wider reserves and one more order, each with the verdict after it. The "
                       "reply is the first design that meets, else the one with the largest worst margin. "
                       "Empty for an evaluated document."})
    warnings = ma.fields.List(ma.fields.Nested(WarningSchema))
    overall_gain = ma.fields.Float(allow_none=True)
    output_peak_gain_db = ma.fields.Float(allow_none=True)
    supply = ma.fields.Nested(SupplyReportSchema, allow_none=True, metadata={
        "description": "With `settings.supply`: the operating point of every op-amp output, the output offsets "
                       "and the parts the supply adds; null otherwise."})
    noise = ma.fields.Nested(DesignNoiseSchema, allow_none=True, metadata={
        "description": "When an op-amp has noise figures: the output noise over the netlist's `.noise` sweep and "
                       "its largest contributions; null otherwise."})
