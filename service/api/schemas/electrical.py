"""Schemas of the noise, headroom and supply fields: ``supply`` of designs (and of a document's settings),
``noise`` and ``headroom`` of /v1/responses, and the sections the replies carry.

The request schemas check types and ranges for the OpenAPI document and SI strings; the workflow's
readers (:class:`service.workflows.SupplySettings`, :class:`~service.workflows.NoiseRequest`,
:class:`~service.workflows.HeadroomRequest`) build the typed request from what they load, with the
cross-field rules (rails not reversed, exactly one level, a band within the grid).
"""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import Quantity, StrictInteger
from service.api.schemas.common import StrictSchema, one_of
from service.response.noise import MAX_TEMPERATURE_K
from service.workflows import limits as L
from service.workflows.electrical import InputCoupling, MidRail

_RAIL = ma.validate.Range(min=L.RAIL_RANGE_V[0], max=L.RAIL_RANGE_V[1])
_LEVEL = ma.validate.Range(min=L.LEVEL_RANGE_V[0], max=L.LEVEL_RANGE_V[1])
_BAND = ma.validate.Range(min=0, max=1e12, min_inclusive=False)

CAUTION = ("A supply above 60 V DC, or one derived from the mains, can hurt someone: follow local electrical "
           "codes and have the design reviewed by a licensed or otherwise qualified person.")


class SupplySchema(StrictSchema):
    """The board's rails: `v_neg` 0 for a single rail, negative for split rails."""

    v_pos = Quantity(unit="V", required=True, validate=_RAIL, metadata={
        "description": "Positive rail (V), above v_neg and above 0."})
    v_neg = Quantity(unit="V", allow_none=True, validate=_RAIL, metadata={
        "description": "Negative rail (V): 0 (default) for a single rail, negative for split rails."})
    mid_rail = one_of(MidRail, allow_none=True, description=(
        "Single rail: mid-rail signal ground from a divider buffered by a follower op-amp (`buffered`, default) "
        "or the decoupled divider alone (`divider`)."))
    input_coupling = one_of(InputCoupling, allow_none=True, description=(
        "Single rail: how the input reaches the first stage. `dc`: the source is referred to mid-rail; `ac`: a "
        "coupling capacitor and a bias resistor to mid-rail; `none`: the source stays ground-referenced (the "
        "first stage blocks DC); `auto` (default) chooses from the response."))


SUPPLY_DESCRIPTION = (
    "The board's supply {v_pos, v_neg, mid_rail, input_coupling} (V). A single rail (v_neg 0) puts a mid-rail "
    "bias network and the input coupling into the netlist and the BOM; the reply's `supply` gives every op-amp "
    "output's DC operating point against its range (the rails less the op-amp's rail_headroom_v, and its "
    "output_swing_v about the bias point) and the output offset (vos_v, ib_a) per stage and at the output. Kept "
    "in the document's settings. " + CAUTION)


class NoiseOpAmpSchema(StrictSchema):
    """Noise figures for every op-amp of the design that gives none."""

    en_nv_rthz = ma.fields.Float(validate=ma.validate.Range(*L.OPAMP_FIGURE_RANGES["en_nv_rthz"]), metadata={
        "description": "Input voltage noise density (nV/√Hz)."})
    in_pa_rthz = ma.fields.Float(validate=ma.validate.Range(*L.OPAMP_FIGURE_RANGES["in_pa_rthz"]), metadata={
        "description": "Input current noise density at each input (pA/√Hz)."})
    en_corner_hz = Quantity(unit="Hz", validate=ma.validate.Range(*L.OPAMP_FIGURE_RANGES["en_corner_hz"]),
                            metadata={"description": "1/f corner of the voltage noise (Hz)."})
    in_corner_hz = Quantity(unit="Hz", validate=ma.validate.Range(*L.OPAMP_FIGURE_RANGES["in_corner_hz"]),
                            metadata={"description": "1/f corner of the current noise (Hz)."})


class BandField(ma.fields.List):
    """``[low, high]`` in Hz."""

    def __init__(self, **kwargs):
        super().__init__(Quantity(unit="Hz", validate=_BAND), validate=ma.validate.Length(equal=2), **kwargs)


class NoiseRequestSchema(StrictSchema):
    """Noise of a design: density on the response's grid, integrated over `band_hz`, contributions."""

    band_hz = BandField(metadata={
        "description": "Integration band [low, high] (Hz), within the response's frequencies; default the whole "
                       "grid (its positive part)."})
    temperature_k = ma.fields.Float(validate=ma.validate.Range(min=0, max=MAX_TEMPERATURE_K, min_inclusive=False),
                                    metadata={"description": "Temperature of the resistors (K); default 300.15 K "
                                                             "(27 °C, SPICE's nominal temperature)."})
    full_scale_v = Quantity(unit="V", validate=_LEVEL, metadata={
        "description": "Full-scale output (V peak of a sine): the reply gives the signal-to-noise ratio."})
    input_peak_v = Quantity(unit="V", validate=_LEVEL, metadata={
        "description": "Or a signal at the input (V peak): its output level is this times the reference gain."})
    points_per_decade = StrictInteger(validate=ma.validate.Range(min=10, max=2000), metadata={
        "description": "Points per decade of the integration grid (default 200)."})
    opamp = ma.fields.Nested(NoiseOpAmpSchema, metadata={
        "description": "Noise figures for every op-amp that gives none (its own figures are kept)."})


class HeadroomRequestSchema(StrictSchema):
    """Exactly one level: the input's peak, or the output's peak at its peak-gain frequency."""

    input_peak_v = Quantity(unit="V", validate=_LEVEL, metadata={
        "description": "Peak of a sine at the filter input (V)."})
    output_peak_v = Quantity(unit="V", validate=_LEVEL, metadata={
        "description": "Or the filter output's peak at its peak-gain frequency (V); the input is derived."})


# ------------------------------------------------------------------------------------------------ replies


class NoiseContributionSchema(ma.Schema):
    name = ma.fields.String(metadata={"description": "Part ref (R3, U2), source (U2.en, U2.in+) or `stage 2`."})
    kind = ma.fields.String(metadata={"description": "resistor, opamp, stage, or the kind of a source."})
    stage = ma.fields.Integer(allow_none=True, metadata={"description": "Stage number from 1; null for the parts "
                                                                         "a supply adds."})
    rms_v = ma.fields.Float(metadata={"description": "Its output noise integrated over the band (V RMS)."})
    share = ma.fields.Float(metadata={"description": "Its fraction of the output noise power (0-1)."})


class WarningItemSchema(ma.Schema):
    code = ma.fields.String()
    message = ma.fields.String()
    stage = ma.fields.Integer(allow_none=True, metadata={"description": "Stage number, from 1."})


class ResponseNoiseSchema(ma.Schema):
    """Noise of the design over the response's grid and integrated over the band."""

    band_hz = ma.fields.List(ma.fields.Float(), metadata={"description": "Integration band (Hz)."})
    temperature_k = ma.fields.Float()
    output_density_v_rthz = ma.fields.List(ma.fields.Float(allow_none=True), metadata={
        "description": "Output noise density on the response's frequencies (V/√Hz); null at 0 Hz."})
    input_density_v_rthz = ma.fields.List(ma.fields.Float(allow_none=True), metadata={
        "description": "Input-referred density: the output density over |H(f)| (V/√Hz)."})
    output_rms_v = ma.fields.Float(metadata={"description": "Output noise integrated over the band (V RMS)."})
    input_rms_v = ma.fields.Float(allow_none=True, metadata={
        "description": "output_rms_v over the reference gain (V RMS)."})
    reference_gain = ma.fields.Float(metadata={"description": "Largest |H| on the analysis grids (V/V)."})
    full_scale_v = ma.fields.Float(allow_none=True, metadata={"description": "Output level of the SNR (V peak)."})
    input_peak_v = ma.fields.Float(allow_none=True)
    snr_db = ma.fields.Float(allow_none=True, metadata={
        "description": "Signal-to-noise ratio of a sine at full_scale_v: 20 log10(full_scale_v / √2 / output_rms_v)."})
    max_output_v = ma.fields.Float(allow_none=True, metadata={
        "description": "Largest output (V peak) before any op-amp output leaves its range; null when no range is "
                       "known."})
    dynamic_range_db = ma.fields.Float(allow_none=True, metadata={
        "description": "20 log10(max_output_v / √2 / output_rms_v)."})
    parts = ma.fields.List(ma.fields.Nested(NoiseContributionSchema), metadata={"description": "Largest first."})
    stages = ma.fields.List(ma.fields.Nested(NoiseContributionSchema), metadata={"description": "Largest first."})
    sources = ma.fields.List(ma.fields.Nested(NoiseContributionSchema), metadata={"description": "Largest first."})
    notes = ma.fields.List(ma.fields.String())
    netlist = ma.fields.String(metadata={
        "description": "The circuit analysed with `.noise v(out) VIN` over the band (ngspice batch mode): its "
                       "onoise_total reproduces output_rms_v."})


class OpAmpLevelSchema(ma.Schema):
    ref = ma.fields.String()
    stage = ma.fields.Integer(allow_none=True, metadata={"description": "Stage number from 1; null for the "
                                                                         "mid-rail buffer."})
    node = ma.fields.String()
    peak_gain = ma.fields.Float(metadata={"description": "Largest gain from the filter input to this output (V/V)."})
    peak_frequency_hz = ma.fields.Float()
    peak_v = ma.fields.Float(metadata={"description": "Peak swing at the level analysed (V)."})
    dc_v = ma.fields.Float(metadata={"description": "DC level of the output (V)."})
    low_v = ma.fields.Float(allow_none=True, metadata={"description": "Output range, low end (V)."})
    high_v = ma.fields.Float(allow_none=True, metadata={"description": "Output range, high end (V)."})
    limit_v = ma.fields.Float(allow_none=True, metadata={"description": "Largest swing about dc_v within the range "
                                                                         "(V)."})
    headroom_db = ma.fields.Float(allow_none=True, metadata={"description": "20 log10(limit_v / peak_v): negative "
                                                                              "when it clips."})
    clip_input_v = ma.fields.Float(allow_none=True, metadata={"description": "Input peak at which it clips (V)."})
    level_v = ma.fields.List(ma.fields.Float(), metadata={
        "description": "Its peak swing on the response's frequencies at the level analysed (V)."})


class ClipSchema(ma.Schema):
    ref = ma.fields.String()
    stage = ma.fields.Integer(allow_none=True)


class ResponseHeadroomSchema(ma.Schema):
    """Every op-amp output's level against its range."""

    input_peak_v = ma.fields.Float(metadata={"description": "Input sine peak analysed (V)."})
    output_peak_v = ma.fields.Float(metadata={"description": "The output's peak at that input (V)."})
    output_peak_gain = ma.fields.Float(metadata={"description": "Largest gain from input to output (V/V)."})
    opamps = ma.fields.List(ma.fields.Nested(OpAmpLevelSchema))
    first_clip = ma.fields.Nested(ClipSchema, allow_none=True, metadata={
        "description": "The op-amp that clips at the lowest input; null when no range is known."})
    clip_input_v = ma.fields.Float(allow_none=True)
    max_output_v = ma.fields.Float(allow_none=True, metadata={"description": "Largest undistorted output peak (V)."})
    clips_before_output = ma.fields.Boolean(metadata={
        "description": "An op-amp other than the output's clips first."})
    warnings = ma.fields.List(ma.fields.Nested(WarningItemSchema), metadata={
        "description": "`stage_clips` at the level analysed; `clips_before_output` naming the stage, its level, "
                       "its limit and the frequency."})
    notes = ma.fields.List(ma.fields.String())


class OpAmpBiasSchema(ma.Schema):
    ref = ma.fields.String()
    stage = ma.fields.Integer(allow_none=True, metadata={"description": "Stage number from 1; null for the "
                                                                         "mid-rail buffer."})
    node = ma.fields.String()
    dc_v = ma.fields.Float(metadata={"description": "DC output voltage to ground (V)."})
    offset_v = ma.fields.Float(metadata={"description": "dc_v less its value without offsets and bias currents "
                                                        "(V)."})
    low_v = ma.fields.Float(allow_none=True)
    high_v = ma.fields.Float(allow_none=True)
    within = ma.fields.Boolean(allow_none=True, metadata={"description": "low_v <= dc_v <= high_v."})


class StageOffsetSchema(ma.Schema):
    stage = ma.fields.Integer()
    node = ma.fields.String()
    offset_v = ma.fields.Float(metadata={"description": "DC offset at the stage output (V)."})
    share_at_output_v = ma.fields.Float(metadata={"description": "This stage's op-amps' share of the output "
                                                                 "offset (V)."})


class SupplyPartSchema(ma.Schema):
    ref = ma.fields.String()
    kind = ma.fields.String()
    role = ma.fields.String(allow_none=True)
    value = ma.fields.Float(allow_none=True, metadata={"description": "Ω or F; null for op-amps."})


class SupplyReportSchema(ma.Schema):
    """The design on its supply (derived; the input is `settings.supply`)."""

    v_pos = ma.fields.Float()
    v_neg = ma.fields.Float()
    mid_rail = ma.fields.String(allow_none=True)
    input_coupling = ma.fields.String(metadata={"description": "`dc`, `ac` or `none`, as built."})
    bias_v = ma.fields.Float(metadata={"description": "Signal ground of the stages (V)."})
    input_bias_v = ma.fields.Float(metadata={"description": "DC level the input swings about (V)."})
    opamp_bias = ma.fields.List(ma.fields.Nested(OpAmpBiasSchema))
    stage_offsets = ma.fields.List(ma.fields.Nested(StageOffsetSchema))
    output_offset_v = ma.fields.Float()
    ac_change_db = ma.fields.Float(allow_none=True, metadata={
        "description": "Largest change of the passband response the supply's network causes (dB)."})
    added_parts = ma.fields.List(ma.fields.Nested(SupplyPartSchema), metadata={
        "description": "Parts the supply adds (also in the BOM and the netlist)."})
    caution = ma.fields.String(allow_none=True)


class DesignNoiseSchema(ma.Schema):
    """Noise summary of a design whose op-amps have noise figures."""

    band_hz = ma.fields.List(ma.fields.Float(), metadata={"description": "The netlist's .noise sweep (Hz)."})
    temperature_k = ma.fields.Float()
    output_rms_v = ma.fields.Float()
    input_rms_v = ma.fields.Float(allow_none=True)
    reference_gain = ma.fields.Float()
    max_output_v = ma.fields.Float(allow_none=True)
    dynamic_range_db = ma.fields.Float(allow_none=True)
    parts = ma.fields.List(ma.fields.Nested(NoiseContributionSchema))
    stages = ma.fields.List(ma.fields.Nested(NoiseContributionSchema))
    notes = ma.fields.List(ma.fields.String())
    analysis = ma.fields.String(allow_none=True, metadata={"description": "The netlist's .noise line."})
