"""Schemas of a verdict: the one shape designs, edited documents and response masks report it in."""

from __future__ import annotations

import marshmallow as ma

from service.workflows.requirement import OPEN_BAND_RULE, REFERENCE_GAIN_RULE


class SegmentVerdictSchema(ma.Schema):
    band = ma.fields.String(metadata={"description": "`passband` (largest loss) or `stopband` (smallest loss)."})
    start_hz = ma.fields.Float()
    stop_hz = ma.fields.Float(allow_none=True, metadata={"description": "Null: the band runs to infinity."})
    limit_db = ma.fields.Float(metadata={"description": "Largest (passband) or smallest (stopband) loss allowed, dB."})
    open_end = ma.fields.Boolean(metadata={"description": "The band is open in the requirement (checked up to "
                                                           "stop_hz, or to infinity for a stopband)."})
    margin_db = ma.fields.Float(allow_none=True, metadata={
        "description": "Worst margin over the checked band (dB; >= 0 met). Within 1e-9 dB of 0 it is 0. When not "
                       "proved within the search budget, the proved lower bound."})
    worst_hz = ma.fields.Float(allow_none=True, metadata={"description": "Where the worst margin is (Hz; null: at "
                                                                         "infinite frequency)."})
    loss_db = ma.fields.Float(allow_none=True, metadata={"description": "Loss there, below the reference gain (dB)."})
    met = ma.fields.Boolean()
    proved = ma.fields.Boolean(metadata={"description": "The margin is proved on the whole band, not sampled."})
    unresolved_db = ma.fields.Float(allow_none=True, metadata={"description": "Size of what could not be proved "
                                                                              "(dB), 0 when proved."})
    checked_to_hz = ma.fields.Float(allow_none=True, metadata={"description": "Upper end of the checked band (Hz; "
                                                                              "null: infinity)."})
    ended_hz = ma.fields.Float(allow_none=True, metadata={
        "description": "Where an open passband ended with the op-amps' roll-off (Hz), when it did."})
    cause = ma.fields.String(allow_none=True, metadata={
        "description": "Why a missed segment misses: the transfer function, the snapped parts, or the op-amps."})


class DelayVerdictSchema(ma.Schema):
    stop_hz = ma.fields.Float()
    limit_pct = ma.fields.Float()
    margin_pct = ma.fields.Float(allow_none=True)
    worst_hz = ma.fields.Float(allow_none=True)
    deviation_pct = ma.fields.Float(allow_none=True, metadata={"description": "Largest |tau - tau(0)| / tau(0) up "
                                                                              "to stop_hz (%)."})
    dc_delay_s = ma.fields.Float(allow_none=True)
    met = ma.fields.Boolean()
    proved = ma.fields.Boolean()


class UnstablePoleSchema(ma.Schema):
    stage = ma.fields.Integer(allow_none=True, metadata={"description": "Stage number (from 1); null when the "
                                                                         "stages load each other."})
    group = ma.fields.Integer(allow_none=True)
    frequency_hz = ma.fields.Float()
    real_rad_s = ma.fields.Float()
    imag_rad_s = ma.fields.Float()


class StabilitySchema(ma.Schema):
    stable = ma.fields.Boolean(metadata={"description": "No pole of the circuit (with its op-amp models) in the "
                                                        "closed right half-plane."})
    unstable_poles = ma.fields.List(ma.fields.Nested(UnstablePoleSchema))
    cause = ma.fields.String(allow_none=True)


class VerdictRulesSchema(ma.Schema):
    reference = ma.fields.String()
    open_bands = ma.fields.String()
    numerical_tolerance_db = ma.fields.Float()
    method = ma.fields.String()


class VerdictSchema(ma.Schema):
    meets = ma.fields.Boolean(metadata={"description": "Stable, and every margin >= 0: exactly worst_margin_db >= 0."})
    passed = ma.fields.Boolean(attribute="pass", data_key="pass", metadata={"description": "Same as meets."})
    status = ma.fields.String(metadata={"description": "`meets`, `misses`, `unstable` or `unproved`."})
    worst_margin_db = ma.fields.Float(allow_none=True)
    worst_frequency_hz = ma.fields.Float(allow_none=True)
    reference_gain_db = ma.fields.Float(allow_none=True, metadata={"description": REFERENCE_GAIN_RULE})
    segments = ma.fields.List(ma.fields.Nested(SegmentVerdictSchema))
    group_delay = ma.fields.Nested(DelayVerdictSchema, allow_none=True)
    stability = ma.fields.Nested(StabilitySchema)
    rules = ma.fields.Nested(VerdictRulesSchema, metadata={"description": OPEN_BAND_RULE})
