"""POST /v1/designs and POST /v1/designs/evaluate."""

from __future__ import annotations

from flask import current_app, request
from flask.views import MethodView
from marshmallow.fields import Integer
from marshmallow.validate import Range

from service.workflows import DesignDocument, design, evaluate_json
from service.api.extension import Blueprint
from service.api.formats import (
    CSV_MEDIA_TYPE, SVG_MEDIA_TYPE, TEXT_MEDIA_TYPE, alternative_content, csv_response, svg_response, text_response,
)
from service.api.schemas.common import StrictSchema, one_of
from service.api.schemas.designs import DesignDocumentSchema, DesignRequestSchema, DesignSchema
from service.errors import InvalidParameter

blp = Blueprint("designs", __name__, url_prefix="/v1/designs",
                description="Requirement to op-amp stages with parts that can be bought.")

_DESCRIPTION = """\
From a requirement (or an order and cutoff, as in /v1/approximations) to a
circuit someone can order parts for and build: the sections, each realized by a
topology (`topology`: `auto`, one name, or one per section; see the catalog for
topologies and their strategies), capacitors chosen from the caller's series or
stock, resistors computed and snapped to the resistor series or stock, the
op-amp requirements of each stage (gain-bandwidth by the rule of thumb and exact
from the single-pole macromodel, slew rate for `output_amplitude_v`), each stage
output's peak gain (clipping risk), a BOM (`part_id`s returned), a SPICE netlist
of the whole filter (`VIN in 0 AC 1`, output node `out`; runs in ngspice batch
mode unchanged), the `verdict` and `warnings`.

The **verdict** is a proof about the circuit a board gets, with its snapped
part values and op-amp models, against the requirement *as asked*: every
passband and stopband is checked on the whole band (not at sample points) by a
branch-and-bound over interval bounds of the gain computed from the circuit's
poles and zeros; loss is measured from the largest passband gain; an open
passband (highpass, bandstop) up to `passband_upper_hz` (default 10 × its edge;
with the default, real op-amps may end it earlier: `ended_hz`, a warning, not a
failure); stopbands up to infinity; a `group_delay` limit on the circuit's
delay; and a circuit with a pole in the closed right half-plane is `unstable`
and meets nothing. Margins within 1e-9 dB of 0 are 0; `meets` is exactly
"worst margin ≥ 0". A missed segment says its cause (the transfer function, the
snapped parts, or the op-amps). `summary` repeats `meets` with the loss at each
edge. Stage numbers (`number`, warnings' `stage`, messages) count from 1; field
paths in problems count array entries from 0 (`stages[0]` is stage 1).

By requirement, the transfer function is computed for a tighter requirement
than asked (`passband_margin_db`, default a quarter of the ripple, less passband
loss; `stopband_margin_db`, default 2 dB, more stopband loss), so that the
snapped part values still meet the requirement as asked, which the verdict
checks. Set both margins to 0 for the minimum order of /v1/approximations. A
design whose parts would leave the representable range (resistors
0.01 Ω–10 GΩ, capacitors 1 fF–1 F, section gains up to 10⁶) is a 422.

Achieved f0, Q and gain are read back from the circuit built with the chosen
values (circuit engine), not from the design formulas.

`format=csv` returns the BOM as a table, `format=spice` the netlist alone,
`format=svg` (or `Accept: image/svg+xml`) the schematic of the whole filter, or
of one stage with `stage` (numbered from 1): parts with ref and value, op-amps,
each stage framed with its section.

`supply` {v_pos, v_neg, mid_rail, input_coupling} puts the filter on the board's
rails: on a single rail (v_neg 0) the stages are referred to a mid-rail bias
network (a buffered divider, or the divider alone) and the input is coupled as
`input_coupling` says (or as the response needs); those parts join the BOM and the
netlist, and `supply` in the reply gives every op-amp output's DC operating point
against its range and the output offset (the op-amps' `vos_v`, `ib_a`) per stage
and at the output. The supply is kept in `settings`, so evaluation and
/v1/responses rebuild the same circuit. When the op-amp has noise figures
(`en_nv_rthz`, `in_pa_rthz`, 1/f corners), `noise` summarizes the output noise over
the netlist's sweep, and the netlist carries `.noise` (output and input named in a
comment) and the op-amps' noise generators.

Mains-interference notches must never be connected to the mains, and a supply
derived from the mains or above 60 V DC can hurt someone: follow local electrical
codes and licensed practice for anything mains-connected or high-voltage.

Example (Larkspur Fluidics PM-7 accelerometer anti-aliasing filter, PM-7 stock:
E96 1 % thin-film resistors, E12 C0G capacitors 100 pF-100 nF).
"""

# PM-7 stock: E96 1 % thin-film resistors, and the C0G capacitors the board already carries.
PM7_CAPACITORS = ["1n", "1.5n", "2.2n", "3.3n", "4.7n", "6.8n", "10n", "15n", "22n", "33n", "47n"]
EXAMPLE = {
    "response": "lowpass", "family": "elliptic", "passband_hz": "10kHz", "stopband_hz": "25.6kHz",
    "passband_ripple_db": 0.1, "stopband_attenuation_db": 80, "topology": "auto",
    "parts": {"resistors": {"series": "E96", "range": ["1k", "1M"], "tolerance": 0.01},
              "stock": [{"kind": "capacitor", "value": v, "tolerance": 0.02, "dielectric": "C0G",
                         "part_id": f"PM7-C0G-{v.upper()}"} for v in PM7_CAPACITORS]},
    "opamp": {"gbw_hz": "20MHz", "slew_v_per_us": 5, "a0_db": 110, "part_id": "PM7-U-OPA-GP"},
}

# A 2nd-order Butterworth lowpass at 1 kHz as one unity-gain Sallen-Key stage (PM-7 bearing-noise channel
# sketch): the fields evaluate reads.
EVALUATE_EXAMPLE = {
    "response": "lowpass", "family": "butterworth", "order": 2,
    "stages": [{
        "section": {"kind": "lowpass", "order": 2, "f0_hz": 1000.0, "q": 0.7071, "fz_hz": None, "gain": 1.0},
        "topology": "sallen_key", "strategy": "unity_gain",
        "components": [
            {"ref": "C1", "role": "C1", "kind": "capacitor", "value": "22n", "tolerance": 0.05, "dielectric": "C0G",
             "part_id": "PM7-C-0805-22N"},
            {"ref": "C2", "role": "C2", "kind": "capacitor", "value": "10n", "tolerance": 0.05, "dielectric": "C0G",
             "part_id": None},
            {"ref": "R1", "role": "R1", "kind": "resistor", "value": "10.7k", "tolerance": 0.01, "part_id": None},
            {"ref": "R2", "role": "R2", "kind": "resistor", "value": "10.7k", "tolerance": 0.01, "part_id": None},
        ],
        "opamps": [{"ref": "U1", "role": "U1", "gbw_hz": "10MHz", "part_id": "PM7-U-OPA-GP"}],
    }],
    "requirement": {"response": "lowpass", "passband_hz": "300Hz", "stopband_hz": "10kHz",
                    "passband_ripple_db": 0.5, "stopband_attenuation_db": 35},
}

_DOC = alternative_content(CSV_MEDIA_TYPE, TEXT_MEDIA_TYPE, SVG_MEDIA_TYPE, schema="Design",
                           description="The design document with BOM, netlist, summary and warnings (JSON); "
                                       "the BOM as CSV; the netlist as text; or the schematic as SVG.")


def _wanted(fmt: str) -> str:
    """``format`` as asked; a JSON default becomes ``svg`` when the client prefers ``image/svg+xml``."""
    if fmt == "json" and request.accept_mimetypes.best_match(
            ["application/json", SVG_MEDIA_TYPE], default="application/json") == SVG_MEDIA_TYPE:
        return "svg"
    return fmt


def _schematic(document: DesignDocument, stage: int | None):
    from service.api.schematics import schematic_svg

    return svg_response(schematic_svg(document, stage).encode("utf-8"))


def _reply(document: dict, fmt: str, stage: int | None = None):
    """The design document (JSON) in the format asked: itself, its BOM (CSV) or its netlist (text)."""
    if stage is not None:
        raise InvalidParameter("stage selects the stage of a schematic: use it with format svg", field="stage")
    if fmt == "csv":
        cols = ("ref", "kind", "value", "tolerance", "dielectric", "part_id")
        return csv_response({c: [line.get(c) for line in document["bom"]] for c in cols}, filename="bom.csv")
    if fmt == "spice":
        return text_response(document["netlist"])
    return document


@blp.route("")
class Designs(MethodView):
    @blp.arguments(DesignRequestSchema, example=EXAMPLE)
    @blp.response(200, DesignSchema)
    @blp.alt_response(400, response="BAD_REQUEST", description="The body is not valid JSON.")
    @blp.alt_response(413, response="REQUEST_ENTITY_TOO_LARGE", description="The body is too large.")
    @blp.alt_response(415, response="UNSUPPORTED_MEDIA_TYPE", description="The body is not JSON.")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY",
                      description="Invalid request, infeasible requirement, or parts that cannot realize it.")
    @blp.doc(summary="Design a filter with parts from stock", description=_DESCRIPTION, **_DOC)
    def post(self, args):
        outcome = design(args["request"], current_app.config["ROLLOFF_SETTINGS"])
        fmt = _wanted(args["format"])
        if fmt == "svg":
            return _schematic(outcome.document, args.get("stage"))
        return _reply(outcome.as_dict(), fmt, args.get("stage"))


_EVALUATE_DESCRIPTION = """\
A design document — as /v1/designs returned it, or edited (a value swapped for
one in stock, a part's tolerance changed) — gives the achieved figures, BOM,
netlist, verdict and warnings again. Only `stages[*].section`, `topology`,
`strategy`, `components` and `opamps`, and the document's `requirement` and
`settings`, are read; everything else is recomputed, and the verdict is
verified against the document's `requirement` as it stands (edit it to
re-verify: the same verifier as /v1/designs). An unknown key anywhere, a
removed part, a repeated ref or a part of the wrong kind is a 422 naming it.
Values may be strings such as "10n" or "4k7". `?format=csv` returns the BOM,
`?format=spice` the netlist, `?format=svg` (or `Accept: image/svg+xml`) the
schematic, of one stage with `?stage=N` (numbered from 1).
"""


class FormatQuerySchema(StrictSchema):
    format = one_of(["json", "csv", "spice", "svg"], load_default="json",
                    description="`csv`: the BOM as a table; `spice`: the netlist as text; `svg`: the schematic.")
    stage = Integer(validate=Range(min=1), metadata={
        "description": "With `format=svg`: draw only this stage (numbered from 1); default the whole filter."})


@blp.route("/evaluate")
class Evaluate(MethodView):
    @blp.arguments(FormatQuerySchema, location="query", unknown="raise")
    @blp.arguments(DesignDocumentSchema, example=EVALUATE_EXAMPLE)
    @blp.response(200, DesignSchema)
    @blp.alt_response(400, response="BAD_REQUEST", description="The body is not valid JSON.")
    @blp.alt_response(413, response="REQUEST_ENTITY_TOO_LARGE", description="The body is too large.")
    @blp.alt_response(415, response="UNSUPPORTED_MEDIA_TYPE", description="The body is not JSON.")
    @blp.alt_response(422, response="UNPROCESSABLE_ENTITY", description="A missing, repeated or wrong part.")
    @blp.doc(summary="Evaluate a (possibly edited) design document", description=_EVALUATE_DESCRIPTION,
             **alternative_content(CSV_MEDIA_TYPE, TEXT_MEDIA_TYPE, SVG_MEDIA_TYPE, schema="Design",
                                   description="The design document again (JSON), its BOM (CSV), netlist (text) "
                                               "or schematic (SVG)."))
    def post(self, query, document):
        fmt = _wanted(query["format"])
        if fmt == "svg":   # the drawing needs the parts only, not the analysis
            return _schematic(DesignDocument.from_json(document), query.get("stage"))
        outcome = evaluate_json(document, current_app.config["ROLLOFF_SETTINGS"])
        return _reply(outcome.as_dict(), fmt, query.get("stage"))
