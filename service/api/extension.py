"""flask-smorest adapted to the service's conventions.

- :class:`ProblemApi` documents every error response as
  ``application/problem+json`` with :class:`ProblemSchema` and routes all
  errors through :mod:`service.api.problems`.
- :class:`Blueprint` reads JSON bodies with :func:`service.api.body.read_json_body`
  (strict: duplicate keys, depth, UTF-8, media type) and rejects unknown query
  parameters.
"""

from __future__ import annotations

import http

import marshmallow as ma
from apispec.ext.marshmallow import MarshmallowPlugin
from flask import current_app, g, request
from flask_smorest import Api
from flask_smorest import Blueprint as _SmorestBlueprint
from flask_smorest.utils import prepare_response
from webargs import core
from webargs.flaskparser import FlaskParser

from service.api.body import read_json_body
from service.api.problems import PROBLEM_MEDIA_TYPE


class ProblemSchema(ma.Schema):
    """RFC 9457 problem details (documentation of every error body)."""

    type = ma.fields.String(required=True, metadata={"description": "Problem type URI (urn:rolloff:problem:<name> or about:blank)."})
    title = ma.fields.String(required=True, metadata={"description": "Short summary of the problem type."})
    status = ma.fields.Integer(required=True, metadata={"description": "HTTP status code."})
    detail = ma.fields.String(required=True, metadata={"description": "What went wrong in this request."})
    instance = ma.fields.String(allow_none=True, metadata={"description": "Path of the request."})
    request_id = ma.fields.String(allow_none=True, metadata={"description": "Request id (also in the X-Request-ID header and the server log)."})
    errors = ma.fields.Dict(
        keys=ma.fields.String(), values=ma.fields.List(ma.fields.String()),
        metadata={"description": "Validation messages by field path, e.g. {\"parts.resistors.series\": [\"...\"]}."},
    )
    limit = ma.fields.String(metadata={"description": "Name of the limit exceeded."})
    limit_value = ma.fields.Raw(metadata={"description": "Configured value of that limit."})
    setting = ma.fields.String(metadata={"description": "Environment variable that sets that limit."})


class _StrictParser(FlaskParser):
    """webargs parser reading the body that :func:`read_json_body` checked."""

    DEFAULT_UNKNOWN_BY_LOCATION = {"json": ma.RAISE, "query": ma.RAISE, "form": ma.RAISE,
                                   "headers": ma.EXCLUDE, "cookies": ma.EXCLUDE, "files": ma.RAISE}

    def _raw_load_json(self, req):
        cached = getattr(g, "_rolloff_json", core.missing)
        if cached is core.missing:
            cached = read_json_body(req, max_depth=current_app.config["ROLLOFF_SETTINGS"].max_json_depth)
            g._rolloff_json = cached
        return cached


class Blueprint(_SmorestBlueprint):
    """A flask-smorest blueprint with the strict parser."""

    ARGUMENTS_PARSER = _StrictParser()


class ProblemApi(Api):
    """Api whose documented errors are problem+json."""

    ERROR_SCHEMA = ProblemSchema

    def _register_responses(self):
        for status in http.HTTPStatus:
            response = {"description": status.phrase}
            if status >= 400:
                response["schema"] = self.ERROR_SCHEMA
                prepare_response(response, self.spec, PROBLEM_MEDIA_TYPE)
            self.spec.components.response(status.name, response, lazy=True)
        response = {"description": "Error (RFC 9457 problem details)", "schema": self.ERROR_SCHEMA}
        prepare_response(response, self.spec, PROBLEM_MEDIA_TYPE)
        self.spec.components.response("DEFAULT_ERROR", response, lazy=True)

    def _register_error_handlers(self):
        # The app factory registers the handlers of service.api.problems itself.
        pass


def make_marshmallow_plugin() -> MarshmallowPlugin:
    """The apispec marshmallow plugin (custom fields are mapped once the spec exists)."""
    return MarshmallowPlugin()
