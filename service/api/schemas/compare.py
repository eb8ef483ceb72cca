"""The request of /v1/approximations/compare: one requirement, every family, optionally the parts to build with."""

from __future__ import annotations

import marshmallow as ma

from service.api.fields import Quantity
from service.api.schemas.common import StrictSchema, one_of
from service.api.schemas.designs import OpAmpSchema, PartsSchema, _parts_policy
from service.api.schemas.filters import _ATTEN, _RIPPLE, FREQ_RANGE, BAND_RESPONSES, FrequencyOrPair, _check_pair
from service.api.schemas.montecarlo import MC_KEYS, MonteCarloOptionsSchema
from service.approximation import ResponseType
from service.realization import OpAmpSpec, PartsPolicy
from service.workflows.yielding import MonteCarloSpec


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
    format = one_of(["json", "csv"], name="ApproximationBodyFormat", load_default="json",
                    description="`csv`: a row per family.")

    @ma.validates_schema
    def _pairs(self, data, **kwargs):
        band = data.get("response") in BAND_RESPONSES
        for name in ("passband_hz", "stopband_hz"):
            if name in data:
                _check_pair(data, name, band)

    parts = ma.fields.Nested(PartsSchema, metadata={
        "description": "What can be bought, as for /v1/designs: each meeting family is then realized (first "
                       "design step, `auto` topologies, no design loop) and its op-amps, GBW need and a quick "
                       "predicted yield with the parts' tolerances are reported."})
    opamp = ma.fields.Nested(OpAmpSchema, metadata={"description": "The op-amp in every position (default ideal)."})
    gbw_error = ma.fields.Float(load_default=0.01, validate=ma.validate.Range(min=1e-4, max=0.5), metadata={
        "description": "Relative f0/Q error the GBW figures are for (0.01 = 1 %)."})
    yield_ = ma.fields.Nested(MonteCarloOptionsSchema, data_key="yield", metadata={
        "description": "With parts: how the boards of the quick yield are drawn (trials, seed, distribution, "
                       "temperature ...), as /v1/tolerance draws them."})

    @ma.post_load
    def _typed(self, data, **kwargs):
        parts = data.get("parts")
        data["parts"] = None if parts is None else PartsPolicy.from_dict(_parts_policy(parts))
        data["opamp"] = None if data.get("opamp") is None else OpAmpSpec.from_dict(data["opamp"])
        mc = data.pop("yield_", None)
        if mc is not None and parts is None:
            raise ma.ValidationError({"yield": ["the quick yield needs parts: give parts with their tolerances"]})
        data["monte_carlo"] = None if mc is None else MonteCarloSpec(**{k: mc[k] for k in MC_KEYS
                                                                        if mc.get(k) is not None})
        return data
