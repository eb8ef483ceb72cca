"""The OpenAPI document: committed copy current, valid, complete."""

from __future__ import annotations

import json

import pytest
from openapi_spec_validator import validate

from service.api import openapi

HTTP_METHODS = {"get", "post", "put", "patch", "delete"}


@pytest.fixture(scope="module")
def document():
    return openapi.generate()


def test_committed_document_is_current(document):
    committed = openapi.COMMITTED.read_text(encoding="utf-8")
    assert committed == openapi.render(document), "openapi/openapi.json is stale: run `rolloff openapi --write`"


def test_document_is_valid_openapi(document):
    # source: OpenAPI Specification 3.1.0 (validated by openapi-spec-validator, reference library)
    validate(json.loads(openapi.render(document)))
    assert document["openapi"] == "3.1.0"


def test_served_document_equals_generated(client, document):
    served = client.get("/v1/openapi.json").get_json()
    assert openapi.render(served) == openapi.render(document)


def test_every_operation_is_documented(document):
    for path, item in document["paths"].items():
        for method, op in item.items():
            if method not in HTTP_METHODS:
                continue
            where = f"{method.upper()} {path}"
            assert op.get("summary"), where
            assert len(op.get("description", "")) > 40, where
            assert "default" in op["responses"], where
            if path.startswith("/v1"):
                assert any(code.startswith("4") for code in op["responses"]), where
            if method == "post" and "requestBody" in op:
                media = op["requestBody"]["content"]["application/json"]
                assert "example" in media or "examples" in media, f"{where} has no request example"


def test_error_responses_are_problem_json(document):
    for name, response in document["components"]["responses"].items():
        if "content" in response:
            assert list(response["content"]) == ["application/problem+json"], name


def test_alternative_media_types_keep_json(document):
    ok = document["paths"]["/v1/values/nearest"]["get"]["responses"]["200"]["content"]
    assert {"application/json", "text/csv", "text/plain"} <= set(ok)
    assert ok["application/json"]["schema"]["$ref"].endswith("/Nearest")


# ---------------------------------------------------------------------------- names a generated client can use

def _operations(document):
    for path, item in document["paths"].items():
        for method, op in item.items():
            if method in HTTP_METHODS:
                yield path, method, op


def test_every_operation_has_a_unique_snake_case_operation_id(document):
    import re

    ids = [op.get("operationId") for _, _, op in _operations(document)]
    assert all(i and re.fullmatch(r"[a-z]+(_[a-z0-9]+)*", i) for i in ids), ids
    assert len(ids) == len(set(ids))


def test_component_names_collide_with_no_generator_type_nor_builtin(document):
    import builtins

    from service.api.openapi import RESERVED

    names = set(document["components"]["schemas"])
    assert not names & RESERVED
    assert not names & set(dir(builtins))
    assert "FrequencyResponse" in names and "Response" not in names


def test_two_schemas_may_not_share_a_component_name():
    import marshmallow as ma

    from service.api.openapi import ComponentNames, NameCollision

    first = type("ThingSchema", (ma.Schema,), {"__module__": "a"})
    second = type("ThingSchema", (ma.Schema,), {"__module__": "b"})
    names = ComponentNames()
    assert names(first) == "Thing"
    with pytest.raises(NameCollision):
        names(second)
    with pytest.raises(NameCollision):
        ComponentNames()(type("ResponseSchema", (ma.Schema,), {"__module__": "c"}))


def test_enumerations_are_components_and_nullable_ones_are_not_copied(document):
    schemas = document["components"]["schemas"]
    for name in ("ResponseType", "Family", "CutoffAt", "Excess", "SectionOrdering", "SectionKind", "SeriesName"):
        assert schemas[name]["type"] == "string" and schemas[name]["enum"]

    def walk(node, where):
        if isinstance(node, dict):
            assert not (isinstance(node.get("enum"), list) and None in node["enum"]), where
            for k, v in node.items():
                walk(v, f"{where}/{k}")
        elif isinstance(node, list):
            for i, v in enumerate(node):
                walk(v, f"{where}[{i}]")

    walk(document, "")
    family = schemas["DesignDocument"]["properties"]["family"]
    assert family["oneOf"] == [{"$ref": "#/components/schemas/Family"}, {"type": "null"}]


def test_one_enumeration_type_per_concept(document):
    """A generated client gets one enumeration class per concept of the domain (a part kind, a table's rows ...):
    no two carry the same values; and no anonymous object in a oneOf (openapi-python-client names those
    ``...Type1``)."""
    seen: dict[tuple, list[str]] = {}

    def walk(node, where):
        if isinstance(node, dict):
            if isinstance(node.get("enum"), list):
                seen.setdefault(tuple(sorted(map(str, node["enum"]))), []).append(where)
            for variant in node.get("oneOf", []):
                assert "$ref" in variant or variant.get("type") != "object", f"{where}: name the object variant"
            for k, v in node.items():
                walk(v, f"{where}/{k}")
        elif isinstance(node, list):
            for i, v in enumerate(node):
                walk(v, f"{where}[{i}]")

    walk(document, "")
    # the representations an operation offers (`format`) are an enumeration of that operation's own
    per_operation = {p for places in seen.values() for p in places
                     if p.endswith("Format") or p.endswith("/properties/format")}
    shared = {values: places for values, places in seen.items() if len(set(places) - per_operation) > 1}
    assert not shared, shared


def test_array_query_parameters_are_repeated_parameters(document):
    for path, method, op in _operations(document):
        for p in op.get("parameters", []):
            if p.get("in") == "query" and p["schema"].get("type") == "array":
                assert p.get("explode", True) is True and p.get("style", "form") == "form", (path, p["name"])


def test_each_representation_has_an_operation_with_one_media_type(document):
    from service.api.formats import MEDIA_TYPES

    for path, method, op in _operations(document):
        content = op["responses"]["200"]["content"]
        last = path.rsplit("/", 1)[-1]
        if "." in last:
            fmt = last.rsplit(".", 1)[1]
            assert list(content) == [MEDIA_TYPES[fmt]], (path, method)
            names = {p["name"] for p in op.get("parameters", []) if p.get("in") == "query"}
            assert "format" not in names
            assert ("field" in names) == (fmt in ("text", "csv")), (path, method)
            base = document["paths"][path.rsplit(".", 1)[0]][method]
            assert op["operationId"] == f"{base['operationId']}_{fmt}"
            assert MEDIA_TYPES[fmt] in base["responses"]["200"]["content"]
        else:
            assert next(iter(content)) == "application/json", (path, method)
            for mt in list(content)[1:]:
                fmt = next(k for k, v in MEDIA_TYPES.items() if v == mt)
                assert f"{path}.{fmt}" in document["paths"], (path, fmt)
