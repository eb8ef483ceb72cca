"""Schema pieces shared by several endpoints."""

from __future__ import annotations

import marshmallow as ma

from service.version import SERVICE_VERSION


class StrictSchema(ma.Schema):
    """Base of request schemas: unknown fields raise (marshmallow's default, made explicit)."""

    class Meta:
        unknown = ma.RAISE
        ordered = True


class ReplySchema(ma.Schema):
    """Base of reply schemas: every reply carries the service version."""

    class Meta:
        ordered = True

    service_version = ma.fields.String(
        dump_default=SERVICE_VERSION, metadata={"description": "Version of the service that computed this reply."})

    @ma.post_dump
    def _version(self, data, **kwargs):
        data.setdefault("service_version", SERVICE_VERSION)
        return data


def one_of(values, *, description: str, **kwargs) -> ma.fields.String:
    """A string field restricted to ``values`` (an Enum or iterable of strings)."""
    names = [getattr(v, "value", v) for v in values]
    return ma.fields.String(validate=ma.validate.OneOf(names), metadata={"description": description},
                            **kwargs)
