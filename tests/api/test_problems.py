"""Every error is RFC 9457 problem+json (source: RFC 9457, Problem Details for HTTP APIs, sec. 3)."""

from __future__ import annotations

from tests.conftest import problem

URL = "/v1/values/nearest"


def test_malformed_json_is_400(client):
    problem(client.post(URL, data="{bad", content_type="application/json"), 400)


def test_wrong_content_type_is_415(client):
    body = problem(client.post(URL, data="value=4k7", content_type="application/x-www-form-urlencoded"), 415)
    assert "application/json" in body["detail"]


def test_empty_body_is_400(client):
    problem(client.post(URL, data="", content_type="application/json"), 400)


def test_unknown_body_field_is_422_naming_it(client):
    body = problem(client.post(URL, json={"value": "4k7", "colour": "red"}), 422)
    assert body["errors"] == {"colour": ["Unknown field."]}


def test_unknown_query_parameter_is_422_naming_it(client):
    body = problem(client.get(URL + "?value=4k7&serie=E24"), 422)
    assert "serie" in body["errors"]


def test_nan_and_infinity_are_422(client):
    for literal in ("NaN", "Infinity", "-Infinity"):
        body = problem(client.post(URL, data='{"value": %s}' % literal, content_type="application/json"), 422)
        assert "value" in body["errors"]
    for text in ("nan", "inf", "Infinity"):
        body = problem(client.post(URL, json={"value": text}), 422)
        assert "value" in body["errors"]


def test_body_over_the_limit_is_413(client):
    problem(client.post(URL, data=b" " * (2 * 1024 * 1024), content_type="application/json"), 413)


def test_limit_is_configurable():
    from service import create_app

    small = create_app({"max_body_bytes": 64}).test_client()
    assert small.post(URL, json={"value": "4k7"}).status_code == 200
    problem(small.post(URL, data='{"value": "4k7"}' + " " * 100, content_type="application/json"), 413)


def test_duplicate_keys_are_400_naming_the_key(client):
    body = problem(client.post(URL, data='{"value": 1, "value": 2}', content_type="application/json"), 400)
    assert "value" in body["detail"]


def test_deep_nesting_is_400(client):
    problem(client.post(URL, data="[" * 1000 + "]" * 1000, content_type="application/json"), 400)
    problem(client.post(URL, data="[" * 100 + "]" * 100, content_type="application/json"), 400)


def test_invalid_utf8_is_400(client):
    problem(client.post(URL, data=b'{"value": "\xff\xfe"}', content_type="application/json"), 400)


def test_405_keeps_allow(client):
    r = client.delete(URL)
    body = problem(r, 405)
    assert "GET" in r.headers["Allow"] and "POST" in r.headers["Allow"]
    assert "DELETE" in body["detail"]


def test_404_is_a_problem(client):
    problem(client.get("/v1/no-such-thing"), 404)


def test_wrong_types_name_the_field(client):
    body = problem(client.post(URL, json={"value": True}), 422)
    assert "value" in body["errors"]
    body = problem(client.post(URL, json={"value": [1]}), 422)
    assert "value" in body["errors"]
    body = problem(client.post(URL, json=[1, 2]), 422)
    assert body["errors"]
