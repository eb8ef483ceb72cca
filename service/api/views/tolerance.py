"""POST /v1/tolerance: Monte Carlo, sensitivity, worst case and yield of a design."""

from __future__ import annotations

from dataclasses import replace

from flask import current_app
from flask.views import MethodView

from service.api import metrics
from service.workflows import tolerance
from service.api.extension import Blueprint, representation
from service.api.formats import FIGURE_DIGITS, csv_response, svg_response
from service.api.schemas.common import representation_query
from service.api.schemas.tolerance import ToleranceRequestSchema, ToleranceSchema
from service.api.views.designs import EVALUATE_EXAMPLE

blp = Blueprint("tolerance", __name__, url_prefix="/v1",
                description="Monte Carlo, sensitivity, worst case and yield.")

_DESCRIPTION = """\
The question a design review asks: with real parts at their tolerances (and over
temperature), how many boards meet the requirement, and which part is to blame
when one does not.

Monte Carlo over `trials` boards (each part drawn from `uniform` ±tolerance or
`gaussian` with the tolerance at 3σ — common practice; optional board
temperature range with temperature coefficients; optional op-amp GBW spread),
evaluated at circuit level: per-frequency percentiles (min, 0.135, 2.5, 50,
97.5, 99.865, max) of magnitude, phase and group delay; distributions of the
−3 dB frequency, passband ripple, stopband attenuation and each stage's f0 and
Q; the yield -- each board's circuit verified against the requirement (or the
`mask`) by the same whole-band verifier as /v1/designs, so a board counts as
passing exactly when a design with its values would be said to meet it
(unstable boards fail) -- with its 95 % Wilson interval and which criterion
fails most; normalized sensitivities of
each stage's f0 and Q and of the magnitude (dB per % change) for every part,
ranked; and worst-case corners at each mask edge. `include_trials: N` returns
the first N boards' part values so a failing one can be rebuilt in a simulator.

The same request and `seed` give the same numbers. `format=csv`: percentiles
per frequency; `format=svg`: the magnitude envelope with the mask;
`format=text&field=yield.fraction`: one value. At most
ROLLOFF_MAX_TRIALS trials, and the run's estimated work (trials × points × the
circuit's cost, plus each trial's verification) at most ROLLOFF_MAX_WORK (about
2 s of CPU; a problem over the limit says how many trials fit).

Example (PM-7 bearing-noise channel sketch): 2,000 boards, Gaussian, −20 to 70 °C.
"""

EXAMPLE = {"design": EVALUATE_EXAMPLE, "trials": 2000, "seed": 7, "distribution": "gaussian",
           "temperature": {"min_c": -20, "max_c": 70},
           "mask": [{"start_hz": 0, "stop_hz": "300Hz", "max_loss_db": 0.5},
                    {"start_hz": "10kHz", "stop_hz": "50kHz", "min_loss_db": 35.0}],
           "include_trials": 2}


FORMATS = ("json", "csv", "svg", "text")
ToleranceRepresentation = representation_query("ToleranceRepresentation", FORMATS)


@blp.route("/tolerance")
class Tolerance(MethodView):
    @blp.arguments(ToleranceRepresentation, location="query", unknown="raise")
    @blp.arguments(ToleranceRequestSchema, example=EXAMPLE)
    @blp.reply(ToleranceSchema, *FORMATS[1:], description="The analysis (JSON), percentiles per frequency (CSV), "
                                                           "the envelope figure (SVG) or one value as text.")
    @blp.alt_response(400, response="BAD_REQUEST", description="The body is not valid JSON.")
    @blp.alt_response(413, response="REQUEST_ENTITY_TOO_LARGE", description="The body is too large.")
    @blp.alt_response(415, response="UNSUPPORTED_MEDIA_TYPE", description="The body is not JSON.")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="Invalid request or over a limit.")
    @blp.doc(summary="Monte Carlo, sensitivity, worst case and yield", description=_DESCRIPTION,
             operationId="analyze_tolerance")
    def post(self, _query, args):
        request = args["request"]
        fmt = representation().produce
        if request.reply != fmt:            # the run computes what the negotiated representation shows
            request = replace(request, reply=fmt)
        result = tolerance(request, current_app.config["ROLLOFF_SETTINGS"])
        metrics.count_trials(request.trials)
        if fmt == "csv":
            return csv_response(result.table(), filename="tolerance.csv", digits=FIGURE_DIGITS)
        if fmt == "svg":
            return svg_response(result.svg())
        return result.as_dict()
