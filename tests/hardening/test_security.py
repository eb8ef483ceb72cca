"""API keys (service/api/security.py): bearer tokens on /v1, RFC 6750 challenges, rotation."""

from __future__ import annotations

import logging
import os

import pytest

from service import create_app
from service.api.security import KeyStore, bearer_token, parse_keys_file
from tests.conftest import problem

KEY = "k-3f9a1c7e0b52"
OTHER = "k-second-key-77"


@pytest.fixture
def keyed():
    return create_app({"TESTING": True, "api_keys": (KEY, OTHER)}).test_client()


def test_off_by_default(client):
    assert client.get("/v1/catalog").status_code == 200


def test_missing_key_is_401_with_bare_challenge(keyed):
    r = keyed.get("/v1/catalog")
    body = problem(r, 401)
    # source: RFC 6750, section 3 (no error code when the request carries no credentials)
    assert r.headers["WWW-Authenticate"] == 'Bearer realm="rolloff"'
    assert "Authorization: Bearer" in body["detail"]


def test_wrong_key_is_401_invalid_token(keyed):
    r = keyed.post("/v1/approximations", json={}, headers={"Authorization": "Bearer not-a-key"})
    problem(r, 401)
    challenge = r.headers["WWW-Authenticate"]
    # source: RFC 6750, section 3.1 (invalid_token)
    assert challenge.startswith('Bearer realm="rolloff"') and 'error="invalid_token"' in challenge
    assert "not-a-key" not in r.get_data(as_text=True)


@pytest.mark.parametrize("header", ["Basic dXNlcjpwYXNz", "Bearer", "Bearer   ", KEY, "Token " + KEY])
def test_not_a_bearer_token_is_treated_as_missing(keyed, header):
    r = keyed.get("/v1/catalog", headers={"Authorization": header})
    problem(r, 401)
    assert r.headers["WWW-Authenticate"] == 'Bearer realm="rolloff"'


@pytest.mark.parametrize("key", [KEY, OTHER])
def test_every_configured_key_is_accepted(keyed, key):
    assert keyed.get("/v1/catalog", headers={"Authorization": f"Bearer {key}"}).status_code == 200
    # the scheme name is case-insensitive (RFC 9110, section 11.1)
    assert keyed.get("/v1/catalog", headers={"Authorization": f"bearer {key}"}).status_code == 200


def test_prefix_of_a_key_is_rejected(keyed):
    assert keyed.get("/v1/catalog", headers={"Authorization": f"Bearer {KEY[:-1]}"}).status_code == 401
    assert keyed.get("/v1/catalog", headers={"Authorization": f"Bearer {KEY}x"}).status_code == 401


@pytest.mark.parametrize("path", ["/healthz", "/readyz", "/metrics"])
def test_operations_endpoints_stay_open(keyed, path):
    assert keyed.get(path).status_code == 200


def test_unknown_v1_path_needs_a_key_before_it_is_a_404(keyed):
    problem(keyed.get("/v1/no-such-thing"), 401)
    problem(keyed.get("/v1/no-such-thing", headers={"Authorization": f"Bearer {KEY}"}), 404)


def test_openapi_document_is_under_v1_and_needs_the_key(keyed):
    problem(keyed.get("/v1/openapi.json"), 401)
    assert keyed.get("/v1/openapi.json", headers={"Authorization": f"Bearer {KEY}"}).status_code == 200


def test_preflight_needs_no_key():
    c = create_app({"TESTING": True, "api_keys": (KEY,), "cors_origins": ("https://forms.example",)}).test_client()
    r = c.options("/v1/approximations", headers={"Origin": "https://forms.example",
                                                 "Access-Control-Request-Method": "POST",
                                                 "Access-Control-Request-Headers": "authorization, content-type"})
    assert r.status_code == 204
    assert r.headers["Access-Control-Allow-Origin"] == "https://forms.example"


def test_keys_never_logged(capsys, caplog):
    caplog.set_level(logging.DEBUG)
    c = create_app({"TESTING": True, "api_keys": (KEY,)}).test_client()
    c.get("/v1/catalog", headers={"Authorization": f"Bearer {KEY}"})
    c.get("/v1/catalog", headers={"Authorization": "Bearer wrong-key-123"})
    captured = capsys.readouterr()
    text = captured.out + captured.err + caplog.text
    assert "/v1/catalog" in text  # the access log did run
    assert KEY not in text and "wrong-key-123" not in text


def test_settings_repr_hides_keys():
    app = create_app({"api_keys": (KEY,)})
    assert KEY not in repr(app.config["ROLLOFF_SETTINGS"])


def test_keys_file(tmp_path):
    path = tmp_path / "keys"
    path.write_text(f"# keys of the forms server\n\n{KEY}   # added in March\n{OTHER}\n")
    c = create_app({"TESTING": True, "api_keys_file": str(path)}).test_client()
    assert c.get("/v1/catalog").status_code == 401
    for key in (KEY, OTHER):
        assert c.get("/v1/catalog", headers={"Authorization": f"Bearer {key}"}).status_code == 200
    assert c.get("/v1/catalog", headers={"Authorization": "Bearer # added in March"}).status_code == 401


def test_keys_file_is_reread_when_it_changes(tmp_path):
    path = tmp_path / "keys"
    path.write_text(KEY + "\n")
    c = create_app({"TESTING": True, "api_keys_file": str(path)}).test_client()
    auth = {"Authorization": f"Bearer {KEY}"}
    assert c.get("/v1/catalog", headers=auth).status_code == 200
    path.write_text("k-rotated-in-0042\n")
    st = os.stat(path)
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns + 1_000_000_000))
    assert c.get("/v1/catalog", headers=auth).status_code == 401
    assert c.get("/v1/catalog", headers={"Authorization": "Bearer k-rotated-in-0042"}).status_code == 200


def test_keys_file_emptied_or_removed_keeps_the_last_keys(tmp_path):
    path = tmp_path / "keys"
    path.write_text(KEY + "\n")
    c = create_app({"TESTING": True, "api_keys_file": str(path)}).test_client()
    auth = {"Authorization": f"Bearer {KEY}"}
    path.write_text("# nothing\n")
    assert c.get("/v1/catalog", headers=auth).status_code == 200
    assert c.get("/v1/catalog").status_code == 401  # never falls back to "no keys"
    path.unlink()
    assert c.get("/v1/catalog", headers=auth).status_code == 200
    assert c.get("/v1/catalog").status_code == 401


@pytest.mark.parametrize("content", ["", "# only a comment\n\n"])
def test_empty_keys_file_refused_at_start(tmp_path, content):
    path = tmp_path / "keys"
    path.write_text(content)
    with pytest.raises(ValueError, match="ROLLOFF_API_KEYS_FILE"):
        create_app({"api_keys_file": str(path)})


def test_missing_keys_file_refused_at_start(tmp_path):
    with pytest.raises(ValueError, match="ROLLOFF_API_KEYS_FILE"):
        create_app({"api_keys_file": str(tmp_path / "absent")})


def test_key_with_white_space_refused():
    with pytest.raises(ValueError, match="ROLLOFF_API_KEYS"):
        KeyStore(("two words",))


def test_every_key_is_compared(monkeypatch):
    """A match on the first key still compares the others (no early exit)."""
    import service.api.security as security

    calls = []
    real = security.hmac.compare_digest

    def counting(a, b):
        calls.append(1)
        return real(a, b)

    monkeypatch.setattr(security.hmac, "compare_digest", counting)
    store = KeyStore(("a1", "b2", "c3"))
    assert store.accepts("a1")
    assert len(calls) == 3
    calls.clear()
    assert not store.accepts("zz")
    assert len(calls) == 3


def test_parse_helpers():
    assert parse_keys_file("a\n  b  \n#c\nd # e\n") == ("a", "b", "d")
    assert bearer_token("Bearer abc") == "abc"
    assert bearer_token("BEARER abc") == "abc"
    assert bearer_token("Basic abc") is None
    assert bearer_token(None) is None


def test_openapi_documents_bearer_and_401_on_every_v1_operation(app):
    spec = app.extensions["rolloff_api"].spec.to_dict()
    assert spec["components"]["securitySchemes"]["bearerAuth"]["scheme"] == "bearer"
    v1 = [(p, m, op) for p, item in spec["paths"].items() for m, op in item.items()
          if p.startswith("/v1") and m in ("get", "post", "put", "patch", "delete")]
    assert v1
    for path, method, op in v1:
        assert op["security"] == [{"bearerAuth": []}], (path, method)
        assert "401" in op["responses"], (path, method)
    assert "security" not in spec["paths"]["/healthz"]["get"]
    assert "/metrics" not in spec["paths"]
    assert "application/problem+json" in spec["components"]["responses"]["UNAUTHORIZED"]["content"]
