"""Unversioned operations endpoints: /healthz and /readyz."""

from __future__ import annotations

import marshmallow as ma
from flask.views import MethodView

from service.api.extension import Blueprint
from service.api.problems import ProblemException
from service.api.schemas.common import ReplySchema

blp = Blueprint("operations", __name__, url_prefix="", description="Health and readiness of the process.")


class HealthSchema(ReplySchema):
    status = ma.fields.String(metadata={"description": "`ok`."})


class ReadySchema(ReplySchema):
    status = ma.fields.String(metadata={"description": "`ready`."})
    checks = ma.fields.Dict(keys=ma.fields.String(), values=ma.fields.String(),
                            metadata={"description": "Each readiness check and its outcome."})


def readiness_checks() -> dict[str, str]:
    """Load the numerical stack and run one tiny computation of each layer that exists.

    Raises
    ------
    RuntimeError
        When a check computes a wrong answer.
    """
    import numpy as np
    import scipy.signal  # noqa: F401  (the costly import: loaded once, in the master under gunicorn)

    from service.components import nearest_preferred

    checks = {}
    if nearest_preferred(4870.0, "E24").nearest != 4700.0:
        raise RuntimeError("preferred values check failed")
    checks["components"] = "ok"
    # a 2nd-order Butterworth lowpass is -3.01 dB at its cutoff (common practice)
    w = 2 * np.pi * 1e3
    z, p, k = scipy.signal.butter(2, w, analog=True, output="zpk")
    h = k / np.prod(1j * w - p)
    if abs(20 * np.log10(abs(h)) + 3.0103) > 1e-3:
        raise RuntimeError("numerical stack check failed")
    checks["numerics"] = "ok"
    return checks


@blp.route("/healthz")
class Health(MethodView):
    @blp.response(200, HealthSchema)
    @blp.alt_response(406, response="NOT_ACCEPTABLE")
    @blp.doc(summary="Liveness", description="200 while the process answers. Needs no API key.",
             operationId="check_health")
    def get(self):
        return {"status": "ok"}


@blp.route("/readyz")
class Ready(MethodView):
    @blp.response(200, ReadySchema)
    @blp.alt_response(406, response="NOT_ACCEPTABLE")
    @blp.alt_response(503, response="SERVICE_UNAVAILABLE", description="A readiness check failed.")
    @blp.doc(summary="Readiness",
             description="200 when the numerical stack is loaded and a tiny computation of each layer "
                         "gives the right answer; 503 otherwise. Needs no API key.", operationId="check_readiness")
    def get(self):
        try:
            checks = readiness_checks()
        except Exception as exc:  # any failure means not ready
            raise ProblemException(503, f"Not ready: {exc}", slug="not-ready", title="Service Unavailable") from None
        return {"status": "ready", "checks": checks}
