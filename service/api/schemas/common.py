"""Schema pieces shared by several endpoints."""

from __future__ import annotations

import enum
from typing import Any, Iterable, Sequence

import marshmallow as ma

from service.api.formats import round_figures
from service.values import FloatValues
from service.version import SERVICE_VERSION


class FloatList(ma.fields.List):
    """A reply's list of numbers, documented as ``List(Float)``.

    The computation hands over plain Python floats (``ndarray.tolist``), which pass through without a
    call per number (the reply's figures are then rounded in one pass, :func:`round_figures`); an
    array becomes its list; anything else is serialized item by item as ``List(Float)``.
    """

    def __init__(self, **kwargs):
        super().__init__(ma.fields.Float(), **kwargs)

    def _serialize(self, value, attr, obj, **kwargs):
        if type(value) is FloatValues:                  # floats by construction: no check per item
            return value
        if type(value) is list and all(type(v) is float for v in value):
            return value
        if hasattr(value, "tolist") and getattr(value, "dtype", None) is not None and value.dtype.kind == "f":
            return value.tolist()
        return super()._serialize(value, attr, obj, **kwargs)

#: Named enumerations of the domain: OpenAPI component name -> values (registered by the app).
ENUMS: dict[str, list[str]] = {}
#: Enum class name -> component name, where the class name would clash with a name a client generator
#: derives itself (openapi-python-client names an inline enum <Schema><Property>: Section.order -> SectionOrder).
ENUM_NAMES = {"SectionOrder": "SectionOrdering"}


class StrictSchema(ma.Schema):
    """Base of request schemas: unknown fields raise (marshmallow's default, made explicit)."""

    class Meta:
        unknown = ma.RAISE
        ordered = True


class ReplySchema(ma.Schema):
    """Base of reply schemas: every reply carries the service version; figures are rounded.

    Every float of a reply is rounded to 6 significant digits (``FIGURE_DIGITS``) except under the
    dotted paths of :attr:`EXACT` (``*``: any key or list entry): the values a caller builds with or
    sends back -- part values, sections, poles and zeros, the requirement, settings, frequency grids.
    """

    EXACT: tuple[str, ...] = ()

    class Meta:
        ordered = True

    service_version = ma.fields.String(
        dump_default=SERVICE_VERSION, metadata={"description": "Version of the service that computed this reply."})

    @ma.post_dump
    def _version(self, data, **kwargs):
        data.setdefault("service_version", SERVICE_VERSION)
        return round_figures(data, self.EXACT)


class EnumString(ma.fields.String):
    """A string restricted to the values of a named enumeration, documented as a ``$ref`` to it.

    A nullable one is ``oneOf: [{$ref}, {type: null}]``: one enumeration type in generated clients,
    whatever the number of fields using it.
    """

    def __init__(self, name: str, values: Sequence[str], **kwargs: Any):
        self.enum_name = name
        self.choices = list(values)
        known = ENUMS.setdefault(name, self.choices)
        if known != self.choices:
            raise ValueError(f"enumeration {name} is defined twice with different values")
        self._one_of = ma.validate.OneOf(self.choices)
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        return self._one_of(super()._deserialize(value, attr, data, **kwargs))

    def openapi_properties(self) -> dict:
        ref = {"$ref": f"#/components/schemas/{self.enum_name}"}
        return {"oneOf": [ref, {"type": "null"}]} if self.allow_none else {"allOf": [ref]}


def one_of(values, *, description: str, name: str | None = None, **kwargs) -> ma.fields.String:
    """A string field restricted to ``values``: an Enum class or a named list (a named enumeration, see
    :class:`EnumString`), or an iterable of strings (listed in place)."""
    if name is not None:
        return EnumString(name, [getattr(v, "value", v) for v in values], metadata={"description": description},
                          **kwargs)
    if isinstance(values, type) and issubclass(values, enum.Enum):
        return EnumString(ENUM_NAMES.get(values.__name__, values.__name__), [v.value for v in values], metadata={"description": description},
                          **kwargs)
    names = [getattr(v, "value", v) for v in values]
    return ma.fields.String(validate=ma.validate.OneOf(names), metadata={"description": description},
                            **kwargs)


class Scalar(ma.fields.Field):
    """One JSON value: a number, text, a boolean or null (a note or a configured limit)."""

    def openapi_properties(self) -> dict:
        return {"oneOf": [{"type": "number"}, {"type": "string"}, {"type": "boolean"}, {"type": "null"}]}


class NumberOrPair(ma.fields.Field):
    """A number, or ``[low, high]`` (a reply's band-edge figure)."""

    def _serialize(self, value, attr, obj, **kwargs):
        if value is None:
            return None
        if isinstance(value, (list, tuple)):
            return [None if v is None else float(v) for v in value]
        return float(value)

    def openapi_properties(self) -> dict:
        forms = [{"type": "number"}, {"type": "array", "items": {"type": "number"}, "minItems": 2, "maxItems": 2}]
        if self.allow_none:
            forms.append({"type": "null"})
        return {"oneOf": forms}


FIELD_DESCRIPTION = (
    "With format=text: the one value of the JSON reply to answer (a number, true/false or text, no trailing "
    "newline); with format=csv, that value as a table. A dotted path: keys, and list entries numbered from 1 "
    "or named by ref (summary.meets, order, stages.2.components.R3.value, yield.fraction). Without format, "
    "field= answers text/plain (or text/csv when Accept prefers it).")


def representation_fields(formats: Iterable[str], *, name: str, stage: bool = False) -> dict[str, ma.fields.Field]:
    """The query parameters choosing a representation: ``format`` (the enumeration ``name``), ``field`` (and
    ``stage`` for schematics)."""
    formats = list(formats)
    out: dict[str, ma.fields.Field] = {
        "format": EnumString(name, formats, metadata={
            "description": f"Representation: {', '.join(formats)} (default: by Accept, else json). The path suffix "
                           "(.csv, .svg ...) and the Accept header choose it too."}),
        "field": ma.fields.String(validate=ma.validate.Length(min=1, max=256), metadata={
            "description": FIELD_DESCRIPTION}),
    }
    if stage:
        out["stage"] = ma.fields.Integer(strict=False, validate=ma.validate.Range(min=1), metadata={
            "description": "With format=svg: draw only this stage (numbered from 1); default the whole filter."})
    return out


def representation_query(name: str, formats: Iterable[str], *, format_name: str | None = None,
                         stage: bool = False) -> type[StrictSchema]:
    """A query schema of the representation parameters alone (for POST operations); ``format`` is the
    enumeration ``format_name`` (default ``<name without Representation>Format``)."""
    format_name = format_name or name.replace("Representation", "") + "Format"
    return StrictSchema.from_dict(representation_fields(formats, name=format_name, stage=stage), name=name)

