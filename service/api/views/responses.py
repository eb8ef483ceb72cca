"""GET/POST /v1/responses: frequency and time response, metrics, mask check; JSON, CSV or SVG."""

from __future__ import annotations

from flask import current_app
from flask.views import MethodView

from service.api.dispatch import frequencies_of, mask_of, response_system
from service.api.extension import Blueprint
from service.api.formats import (
    CSV_MEDIA_TYPE, SVG_MEDIA_TYPE, alternative_content, csv_response, svg_response,
)
from service.api.schemas.responses import ResponseQuerySchema, ResponseRequestSchema, ResponseSchema
from service.response import TimeGrid, analyze

blp = Blueprint("responses", __name__, url_prefix="/v1/responses",
                description="Frequency and time response, metrics and requirement masks.")

_DESCRIPTION = """\
What an engineer reads before signing a design off. Give exactly one system:
`filter` (a requirement or order as in /v1/approximations: the ideal transfer
function), `zeros` + `poles` + `gain` (rad/s), `sections` (standard forms), or
`design` (a design document from /v1/designs, analysed at circuit level with its
chosen part values and op-amp macromodels).

Replies: magnitude (dB), unwrapped phase (degrees) and group delay (s) on the
frequency grid (analytic for transfer functions, from the circuit for designs);
exact step and impulse responses; metrics (passband gain, −3 dB frequency or
both edges, ripple, attenuation at requested frequencies, peak gain and where,
group delay at DC or band centre and its variation across the passband, step
overshoot %, rise time 10–90 %, settling to 1 % and 0.1 %); and with a `mask`,
pass/fail, the worst margin and where. The mask check refines around every
extremum of the margin between grid points, so a ripple peak between samples
cannot hide a failure.

`format=csv`: a row per frequency (or per time point with `table: time`);
`format=svg`: magnitude and phase, group delay and step response, with the mask.
At most ROLLOFF_MAX_FREQUENCY_POINTS frequencies and ROLLOFF_MAX_TIME_POINTS time points.

Example (Larkspur Fluidics PM-7 pressure input): the 50 Hz / 60 Hz mains-pickup
rejection band of a bandstop, checked against a mask.
"""

EXAMPLE = {
    "filter": {"response": "bandstop", "family": "butterworth", "order": 3, "cutoff_hz": ["40Hz", "75Hz"]},
    "frequencies": {"start_hz": "5Hz", "stop_hz": "500Hz", "points": 401, "spacing": "log"},
    "mask": [{"start_hz": 0, "stop_hz": "10Hz", "max_loss_db": 3.0},
             {"start_hz": "49.5Hz", "stop_hz": "60.5Hz", "min_loss_db": 20.0}],
}

_DOC = alternative_content(CSV_MEDIA_TYPE, SVG_MEDIA_TYPE, schema="Response",
                           description="The response and its metrics (JSON), a table (CSV) or a figure (SVG).")


def _answer(system, roots, response_type, *, frequencies, time, mask, passband_hz, attenuation_at_hz, fmt, table,
            default_points: int = 501):
    settings = current_app.config["ROLLOFF_SETTINGS"]
    grid = frequencies_of(frequencies, roots, settings, default_points=default_points)
    result = analyze(system, grid, time=time, mask=mask, response_type=response_type, passband_hz=passband_hz,
                     attenuation_at_hz=attenuation_at_hz or (), max_points=settings.max_frequency_points,
                     max_time_points=settings.max_time_points)
    if fmt == "csv":
        return csv_response(result.table(table), filename=f"response-{table}.csv")
    if fmt == "svg":
        return svg_response(result.svg())
    return result.as_dict()


@blp.route("")
class Responses(MethodView):
    @blp.arguments(ResponseQuerySchema, location="query", unknown="raise")
    @blp.response(200, ResponseSchema)
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="Invalid or infeasible request.")
    @blp.doc(summary="Response of a by-order transfer function (query parameters)", description=_DESCRIPTION, **_DOC)
    def get(self, args):
        from service.api.dispatch import approximation_from_filter

        settings = current_app.config["ROLLOFF_SETTINGS"]
        filt = {k: args[k] for k in ("response", "family", "order", "cutoff_hz", "passband_ripple_db",
                                     "stopband_attenuation_db", "cutoff_at") if k in args}
        approx = approximation_from_filter(filt, settings)
        freqs = None
        if "start_hz" in args:
            freqs = {"start_hz": args["start_hz"], "stop_hz": args["stop_hz"], "points": args["points"],
                     "spacing": "log"}
        import numpy as np

        return _answer(approx, np.concatenate([approx.poles, approx.zeros]), approx.response, frequencies=freqs,
                       time=None, mask=None, passband_hz=None, attenuation_at_hz=None, fmt=args["format"],
                       table=args["table"], default_points=args["points"])

    @blp.arguments(ResponseRequestSchema, example=EXAMPLE)
    @blp.response(200, ResponseSchema)
    @blp.alt_response(400, response="BAD_REQUEST", description="The body is not valid JSON.")
    @blp.alt_response(413, response="REQUEST_ENTITY_TOO_LARGE", description="The body is too large.")
    @blp.alt_response(415, response="UNSUPPORTED_MEDIA_TYPE", description="The body is not JSON.")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="Invalid or infeasible request.")
    @blp.doc(summary="Frequency and time response, metrics and mask check", description=_DESCRIPTION, **_DOC)
    def post(self, args):
        settings = current_app.config["ROLLOFF_SETTINGS"]
        system, roots, response_type = response_system(args, settings)
        time = args.get("time")
        return _answer(system, roots, response_type, frequencies=args.get("frequencies"),
                       time=TimeGrid(time.get("stop_s"), time.get("points")) if time else None,
                       mask=mask_of(args.get("mask")), passband_hz=args.get("passband_hz"),
                       attenuation_at_hz=args.get("attenuation_at_hz"), fmt=args["format"], table=args["table"])
