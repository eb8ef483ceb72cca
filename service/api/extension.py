"""flask-smorest adapted to the service's conventions.

- :class:`ProblemApi` documents every error response as
  ``application/problem+json`` with :class:`ProblemSchema` and routes all
  errors through :mod:`service.api.problems`.
- :class:`Blueprint` reads JSON bodies with :func:`service.api.body.read_json_body`
  (strict: duplicate keys, depth, UTF-8, media type) and rejects unknown query
  parameters, a scalar query parameter given more than once, numbers written
  with other than ASCII digits (``"４.７"``: Python's ``float`` would read it) in
  a query, and strings in a body's plain number fields (documented as numbers).
"""

from __future__ import annotations

import http

import marshmallow as ma
from apispec.ext.marshmallow import MarshmallowPlugin
from typing import Any, Mapping

from flask import current_app, g, request
from flask_smorest import Api
from flask_smorest import Blueprint as _SmorestBlueprint
from flask_smorest.utils import prepare_response
from webargs import core
from webargs.flaskparser import FlaskParser
from webargs.multidictproxy import MultiDictProxy

from service.api.body import read_json_body
from service.api.fields import Quantity, StrictInteger
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


_NUMBER_TEXT = "Not a valid number: write ASCII digits 0-9, without spaces around."
_NUMBER_TYPE = "Not a valid number: expected a JSON number."


def _field_text_errors(field: ma.fields.Field, value: Any, body: bool = True):
    """Messages for a value that a plain marshmallow number field would read although the document refuses it."""
    if isinstance(field, ma.fields.Number) and not isinstance(field, (Quantity, StrictInteger)):
        if isinstance(value, str) and body:
            return [_NUMBER_TYPE]
        if isinstance(value, str) and not (value.isascii() and value.strip() == value):
            return [_NUMBER_TEXT]
        return None
    if isinstance(field, ma.fields.Nested):
        inner = field.schema
        if field.many and isinstance(value, list):
            out = {i: e for i, v in enumerate(value) if (e := number_text_errors(inner, v))}
            return out or None
        return number_text_errors(inner, value) or None
    if isinstance(field, ma.fields.List) and isinstance(value, list):
        out = {i: e for i, v in enumerate(value) if (e := _field_text_errors(field.inner, v, body))}
        return out or None
    if isinstance(field, ma.fields.Dict) and field.value_field is not None and isinstance(value, Mapping):
        out = {k: e for k, v in value.items() if (e := _field_text_errors(field.value_field, v, body))}
        return out or None
    return None


def number_text_errors(schema: ma.Schema, data: Any) -> dict:
    """Field path -> messages for every plain number field of a JSON body that the document would refuse.

    marshmallow's ``Float`` and ``Integer`` also read strings, with Python's
    ``float`` and ``int`` (any script's digits, surrounding white space),
    where the OpenAPI document of those fields says ``type: number``: in a
    body, a plain number field takes a JSON number only. (:class:`Quantity`
    documents and checks its strings itself; :class:`StrictInteger` refuses
    strings.)
    """
    if not isinstance(data, Mapping):
        return {}
    errors = {}
    for name, field in schema.fields.items():
        key = field.data_key or name
        if key in data and (e := _field_text_errors(field, data[key])):
            errors[key] = e
    return errors


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

    def load_json(self, req, schema):
        data = super().load_json(req, schema)
        errors = number_text_errors(schema, data)
        if errors:
            raise ma.ValidationError(errors)
        return data

    def load_querystring(self, req, schema):
        """The query parameters; a scalar parameter given twice, or a number in other digits, is a 422."""
        by_key = {(f.data_key or n): f for n, f in schema.fields.items()}
        multiple = MultiDictProxy(req.args, schema).multiple_keys
        errors: dict[str, list[str]] = {}
        for key in req.args:
            values = req.args.getlist(key)
            field = by_key.get(key)
            if field is None:
                continue  # unknown parameters are refused by the schema (unknown=RAISE)
            if len(values) > 1 and key not in multiple:
                errors[key] = [f"given {len(values)} times; this parameter takes one value"]
                continue
            for v in values:
                if (e := _field_text_errors(getattr(field, "inner", field), v, body=False)):
                    errors[key] = e if isinstance(e, list) else [_NUMBER_TEXT]
        if errors:
            raise ma.ValidationError(errors)
        return super().load_querystring(req, schema)


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
