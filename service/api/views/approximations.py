"""/v1/approximations and /v1/approximations/compare."""

from __future__ import annotations

from flask import current_app
from flask.views import MethodView

from service.api.extension import Blueprint, representation
from service.api.formats import FIGURE_DIGITS, csv_response
from service.api.schemas.common import representation_query
from service.api.schemas.compare import CompareRequestSchema
from service.api.schemas.filters import (
    ApproximationRequestSchema, ApproximationSchema, ComparisonSchema, requirement_from,
)
from service.api.schemas.queries import ApproximationQuerySchema, CompareQuerySchema
from service.workflows import approximate, compare

blp = Blueprint("approximations", __name__, url_prefix="/v1",
                description="Requirement or order to transfer function and sections.")

_DESCRIPTION = """\
Turns a requirement, or an order and cutoff, into a transfer function: zeros,
poles (each `[re, im]` in rad/s) and gain, and the first- and second-order
sections that realize it (their product is the transfer function; sorted by
ascending Q unless `section_order` says otherwise).

Ask **by order**: `order` + `cutoff_hz` (a pair `[low, high]` for bandpass and
bandstop), with `passband_ripple_db` (Chebyshev I, elliptic) and
`stopband_attenuation_db` (Chebyshev II, elliptic) where the family needs them.
Or **by requirement**: `passband_hz`, `stopband_hz`, `passband_ripple_db` (largest
passband loss, dB) and `stopband_attenuation_db` (smallest stopband loss, dB); the
reply gives the lowest order of the family that meets it and, in `edges`, the
achieved loss, the required loss and the margin at each edge.

Frequencies in Hz (numbers or strings such as "25.6kHz"), losses in dB.
`format=csv` returns the sections as a table; `format=text&field=order` one
value. The GET form takes the same fields as query parameters (a pair as
`cutoff_hz=35k&cutoff_hz=45k` or `cutoff_hz=35k,45k`). Infeasible or contradictory
requirements (stopband inside the passband, attenuation not above the ripple, an
odd-order Linkwitz-Riley) are 422 problems naming the condition.

Example (Larkspur Fluidics PM-7 accelerometer channel, ahead of a 51.2 kS/s ADC):
flat within 0.1 dB to 10 kHz, at least 80 dB down at 25.6 kHz.
"""

_EXAMPLE_REQUEST = {"response": "lowpass", "family": "elliptic", "passband_hz": "10kHz", "stopband_hz": "25.6kHz",
                    "passband_ripple_db": 0.1, "stopband_attenuation_db": 80}


def _sections_table(approx) -> dict:
    sections = approx.sections
    return {
        "index": list(range(1, len(sections) + 1)),
        "kind": [s.kind.value for s in sections], "order": [s.order for s in sections],
        "f0_hz": [s.f0_hz for s in sections], "q": [s.q for s in sections],
        "fz_hz": [s.fz_hz for s in sections], "gain": [s.gain for s in sections],
    }


def _answer(args):
    approx = approximate(requirement_from(args), current_app.config["ROLLOFF_SETTINGS"])
    if representation().produce == "csv":
        return csv_response(_sections_table(approx), filename="sections.csv")
    return approx.as_dict()


FORMATS = ("json", "csv", "text")
_REPLY = dict(description="The transfer function and its sections (JSON), the sections as CSV, or one value as "
                          "text.")
ApproximationRepresentation = representation_query("ApproximationRepresentation", FORMATS)


@blp.route("/approximations")
class Approximations(MethodView):
    @blp.arguments(ApproximationQuerySchema, location="query", unknown="raise")
    @blp.reply(ApproximationSchema, *FORMATS[1:], **_REPLY)
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="Invalid or infeasible request.")
    @blp.doc(summary="Transfer function from a requirement or an order (query parameters)", description=_DESCRIPTION,
             operationId="approximate_by_query")
    def get(self, args):
        return _answer(args)

    @blp.arguments(ApproximationRepresentation, location="query", unknown="raise")
    @blp.arguments(ApproximationRequestSchema, example=_EXAMPLE_REQUEST)
    @blp.reply(ApproximationSchema, *FORMATS[1:], **_REPLY)
    @blp.alt_response(400, response="BAD_REQUEST", description="The body is not valid JSON.")
    @blp.alt_response(413, response="REQUEST_ENTITY_TOO_LARGE", description="The body is too large.")
    @blp.alt_response(415, response="UNSUPPORTED_MEDIA_TYPE", description="The body is not JSON.")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="Invalid or infeasible request.")
    @blp.doc(summary="Transfer function from a requirement or an order", description=_DESCRIPTION,
             operationId="approximate")
    def post(self, _query, args):
        return _answer(args)


_COMPARE_DESCRIPTION = """\
Every family that can meet one requirement, side by side: order, number of
second-order sections, highest section Q (a sensitivity warning sign), passband
group-delay variation (s), step overshoot (%), settling time to 1 % (s), the
smallest attenuation margin (dB), and what it costs to build: the op-amps of
its sections with `topology: auto` and the largest GBW a stage needs (rule of
thumb |G|·Q·f0/error per section). With `parts` (as for /v1/designs, and
optionally `opamp` and `yield` for how boards are drawn) every meeting family
is realized as /v1/designs realizes it on its first step, and the row gives
the realized op-amp count, the stages' own GBW need, whether the nominal
circuit meets the requirement, and a quick predicted yield: the share of
Monte Carlo boards meeting the requirement by a first-order model of the
part sensitivities, with its Wilson interval (not verified board by board:
/v1/tolerance does that for a design). Families that cannot meet the
requirement within ROLLOFF_MAX_ORDER are listed with `meets: false` and the
reason.

`recommended` weighs them, among the families that meet the requirement and
the stated `overshoot_limit_pct` / `group_delay_variation_limit_s`: with
parts, those whose predicted yield is not distinguishably below the best
(Wilson intervals overlapping the best's); then the fewest op-amps, the lowest
GBW needed, the lowest highest Q, the lowest order; `recommended_reason` says
why, and why the lowest-order family was passed over. `format=csv`: a row per
family; `format=text&field=recommended` one value.

Example (PM-7 accelerometer channel): which approximation for 0.1 dB to 10 kHz
and 80 dB at 25.6 kHz, with at most 10 % step overshoot?
"""


def _compare(args):
    comparison = compare(requirement_from(args), current_app.config["ROLLOFF_SETTINGS"],
                         overshoot_limit_pct=args.get("overshoot_limit_pct"),
                         group_delay_variation_limit_s=args.get("group_delay_variation_limit_s"),
                         parts=args.get("parts"), opamp=args.get("opamp"), gbw_error=args["gbw_error"],
                         monte_carlo=args.get("monte_carlo"))
    if representation().produce == "csv":
        return csv_response(comparison.table(), filename="compare.csv", digits=FIGURE_DIGITS)
    return comparison.as_dict()


_COMPARE_REPLY = dict(description="The comparison (JSON), a row per family (CSV), or one value as text.")


@blp.route("/approximations/compare")
class Compare(MethodView):
    @blp.arguments(CompareQuerySchema, location="query", unknown="raise")
    @blp.reply(ComparisonSchema, *FORMATS[1:], **_COMPARE_REPLY)
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="Invalid or contradictory requirement.")
    @blp.doc(summary="Every family side by side for one requirement (query parameters)",
             description=_COMPARE_DESCRIPTION, operationId="compare_families_by_query")
    def get(self, args):
        return _compare(args)

    @blp.arguments(ApproximationRepresentation, location="query", unknown="raise")
    @blp.arguments(CompareRequestSchema, example=dict(
        {k: v for k, v in _EXAMPLE_REQUEST.items() if k != "family"}, overshoot_limit_pct=10))
    @blp.reply(ComparisonSchema, *FORMATS[1:], **_COMPARE_REPLY)
    @blp.alt_response(400, response="BAD_REQUEST", description="The body is not valid JSON.")
    @blp.alt_response(413, response="REQUEST_ENTITY_TOO_LARGE", description="The body is too large.")
    @blp.alt_response(415, response="UNSUPPORTED_MEDIA_TYPE", description="The body is not JSON.")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="Invalid or contradictory requirement.")
    @blp.doc(summary="Every family side by side for one requirement", description=_COMPARE_DESCRIPTION,
             operationId="compare_families")
    def post(self, _query, args):
        return _compare(args)
