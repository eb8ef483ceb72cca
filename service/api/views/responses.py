"""GET/POST /v1/responses: frequency and time response, metrics, mask check; JSON, CSV or SVG."""

from __future__ import annotations

from flask import current_app
from flask.views import MethodView

from service.api.extension import Blueprint
from service.api.formats import (
    CSV_MEDIA_TYPE, SVG_MEDIA_TYPE, alternative_content, csv_response, svg_response,
)
from service.api.schemas.responses import ResponseQuerySchema, ResponseRequestSchema, ResponseSchema
from service.approximation import Family, ResponseType
from service.response import FrequencyGrid
from service.workflows import Requirement, ResponseRequest, respond

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
cannot hide a failure. The mask is checked by the same verifier as the designs'
verdict (`mask_result`: on the whole band, from the poles and zeros, with
stability and the open-band rule).

For a `design`, on the supply of its `settings` (a single rail's bias network
included), two more sections:

- `noise` {band_hz, temperature_k, full_scale_v | input_peak_v, points_per_decade,
  opamp}: the output noise density (V/√Hz) on the grid and input-referred, the RMS
  noise integrated over `band_hz` (default the whole grid; a band outside it is a
  422), every part's, source's and stage's share ranked, and, given a level, the
  signal-to-noise ratio; the dynamic range where the op-amps' output ranges are
  known. Resistors give 4kTR, op-amps their `en_nv_rthz`, `in_pa_rthz` and 1/f
  corners (`opamp` sets them for op-amps that give none). `netlist` is the circuit
  with `.noise v(out) VIN` over the band: ngspice's `onoise_total` reproduces it.
- `headroom` {input_peak_v | output_peak_v}: every op-amp output's level over
  frequency against its range (swing, rails less `rail_headroom_v`), the input at
  which each clips, and warnings naming the stage, level, limit and frequency where
  a stage clips, or clips before the output does. An input beyond the rails is a 422.

A transfer function has no circuit: `noise` or `headroom` with `filter`, `zeros` +
`poles` or `sections` is a 422 naming the field.

`format=csv`: a row per frequency (or per time point with `table: time`), with the
noise densities and op-amp levels as columns when asked;
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


def _answer(request: ResponseRequest, fmt: str, table: str):
    result = respond(request, current_app.config["ROLLOFF_SETTINGS"])
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
        requirement = Requirement(
            response=ResponseType(args["response"]), family=Family(args["family"]), order=args["order"],
            cutoff_hz=args["cutoff_hz"], cutoff_at=args["cutoff_at"],
            passband_ripple_db=args.get("passband_ripple_db"),
            stopband_attenuation_db=args.get("stopband_attenuation_db"))
        grid = None
        if "start_hz" in args:
            grid = FrequencyGrid(args["start_hz"], args["stop_hz"], args["points"], "log")
        request = ResponseRequest(requirement, frequencies=grid, default_points=args["points"],
                                  figure=args["format"] == "svg")
        return _answer(request, args["format"], args["table"])

    @blp.arguments(ResponseRequestSchema, example=EXAMPLE)
    @blp.response(200, ResponseSchema)
    @blp.alt_response(400, response="BAD_REQUEST", description="The body is not valid JSON.")
    @blp.alt_response(413, response="REQUEST_ENTITY_TOO_LARGE", description="The body is too large.")
    @blp.alt_response(415, response="UNSUPPORTED_MEDIA_TYPE", description="The body is not JSON.")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="Invalid or infeasible request.")
    @blp.doc(summary="Frequency and time response, metrics and mask check", description=_DESCRIPTION, **_DOC)
    def post(self, args):
        return _answer(args["request"], args["format"], args["table"])
