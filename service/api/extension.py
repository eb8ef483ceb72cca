"""flask-smorest adapted to the service's conventions.

- :class:`ProblemApi` documents every error response as
  ``application/problem+json`` with :class:`ProblemSchema` and routes all
  errors through :mod:`service.api.problems`.
- :class:`Blueprint` reads JSON bodies with :func:`service.api.body.read_json_body`
  (strict: duplicate keys, depth, UTF-8, media type) and rejects unknown query
  parameters, a scalar query parameter given more than once, numbers written
  with other than ASCII digits (``"４.７"``: Python's ``float`` would read it) in
  a query, and strings in a body's plain number fields (documented as numbers).
- :meth:`Blueprint.reply` declares an operation's reply and its representations
  (:mod:`service.api.formats`): it documents every media type of the 200,
  registers one operation per non-JSON representation at the path plus its
  suffix (``/v1/designs.csv``, one media type each: what generated clients
  parse), refuses an ``Accept`` that matches none (406) before any work,
  chooses the representation of each request (:func:`representation`) and
  answers a ``field=`` selection from the JSON reply (:mod:`service.api.selection`).
- :class:`RepresentationPlugin` shapes those operations in the document.
"""

from __future__ import annotations

import http
import re
from copy import deepcopy
from dataclasses import dataclass
from functools import wraps

import marshmallow as ma
from apispec import BasePlugin
from apispec.ext.marshmallow import MarshmallowPlugin
from typing import Any, Mapping

from flask import current_app, g, request
from flask.views import MethodView
from flask_smorest import Api
from flask_smorest import Blueprint as _SmorestBlueprint
from flask_smorest.utils import deepupdate, get_appcontext, prepare_response
from webargs import core
from webargs.flaskparser import FlaskParser
from webargs.multidictproxy import MultiDictProxy

from service.api import formats, selection
from service.api.body import read_json_body
from service.api.fields import Quantity, StrictInteger
from service.api.openapi import ComponentNames, component_name
from service.api.problems import PROBLEM_MEDIA_TYPE
from service.api.schemas.common import Scalar
from service.errors import InvalidParameter


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
    limit_value = Scalar(metadata={"description": "Configured value of that limit."})
    setting = ma.fields.String(metadata={"description": "Environment variable that sets that limit."})
    available = ma.fields.List(ma.fields.String(), metadata={
        "description": "406: the media types the operation answers in."})


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


def _merged(a: Any, b: Any) -> Any:
    """Two marshmallow error structures (nested dicts ending in lists of messages) as one."""
    if isinstance(a, dict) and isinstance(b, dict):
        out = dict(a)
        for k, v in b.items():
            out[k] = _merged(out[k], v) if k in out else v
        return out
    la = a if isinstance(a, list) else [a]
    lb = b if isinstance(b, list) else [b]
    if any(str(m).startswith("Not a valid number:") for m in lb):  # the precise message replaces the generic one
        la = [m for m in la if m != "Not a valid number."]
    return la + [m for m in lb if m not in la]


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
        if errors:  # with the schema's own messages, so that one answer lists every field at fault
            raise ma.ValidationError(_merged(schema.validate(data) if isinstance(data, Mapping) else {}, errors))
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


@dataclass(frozen=True)
class Offer:
    """The representations one operation offers (JSON first) and what its JSON reply holds.

    Attributes
    ----------
    formats : tuple of str
        Keys of :data:`service.api.formats.MEDIA_TYPES`, ``json`` first.
    fields : tuple of str
        Top-level fields of the JSON reply (``field=`` paths start with one).
    text_needs_field : bool
        ``text`` is a ``field=`` selection (True), or the operation has a text reply of its own.
    """

    formats: tuple[str, ...]
    fields: tuple[str, ...] = ()
    text_needs_field: bool = True


#: What each representation is called in a summary.
_LABELS = {"csv": "CSV", "svg": "SVG", "spice": "SPICE netlist", "text": "one value as text"}
_JSON_ONLY = Offer(("json",))


def representation() -> formats.Representation:
    """The representation the current request asked for (chosen by :meth:`Blueprint.reply`)."""
    return g.get("representation") or formats.Representation("json")


def _suffix() -> str | None:
    """The representation named by the matched route's suffix (``/v1/designs.csv`` -> ``csv``)."""
    rule = request.url_rule.rule if request.url_rule is not None else ""
    last = rule.rsplit("/", 1)[-1]
    if "." in last:
        ext = last.rsplit(".", 1)[1]
        if ext in formats.MEDIA_TYPES:
            return ext
    return None


def _explicit_format() -> str | None:
    """``format`` as the request gave it, in the query or (older clients) the JSON body; 422 when they differ."""
    query = request.args.get("format")
    body = getattr(g, "_rolloff_json", None)
    given = body.get("format") if isinstance(body, Mapping) else None
    if query is not None and isinstance(given, str) and given != query:
        raise InvalidParameter(f"format is {query} in the query and {given} in the body: give it once",
                               field="format")
    return query if query is not None else (given if isinstance(given, str) else None)


def _filename(field: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "_", field)[:80] + ".csv"


class Blueprint(_SmorestBlueprint):
    """A flask-smorest blueprint with the strict parser and declared representations."""

    ARGUMENTS_PARSER = _StrictParser()

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._offers: dict[str, dict[str, Offer]] = {}
        self.before_request(self._check_accept)

    # ---------------------------------------------------------------- declaring a reply

    def reply(self, schema: type[ma.Schema], *others: str, description: str, example: Any = None,
              text_needs_field: bool = True):
        """Decorator of a view method: its 200 reply in JSON (``schema``) and in the representations ``others``.

        Documents each media type of the 200 (JSON first), chooses the representation of each request
        (:func:`representation`; the view produces it, or JSON when a ``field`` is selected) and answers
        a ``field=`` selection as text or CSV from the JSON reply dumped by ``schema``.
        """
        offered = ("json", *others)
        fields = tuple(f.data_key or name for name, f in schema().fields.items())
        offer = Offer(offered, fields, text_needs_field)
        respond = self.response(200, schema, description=description)
        refuse = self.alt_response(406, response="NOT_ACCEPTABLE")
        content = formats.content_doc(offered, schema=component_name(schema), description=description,
                                      example=example)

        def decorator(func):
            inner = refuse(respond(func))

            @wraps(inner)
            def wrapper(*args, **kwargs):
                field = request.args.get("field")
                rep = formats.negotiate(
                    offered, accept=request.accept_mimetypes, accept_header=request.headers.get("Accept", ""),
                    suffix=_suffix(), explicit=_explicit_format(), field=field,
                    text_needs_field=text_needs_field, fields=fields)
                if rep.field is not None:
                    selection.check_top_level(rep.field, fields)
                g.representation = rep
                resp = inner(*args, **kwargs)
                if rep.field is not None and resp.mimetype == formats.JSON_MEDIA_TYPE:
                    value = selection.select(get_appcontext()["result_dump"], rep.field)
                    if rep.name == "text":
                        resp = formats.text_response(selection.scalar(value, rep.field))
                    else:
                        resp = formats.csv_response(selection.table(value, rep.field), filename=_filename(rep.field))
                if len(offered) > 1 and _suffix() is None:
                    resp.vary.add("Accept")            # the same URL answers by Accept (RFC 9110, 12.5.5)
                return resp

            wrapper._apidoc = deepcopy(getattr(inner, "_apidoc", {}))
            wrapper._apidoc["manual_doc"] = deepupdate(deepcopy(wrapper._apidoc.get("manual_doc", {})), content)
            wrapper._rolloff_offer = offer
            return wrapper

        return decorator

    # ---------------------------------------------------------------- routes of the representations

    def add_url_rule(self, rule, endpoint=None, view_func=None, provide_automatic_options=None, **kwargs):
        """Register ``rule``, then one rule per non-JSON representation of its methods (``rule.<format>``)."""
        super().add_url_rule(rule, endpoint, view_func, provide_automatic_options, **kwargs)
        if not isinstance(view_func, type(MethodView)):
            return
        base = self._endpoints[-1]
        offers = {m: getattr(getattr(view_func, m.lower()), "_rolloff_offer", _JSON_ONLY)
                  for m in view_func.methods}
        self._offers[base] = offers
        others = [f for o in offers.values() for f in o.formats if f != "json"]
        for fmt in dict.fromkeys(others):
            methods = {m for m, o in offers.items() if fmt in o.formats}
            view = type(f"{view_func.__name__}_{fmt}", (view_func,), {"methods": methods})
            super().add_url_rule(f"{rule}.{fmt}", f"{base}_{fmt}", view, provide_automatic_options, **kwargs)
            endpoint_fmt = self._endpoints[-1]
            self._offers[endpoint_fmt] = {m: Offer((fmt,), offers[m].fields, offers[m].text_needs_field)
                                          for m in methods}
            for m in methods:
                manual = self._docs[endpoint_fmt][m.lower()].setdefault("manual_doc", {})
                if "operationId" in manual:
                    manual["operationId"] = f"{manual['operationId']}_{fmt}"
                manual["summary"] = f"{manual.get('summary', '')}: {_LABELS[fmt]}"
                manual["x-rolloff-representation"] = {
                    "format": fmt, "field_required": fmt == "text" and offers[m].text_needs_field}

    def offers(self, endpoint: str) -> dict[str, Offer]:
        """What each method of ``endpoint`` (this blueprint's name for it) offers."""
        return dict(self._offers.get(endpoint, {}))

    def _check_accept(self):
        """406 before any work when ``Accept`` matches no representation of the operation."""
        if request.method == "OPTIONS" or "Accept" not in request.headers or request.endpoint is None:
            return None
        endpoint = request.endpoint.split(".", 1)[-1]
        method = "GET" if request.method == "HEAD" else request.method
        offer = self._offers.get(endpoint, {}).get(method, _JSON_ONLY)
        if formats._accepted(request.accept_mimetypes, offer.formats) is None:
            raise formats.not_acceptable(offer.formats, request.headers.get("Accept", ""))
        return None


class RepresentationPlugin(BasePlugin):
    """apispec plugin: the operation of one representation documents that media type alone.

    Its ``format`` parameter is dropped (the path names the representation), ``field`` kept for text and
    CSV (required for text) and ``stage`` for SVG only.
    """

    def operation_helper(self, path=None, operations=None, **kwargs):
        for op in (operations or {}).values():
            if not isinstance(op, dict):
                continue
            marker = op.pop("x-rolloff-representation", None)
            if marker is None:
                continue
            fmt = marker["format"]
            ok = op["responses"]["200"]
            ok["content"] = {formats.MEDIA_TYPES[fmt]: formats.media_doc(fmt)}
            kept = []
            for p in op.get("parameters", []):
                name = p.get("name") if isinstance(p, dict) and p.get("in") == "query" else None
                if name == "format" or (name == "field" and fmt not in formats.SELECTION_FORMATS) \
                        or (name == "stage" and fmt != "svg"):
                    continue
                if name == "field" and marker["field_required"]:
                    p["required"] = True
                kept.append(p)
            if kept:
                op["parameters"] = kept
            else:
                op.pop("parameters", None)


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

    def _init_spec(self, *, extra_plugins=None, **kwargs):
        super()._init_spec(extra_plugins=[*(extra_plugins or ()), RepresentationPlugin()], **kwargs)


def make_marshmallow_plugin() -> MarshmallowPlugin:
    """The apispec marshmallow plugin, naming components by :class:`service.api.openapi.ComponentNames`
    (custom fields are mapped once the spec exists)."""
    return MarshmallowPlugin(schema_name_resolver=ComponentNames())
