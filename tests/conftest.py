"""Shared fixtures: the app built by the factory, its test client."""

from __future__ import annotations

import pytest

from service import create_app


@pytest.fixture
def app():
    return create_app({"TESTING": True})


@pytest.fixture
def client(app):
    return app.test_client()


def problem(response, status: int) -> dict:
    """Assert ``response`` is an RFC 9457 problem with ``status``; return its body."""
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    body = response.get_json(force=True)
    for member in ("type", "title", "status", "detail", "instance", "request_id"):
        assert member in body, member
    assert body["status"] == status
    return body
