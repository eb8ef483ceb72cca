"""Reply schemas of a design to a yield target: the confirmed yield and the cost of the grades."""

from __future__ import annotations

import marshmallow as ma

from service.api.schemas.montecarlo import DistributionField, TemperatureSchema


class WorstTrialSchema(ma.Schema):
    trial = ma.fields.Integer(metadata={"description": "Trial index (from 0), as in `trials`."})
    frequency_hz = ma.fields.Float(metadata={"description": "Where that trial's margin is least (Hz)."})
    loss_db = ma.fields.Float(metadata={"description": "That trial's loss there (dB)."})
    margin_db = ma.fields.Float(metadata={"description": "That trial's margin on the segment (dB)."})


class CriterionFailuresSchema(ma.Schema):
    segment = ma.fields.Integer(allow_none=True, metadata={"description": "Index of the verified segment (from 0); "
                                                                         "null for the group-delay limit."})
    band = ma.fields.String(metadata={"description": "passband, stopband or group_delay."})
    start_hz = ma.fields.Float()
    stop_hz = ma.fields.Float(allow_none=True, metadata={"description": "Null: to infinity."})
    limit_db = ma.fields.Float(metadata={"description": "Loss limit of the segment (dB)."})
    limit_pct = ma.fields.Float(metadata={"description": "Group-delay deviation limit (%)."})
    failures = ma.fields.Integer(metadata={"description": "Stable trials missing this criterion."})
    worst_margin_db = ma.fields.Float(allow_none=True)
    worst_margin_pct = ma.fields.Float(allow_none=True)
    worst_trial = ma.fields.Nested(WorstTrialSchema, allow_none=True, metadata={
        "description": "The located trial with the least margin on this segment; null when no trial's worst "
                       "point was located."})


class MonteCarloReportSchema(ma.Schema):
    """The options a confirming run drew its boards with, as /v1/tolerance takes them: an option the run did not
    use is left out (not null), so the object can be sent to /v1/tolerance as it is."""

    trials = ma.fields.Integer()
    seed = ma.fields.Integer()
    distribution = DistributionField(metadata={"description": "`uniform`, `gaussian`, or one per part kind."})
    temperature = ma.fields.Nested(TemperatureSchema)
    tempco_ppm_per_c = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.Float())
    gbw_spread = ma.fields.Float()

    @ma.post_dump
    def _without_unused(self, data, **kwargs):
        return {k: v for k, v in data.items() if v is not None}


class YieldConfirmationSchema(ma.Schema):
    passed = ma.fields.Integer()
    trials = ma.fields.Integer()
    fraction = ma.fields.Float()
    ci95_low = ma.fields.Float()
    ci95_high = ma.fields.Float()
    cost = ma.fields.Float(allow_none=True, metadata={"description": "Total relative cost of the grades checked."})


class YieldRoundSchema(ma.Schema):
    passband_margin_db = ma.fields.Float(allow_none=True, metadata={
        "description": "Passband reserve (dB) the design of this round was computed with."})
    stopband_margin_db = ma.fields.Float(allow_none=True)
    order = ma.fields.Integer()
    opamps = ma.fields.Integer()
    nominal_worst_margin_db = ma.fields.Float(allow_none=True, metadata={
        "description": "The nominal design's verified worst margin (dB), after centring."})
    centred = ma.fields.Boolean(metadata={
        "description": "Whether stages took other part choices of the part search to centre the design."})
    estimated_yield_cheapest = ma.fields.Float(allow_none=True, metadata={
        "description": "First-order estimate with every part in its cheapest grade."})
    estimated_yield_tightest = ma.fields.Float(allow_none=True, metadata={
        "description": "First-order estimate with every part in its tightest grade."})
    assignment_cost = ma.fields.Float(allow_none=True)
    confirmations = ma.fields.List(ma.fields.Nested(YieldConfirmationSchema), metadata={
        "description": "Monte Carlo confirmations of this round's assignments, every board verified."})
    outcome = ma.fields.String()


class YieldReportSchema(ma.Schema):
    target = ma.fields.Float()
    reached = ma.fields.Boolean(metadata={"description": "The lower end of the Wilson interval is at or above the "
                                                         "target."})
    fraction = ma.fields.Float(metadata={"description": "Predicted yield: the share of the confirming run's boards "
                                                        "that meet the requirement."})
    passed = ma.fields.Integer()
    trials = ma.fields.Integer()
    ci95_low = ma.fields.Float(metadata={"description": "Wilson score interval, 95 % (Wilson, JASA 1927)."})
    ci95_high = ma.fields.Float()
    unstable = ma.fields.Integer()
    failures_by_criterion = ma.fields.List(ma.fields.Nested(CriterionFailuresSchema), metadata={
        "description": "Per requirement segment: boards failing it and the worst margin (as /v1/tolerance)."})
    monte_carlo = ma.fields.Nested(MonteCarloReportSchema, metadata={
        "description": "The trials, seed and options of the confirming run: /v1/tolerance with these and this "
                       "document draws the same boards and passes the same ones."})
    rule = ma.fields.String()
    interval = ma.fields.String()
    verdict = ma.fields.String()
    method = ma.fields.String(metadata={"description": "The methods followed, with their sources."})
    rounds = ma.fields.List(ma.fields.Nested(YieldRoundSchema), metadata={
        "description": "Each design the search made, in order, and what became of it."})


class CostSchema(ma.Schema):
    total = ma.fields.Float(metadata={"description": "Sum of the parts' grade costs (the caller's unit)."})
    all_cheapest = ma.fields.Float(metadata={"description": "The same with every part in its cheapest grade."})
    all_tightest = ma.fields.Float(metadata={"description": "The same with every part in its tightest grade."})
    priced_parts = ma.fields.Integer(metadata={"description": "Parts whose grade has a cost."})
    rule = ma.fields.String()
