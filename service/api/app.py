"""The application factory."""

from __future__ import annotations

from typing import Any, Mapping

from flask import Flask
from werkzeug.exceptions import HTTPException

from service.api import admission, cors, metrics, observability, problems, security
from service.api.extension import ProblemApi, make_marshmallow_plugin
from service.config import Settings
from service.errors import RolloffError
from service.version import SERVICE_VERSION

OPENAPI_DESCRIPTION = """\
rolloff designs analog active filters and checks them: from a requirement
("flat to 2 kHz within 0.1 dB, 80 dB down by 12 kHz") to an approximation and
an order, op-amp stages and topologies, standard-value parts from the caller's
stock, the op-amp each stage needs, and the response and yield with every part
at its tolerance.

Conventions: frequencies in hertz, losses and gains in dB, times in seconds,
component values in ohm, farad and henry. Numbers may also be sent as strings
with an SI prefix and an optional unit ("4.7k", "10kHz", "4.7nF") or an IEC 60062
code ("4k7"). Unknown fields are rejected. Every error is an RFC 9457 problem
(`application/problem+json`). Examples are set in an invented scenario: the
Larkspur Fluidics PM-7 pump condition monitor.
"""


def create_app(test_config: Mapping[str, Any] | None = None) -> Flask:
    """Build the Flask application.

    Parameters
    ----------
    test_config : mapping, optional
        Overrides of :class:`service.config.Settings` fields (``{"max_order": 8}``)
        and/or Flask config keys in upper case (``{"TESTING": True}``). Without it
        the settings come from the ``ROLLOFF_*`` environment variables.

    Returns
    -------
    flask.Flask
    """
    test_config = dict(test_config or {})
    flask_keys = {k: v for k, v in test_config.items() if k.isupper()}
    setting_keys = {k: v for k, v in test_config.items() if not k.isupper()}
    settings = Settings.from_env().override(**setting_keys)

    app = Flask("service")
    app.config.update(
        ROLLOFF_SETTINGS=settings,
        MAX_CONTENT_LENGTH=settings.max_body_bytes,
        API_TITLE="rolloff",
        API_VERSION=SERVICE_VERSION,
        OPENAPI_VERSION="3.1.0",
        OPENAPI_URL_PREFIX="/v1",
        OPENAPI_JSON_PATH="openapi.json",
        API_SPEC_OPTIONS={
            "info": {"description": OPENAPI_DESCRIPTION, "x-service-version": SERVICE_VERSION},
            "servers": [{"url": "/"}],
        },
        JSON_SORT_KEYS=False,
    )
    app.json.sort_keys = False
    app.config.update(flask_keys)

    observability.configure_logging(settings.log_level)
    observability.install(app, version=SERVICE_VERSION)
    metrics.install(app, settings)
    cors.install(app, settings)
    security.install(app, settings)
    admission.install(app, settings)

    api = ProblemApi(app, spec_kwargs={"marshmallow_plugin": make_marshmallow_plugin()})
    security.document(api)
    from service.api.fields import register_openapi_fields
    register_openapi_fields(api.ma_plugin)

    app.register_error_handler(HTTPException, problems.handle_http_exception)
    app.register_error_handler(RolloffError, problems.handle_rolloff_error)
    app.register_error_handler(Exception, problems.handle_unexpected)

    from service.api.views import register_views
    register_views(api)
    app.extensions["rolloff_api"] = api
    return app
