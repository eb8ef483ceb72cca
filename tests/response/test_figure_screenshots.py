"""Screenshots of the two figures of the PM-7 accelerometer anti-alias filter, for a person to review.

The design of the README (elliptic lowpass, flat within 0.1 dB to 10 kHz, 80 dB down at 25.6 kHz; E96 1 %
resistors, the PM-7 stock C0G capacitors, a 20 MHz op-amp), its response verified against its requirement
and 500 Monte Carlo boards over -20 to 70 degC, rendered as PNG (Agg) to ``tests/response/artifacts/``
(ignored by git): ``pm7-anti-alias-response.png`` and ``pm7-anti-alias-tolerance.png``.
"""

from __future__ import annotations

import struct

import pytest

from service.config import Settings
from service.response.plotting import DPI, WIDTH_IN, response_figure
from service.tolerance.plotting import tolerance_figure
from service.workflows import DesignDocument, ResponseRequest, ToleranceRequest, respond, tolerance
from tests.response.figure_svg import save_png

ANTI_ALIAS = {"response": "lowpass", "family": "elliptic", "passband_hz": "10kHz", "stopband_hz": "25.6kHz",
              "passband_ripple_db": 0.1, "stopband_attenuation_db": 80}
PARTS = {"resistors": {"series": "E96", "tolerance": 0.01},
         "stock": [{"kind": "capacitor", "value": v, "tolerance": 0.02, "dielectric": "C0G", "part_id": f"PM7-C0G-{n}"}
                   for v, n in (("4.7n", "4.7N"), ("10n", "10N"), ("22n", "22N"))]}
OPAMP = {"gbw_hz": "20MHz", "slew_v_per_us": 5, "part_id": "PM7-U-OPA-GP"}


@pytest.fixture(scope="module")
def document():
    from service.api.app import create_app

    client = create_app({"TESTING": True}).test_client()
    reply = client.post("/v1/designs", json=dict(ANTI_ALIAS, parts=PARTS, opamp=OPAMP))
    assert reply.status_code == 200, reply.get_json()
    return DesignDocument.from_json(reply.get_json())


def _png_size(path: str) -> tuple[int, int]:
    with open(path, "rb") as fh:
        head = fh.read(24)
    assert head[:8] == b"\x89PNG\r\n\x1a\n"
    return struct.unpack(">II", head[16:24])


def test_response_screenshot(document):
    result = respond(ResponseRequest(document, mask=document.requirement, figure=True), Settings()).result
    assert result.verdict is not None and result.subject.design.startswith("3 stages")
    path = save_png(response_figure(result), "pm7-anti-alias-response")
    assert _png_size(path)[0] == int(WIDTH_IN * DPI)


def test_tolerance_screenshot(document):
    result = tolerance(ToleranceRequest(document, trials=500, seed=1, temperature={"min_c": -20, "max_c": 70},
                                        reply="svg"), Settings())
    assert result.yield_ is not None
    path = save_png(tolerance_figure(result), "pm7-anti-alias-tolerance")
    assert _png_size(path)[0] == int(WIDTH_IN * DPI)
