"""GET forms of the operations: a request body's fields as query parameters, for spreadsheets.

A spreadsheet can only fetch a URL. :func:`query_form` derives, from a body
schema, a query schema whose parameters are the body's fields by their dotted
path (``parts.resistors.series=E96``, ``opamp.gbw_hz=10M``,
``group_delay.frequency_hz=1k``): the names the problems already use for
them. It reads the query, rebuilds the nested body and loads it with the body
schema itself, so both forms are checked by the same rules and give the same
typed request.

Parameters that hold a pair or a list (``cutoff_hz``, ``passband_hz``,
``topology``, ``parts.resistors.range``) are arrays in the ``form`` style with
``explode: true``: repeated, ``cutoff_hz=35k&cutoff_hz=45k``, as the
OpenAPI default and generated clients send them; the comma form
``cutoff_hz=35k,45k`` that people type is read too. Lists of objects (a stock
list, mask segments) have no query form: they stay POST.
"""

from __future__ import annotations

import copy
from typing import Any, Callable, Iterable

import marshmallow as ma

from service.api.fields import Quantity
from service.api.schemas.common import EnumString, StrictSchema, representation_fields
from service.api.schemas.designs import NameOrList, RangeField
from service.api.schemas.filters import FREQ_RANGE, FrequencyOrPair

#: A parameter holding "one value or a list": one item stands for the value itself.
_ONE_OR_MANY = "rolloff_one_or_many"


def _documented_default(field: ma.fields.Field, metadata: dict, many: bool = False, top: bool = True) -> dict:
    """The body field's default, stated for the documentation only (the body schema applies it).

    A field of a nested object states it in its description instead: that default applies only when the object
    is given, and a generated client sends every documented default (it would give the object, ``yield.trials``
    making a ``yield`` the caller did not ask for).
    """
    default = field.load_default
    if default is not ma.missing and not callable(default) and "default" not in metadata:
        value = field._serialize(default, None, None)
        if not top:
            text = metadata.get("description", "")
            return dict(metadata, description=f"{text}{' ' if text else ''}Default {value} when the object is given.")
        return dict(metadata, default=[value] if many and not isinstance(value, list) else value)
    return dict(metadata)


def _query_field(field: ma.fields.Field, required: bool, top: bool = True) -> ma.fields.Field | None:
    """The query form of one leaf field of a body schema; None for a field with no query form."""
    meta = _documented_default(field, field.metadata, many=isinstance(field, (FrequencyOrPair, NameOrList)),
                               top=top)
    if isinstance(field, FrequencyOrPair):
        out = ma.fields.List(Quantity(unit="Hz", validate=FREQ_RANGE), validate=ma.validate.Length(min=1, max=2),
                             required=required, metadata=dict(meta, **{_ONE_OR_MANY: True}))
    elif isinstance(field, NameOrList):
        inner = ma.fields.String(validate=ma.validate.Length(min=1, max=64))
        out = ma.fields.List(inner, validate=ma.validate.Length(min=1, max=field.max_items), required=required,
                             metadata=dict(meta, **{_ONE_OR_MANY: True}))
    elif isinstance(field, (RangeField, ma.fields.List)):
        if isinstance(field.inner, (ma.fields.Nested, ma.fields.List, ma.fields.Dict)):
            return None
        out = copy.deepcopy(field)
    elif isinstance(field, ma.fields.Boolean):
        out = ma.fields.Boolean(truthy={"true", "1"}, falsy={"false", "0"}, required=required, metadata=meta)
    elif isinstance(field, ma.fields.Integer):
        out = ma.fields.Integer(strict=False, validate=field.validators, required=required, metadata=meta)
    elif isinstance(field, (ma.fields.Float, ma.fields.String)):
        out = copy.deepcopy(field)
    else:
        return None
    out.required = required
    out.load_default = ma.missing
    out.allow_none = False
    out.metadata = dict(meta, **({_ONE_OR_MANY: True} if out.metadata.get(_ONE_OR_MANY) else {}))
    return out


def flat_fields(schema: type[ma.Schema], *, exclude: Iterable[str] = (), prefix: str = "",
                top: bool = True) -> dict[str, ma.fields.Field]:
    """The query fields of ``schema`` by dotted path (nested objects flattened; lists of objects left out)."""
    exclude = set(exclude)
    out: dict[str, ma.fields.Field] = {}
    for name, field in schema().fields.items():
        key = prefix + (field.data_key or name)
        if key in exclude or field.dump_only:
            continue
        if isinstance(field, ma.fields.Nested):
            if field.many:
                continue
            nested = field.schema.__class__
            out.update(flat_fields(nested, exclude=exclude, prefix=key + ".", top=False))
            continue
        q = _query_field(field, required=top and field.required, top=top)
        if q is not None:
            q.data_key = key
            out[key] = q
    return out


def _split_commas(data, names: set[str]) -> dict:
    """The query as a plain dict; the list parameters' comma-separated items split (``35k,45k``)."""
    out = {}
    for key in data:
        value = data[key]
        if key in names:
            items = value if isinstance(value, list) else [value]
            value = [part.strip() for item in items for part in str(item).split(",")]
        out[key] = value
    return out


def query_form(body: type[ma.Schema], *, name: str, formats: Iterable[str], format_name: str,
               exclude: Iterable[str] = (),
               extra: dict[str, ma.fields.Field] | None = None, stage: bool = False,
               build: Callable[[dict, dict], Any] | None = None) -> type[StrictSchema]:
    """A query schema reading ``body``'s fields as dotted parameters (see the module notes); ``format`` is the
    enumeration ``format_name``.

    Parameters
    ----------
    body : marshmallow schema class
        The body schema of the POST form; its ``format`` and ``stage`` are replaced by the representation
        parameters (``format`` with ``formats``, ``field``, and ``stage`` when asked).
    name : str
        Name of the query schema class.
    exclude : iterable of str
        Dotted paths left out (besides lists of objects, which have no query form).
    extra : dict, optional
        Further query parameters (loaded as given, not part of the body).
    build : callable, optional
        ``build(loaded_body, extra_values)`` -> the loaded arguments; default: the body schema's result with
        the representation values added.
    """
    fields = flat_fields(body, exclude={"format", "stage", *exclude})
    fields.update(extra or {})
    representation = representation_fields(formats, name=format_name, stage=stage)
    fields.update(representation)
    many = {k for k, f in fields.items() if isinstance(f, ma.fields.List)}
    one_or_many = {k for k, f in fields.items() if f.metadata.get(_ONE_OR_MANY)}
    own = set(extra or {}) | set(representation)

    class QueryForm(StrictSchema):
        @ma.pre_load
        def _commas(self, data, **kwargs):
            return _split_commas(data, many)

        @ma.post_load
        def _as_body(self, data, **kwargs):
            values = {k: data.pop(k) for k in list(data) if k in own}
            for key in one_or_many:
                _unwrap(data, key)
            loaded = body().load(data)
            if build is not None:
                return build(loaded, values)
            if isinstance(loaded, dict):
                loaded = dict(loaded)
                loaded.update(values)
            return loaded

    return type(name, (QueryForm,), dict(fields))


def _unwrap(data: dict, dotted: str) -> None:
    """A one-or-many parameter given once stands for the value itself (``cutoff_hz=1k`` -> 1000.0)."""
    node = data
    parts = dotted.split(".")
    for p in parts[:-1]:
        node = node.get(p)
        if not isinstance(node, dict):
            return
    value = node.get(parts[-1])
    if isinstance(value, list) and len(value) == 1:
        node[parts[-1]] = value[0]


# ----------------------------------------------------------------------------------------------- the GET forms

def _approximation_query() -> type[StrictSchema]:
    from service.api.schemas.filters import ApproximationRequestSchema

    return query_form(ApproximationRequestSchema, name="ApproximationQuerySchema", formats=("json", "csv", "text"),
                      format_name="ApproximationFormat")


def _compare_query() -> type[StrictSchema]:
    from service.api.schemas.compare import CompareRequestSchema

    return query_form(CompareRequestSchema, name="CompareQuerySchema", formats=("json", "csv", "text"),
                      format_name="ApproximationFormat")


def _design_query() -> type[StrictSchema]:
    from service.api.schemas.designs import DesignRequestSchema

    return query_form(DesignRequestSchema, name="DesignQuerySchema",
                      formats=("json", "csv", "spice", "svg", "text"), format_name="DesignFormat", stage=True)


def _response_request(loaded: dict, values: dict) -> dict:
    """The GET form of /v1/responses: the ideal transfer function of a requirement (verified against it) or of
    an order, on a log grid."""
    from service.api.schemas.filters import requirement_from
    from service.response import FrequencyGrid
    from service.workflows import ResponseRequest

    requirement = requirement_from(loaded)
    start, stop = values.get("start_hz"), values.get("stop_hz")
    if (start is None) != (stop is None):
        raise ma.ValidationError("give both start_hz and stop_hz, or neither", "start_hz")
    if start is not None and not stop > start:
        raise ma.ValidationError("stop_hz must be above start_hz", "stop_hz")
    points = values.get("points", 501)
    grid = None if start is None else FrequencyGrid(start, stop, points, "log")
    by_spec = requirement.by_specification
    request = ResponseRequest(requirement, frequencies=grid, default_points=points,
                              mask=requirement if by_spec else None,
                              passband_hz=requirement.passband_hz if by_spec else None)
    return {"request": request, "format": values.get("format"), "field": values.get("field"),
            "table": values.get("table", "frequency")}


def _response_query() -> type[StrictSchema]:
    from service.api.fields import StrictInteger
    from service.api.schemas.filters import FilterSchema

    extra = {
        "start_hz": Quantity(unit="Hz", validate=FREQ_RANGE, metadata={
            "description": "First frequency of the log grid (Hz); with stop_hz."}),
        "stop_hz": Quantity(unit="Hz", validate=FREQ_RANGE, metadata={"description": "Last frequency (Hz)."}),
        "points": StrictInteger(strict=False, validate=ma.validate.Range(min=2), metadata={
            "description": "Number of points, at most ROLLOFF_MAX_FREQUENCY_POINTS.", "default": 501}),
        "table": EnumString("ResponseTable", ["frequency", "time"],
                            metadata={"description": "Rows of the CSV table.", "default": "frequency"}),
    }
    return query_form(FilterSchema, name="ResponseQuerySchema", formats=("json", "csv", "svg", "text"),
                      format_name="ResponseFormat",
                      extra=extra, build=_response_request)


ApproximationQuerySchema = _approximation_query()
CompareQuerySchema = _compare_query()
DesignQuerySchema = _design_query()
ResponseQuerySchema = _response_query()
