"""The application factory and settings (service/api/app.py, service/config.py)."""

from __future__ import annotations

import json
import logging

import pytest

from service import create_app
from service.config import SETTINGS, Settings


def test_factory_defaults_and_test_config():
    assert not create_app().testing
    app = create_app({"TESTING": True, "max_order": 8})
    assert app.testing
    assert app.config["ROLLOFF_SETTINGS"].max_order == 8


def test_factory_rejects_unknown_settings():
    with pytest.raises(TypeError, match="no_such_setting"):
        create_app({"no_such_setting": 1})


def test_settings_read_from_environment(monkeypatch):
    monkeypatch.setenv("ROLLOFF_MAX_BODY_BYTES", "2048")
    monkeypatch.setenv("ROLLOFF_CORS_ORIGINS", "https://forms.example, https://b.example")
    app = create_app()
    assert app.config["MAX_CONTENT_LENGTH"] == 2048
    assert app.config["ROLLOFF_SETTINGS"].cors_origins == ("https://forms.example", "https://b.example")


def test_bad_setting_names_the_variable():
    with pytest.raises(ValueError, match="ROLLOFF_WORKERS"):
        Settings.from_env({"ROLLOFF_WORKERS": "many"})


def test_settings_table_and_dataclass_agree():
    assert [s.name for s in SETTINGS] == list(Settings.__dataclass_fields__)
    defaults = Settings()
    for s in SETTINGS:
        assert getattr(defaults, s.name) == s.default, s.name
        assert s.env.startswith("ROLLOFF_") or s.env == "PROMETHEUS_MULTIPROC_DIR"


def test_request_id_is_echoed_or_made(client):
    r = client.get("/healthz", headers={"X-Request-ID": "pm7-check.42"})
    assert r.headers["X-Request-ID"] == "pm7-check.42"
    r = client.get("/healthz", headers={"X-Request-ID": "bad id with spaces"})
    assert r.headers["X-Request-ID"] != "bad id with spaces" and len(r.headers["X-Request-ID"]) == 32
    assert r.headers["X-Rolloff-Version"]


def test_one_json_log_line_per_request(client, capsys):
    client.get("/v1/values/nearest?value=1k", headers={"X-Request-ID": "log-test-1"})
    lines = [json.loads(line) for line in capsys.readouterr().err.splitlines() if "log-test-1" in line]
    assert len(lines) == 1
    entry = lines[0]
    assert entry["method"] == "GET" and entry["path"] == "/v1/values/nearest" and entry["status"] == 200
    assert entry["request_id"] == "log-test-1" and entry["duration_ms"] >= 0


def test_health_and_ready(client):
    assert client.get("/healthz").get_json()["status"] == "ok"
    ready = client.get("/readyz").get_json()
    assert ready["status"] == "ready" and set(ready["checks"].values()) == {"ok"}


def test_unhandled_exception_is_a_generic_500_with_the_request_id(app, capsys):
    @app.route("/v1/_boom")
    def boom():
        raise RuntimeError("secret internals")

    r = app.test_client().get("/v1/_boom", headers={"X-Request-ID": "boom-1"})
    assert r.status_code == 500 and r.mimetype == "application/problem+json"
    text = r.get_data(as_text=True)
    assert "secret internals" not in text and "Traceback" not in text
    assert r.get_json()["request_id"] == "boom-1" and "boom-1" in r.get_json()["detail"]
    err = capsys.readouterr().err
    assert "secret internals" in err and "Traceback" in err  # in the server log only
