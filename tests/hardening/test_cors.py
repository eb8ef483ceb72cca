"""CORS allowlist (service/api/cors.py)."""

from __future__ import annotations

import pytest

from service import create_app
from service.api.cors import normalize_origin

FORMS = "https://forms.larkspur.example"


@pytest.fixture
def c():
    return create_app({"TESTING": True, "cors_origins": (FORMS, "http://localhost:5173")}).test_client()


def _preflight(c, origin, method="POST", path="/v1/approximations", headers="content-type"):
    return c.options(path, headers={"Origin": origin, "Access-Control-Request-Method": method,
                                    "Access-Control-Request-Headers": headers})


def test_no_cors_headers_by_default(client):
    r = client.get("/v1/catalog", headers={"Origin": FORMS})
    assert not [h for h in r.headers.keys() if h.lower().startswith("access-control-")]
    r = _preflight(client, FORMS)
    assert "Access-Control-Allow-Origin" not in r.headers


@pytest.mark.parametrize("method", ["GET", "POST"])
def test_preflight_for_allowed_origin(c, method):
    r = _preflight(c, FORMS, method, headers="content-type, authorization, x-request-id")
    assert r.status_code == 204
    assert r.headers["Access-Control-Allow-Origin"] == FORMS
    assert set(r.headers["Access-Control-Allow-Methods"].split(", ")) == {"GET", "POST"}
    allowed = {h.lower() for h in r.headers["Access-Control-Allow-Headers"].split(", ")}
    assert allowed == {"content-type", "authorization", "x-request-id"}
    assert "Origin" in r.headers["Vary"]
    assert r.data == b""


def test_preflight_for_other_origin_gets_no_cors_headers(c):
    for origin in ("https://evil.example", FORMS + ".evil.example", "https://forms.larkspur.example:444", "null"):
        r = _preflight(c, origin)
        assert "Access-Control-Allow-Origin" not in r.headers, origin
        assert "Access-Control-Allow-Methods" not in r.headers, origin


def test_preflight_for_other_method_gets_no_cors_headers(c):
    r = _preflight(c, FORMS, "DELETE")
    assert "Access-Control-Allow-Origin" not in r.headers


def test_actual_request_from_allowed_origin(c):
    r = c.get("/v1/catalog", headers={"Origin": FORMS})
    assert r.status_code == 200
    assert r.headers["Access-Control-Allow-Origin"] == FORMS
    exposed = {h.strip() for h in r.headers["Access-Control-Expose-Headers"].split(",")}
    assert exposed == {"X-Request-ID", "X-Rolloff-Version"}
    assert "Origin" in r.headers["Vary"]
    assert "Access-Control-Allow-Credentials" not in r.headers


def test_error_responses_carry_cors_headers_so_the_form_can_read_them(c):
    r = c.post("/v1/approximations", json={"family": "nope"}, headers={"Origin": FORMS})
    assert 400 <= r.status_code < 500
    assert r.headers["Access-Control-Allow-Origin"] == FORMS


def test_actual_request_from_other_origin(c):
    r = c.get("/v1/catalog", headers={"Origin": "https://evil.example"})
    assert r.status_code == 200
    assert "Access-Control-Allow-Origin" not in r.headers
    assert "Origin" in r.headers["Vary"]


def test_operations_endpoints_get_no_cors_headers(c):
    for path in ("/healthz", "/metrics"):
        r = c.get(path, headers={"Origin": FORMS})
        assert "Access-Control-Allow-Origin" not in r.headers, path


def test_origin_matching_ignores_case_of_scheme_and_host(c):
    r = c.get("/v1/catalog", headers={"Origin": "HTTPS://Forms.Larkspur.Example"})
    assert r.headers["Access-Control-Allow-Origin"] == "HTTPS://Forms.Larkspur.Example"


@pytest.mark.parametrize("bad", ["*", "forms.example", "https://forms.example/path", "ftp://x.example",
                                 "https://*.example.com?x=1"])
def test_bad_origin_settings_refused(bad):
    with pytest.raises(ValueError, match="ROLLOFF_CORS_ORIGINS"):
        create_app({"cors_origins": (bad,)})


def test_normalize_origin():
    assert normalize_origin("HTTPS://Forms.Example:8443/") == "https://forms.example:8443"
