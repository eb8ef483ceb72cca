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
