"""Admission: compute slots and their queue, bodies read in full first (through the Flask test client)."""

from __future__ import annotations

import io
import threading

import pytest

from service import create_app
from service.api.admission import ComputeSlots, is_exempt

DESIGN = {"response": "lowpass", "family": "butterworth", "order": 4, "cutoff_hz": 1000}


def test_slots_queue_and_refuse():
    slots = ComputeSlots(1, 1)
    assert slots.acquire(1.0) is None           # the slot
    assert slots.acquire(0.01) == "timeout"      # waited in the queue, no slot came free
    result = {}
    waiter = threading.Thread(target=lambda: result.update(first=slots.acquire(5.0)))
    waiter.start()
    while slots.waiting == 0:
        pass
    assert slots.acquire(5.0) == "queue"         # the queue (1) is full: refused at once
    slots.release()                               # the waiter gets the slot
    waiter.join(5)
    assert result == {"first": None}
    slots.release()


@pytest.mark.parametrize("path, exempt", [
    ("/healthz", True), ("/readyz", True), ("/metrics", True), ("/v1/catalog", True), ("/v1/openapi.json", True),
    ("/docs", True), ("/docs/index.html", True), ("/v1/designs", False), ("/v1/tolerance", False),
    ("/v1/values/nearest", False),
])
def test_which_paths_need_a_slot(path, exempt):
    assert is_exempt(path) is exempt


def test_a_full_queue_is_a_503_with_retry_after_while_health_and_catalog_answer():
    app = create_app({"TESTING": True, "log_level": "critical", "compute_slots": 1, "compute_queue": 0})
    client = app.test_client()
    slots = app.extensions["rolloff_slots"]
    assert slots.acquire(1.0) is None  # another request computes
    try:
        r = client.post("/v1/designs", json=DESIGN)
        assert r.status_code == 503
        assert r.content_type == "application/problem+json"
        assert r.get_json()["type"] == "urn:rolloff:problem:busy"
        assert r.headers["Retry-After"].isdigit()
        for path in ("/healthz", "/readyz", "/v1/catalog", "/metrics"):
            assert client.get(path).status_code == 200, path
    finally:
        slots.release()
    assert client.post("/v1/designs", json=DESIGN).status_code == 200  # the slot is back


def test_a_request_waits_for_the_slot_within_its_deadline():
    app = create_app({"TESTING": True, "log_level": "critical", "compute_slots": 1, "compute_queue": 4})
    slots = app.extensions["rolloff_slots"]
    assert slots.acquire(1.0) is None
    timer = threading.Timer(0.2, slots.release)
    timer.start()
    r = app.test_client().post("/v1/designs", json=DESIGN)  # waits in the queue, then computes
    timer.join()
    assert r.status_code == 200


def test_a_chunked_body_over_the_limit_is_a_413_even_without_a_length():
    client = create_app({"TESTING": True, "log_level": "critical", "max_body_bytes": 1000}).test_client()
    r = client.post("/v1/values/nearest", input_stream=io.BytesIO(b'{"value": "4.7k"}' + b" " * 5000),
                    headers={"Transfer-Encoding": "chunked", "Content-Type": "application/json"})
    assert r.status_code == 413
    assert r.get_json()["setting"] == "ROLLOFF_MAX_BODY_BYTES"
    assert r.headers.get("Connection") == "close"
    r = client.post("/v1/values/nearest", input_stream=io.BytesIO(b'{"value": "4.7k"}'),
                    headers={"Transfer-Encoding": "chunked", "Content-Type": "application/json"})
    assert r.status_code == 200


def test_a_huge_integer_is_read_as_infinity_and_refused_with_the_field():
    client = create_app({"TESTING": True, "log_level": "critical"}).test_client()
    for sign in ("", "-"):
        r = client.post("/v1/values/nearest", data='{"value": %s%s}' % (sign, "9" * 400),
                        content_type="application/json")
        assert r.status_code == 422
        assert "value" in r.get_json()["errors"]
