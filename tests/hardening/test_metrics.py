"""Prometheus metrics (service/api/metrics.py) through the Flask test client."""

from __future__ import annotations

import re

import numpy as np
import pytest

from service import create_app
from service.api.metrics import count_trials


def _value(text: str, name: str, **labels) -> float:
    total = 0.0
    found = False
    for line in text.splitlines():
        if not line.startswith(name + "{") and not line.startswith(name + " "):
            continue
        m = re.match(r"^([^{ ]+)(\{(.*)\})? (\S+)$", line)
        got = dict(re.findall(r'(\w+)="([^"]*)"', m.group(3) or ""))
        if all(got.get(k) == v for k, v in labels.items()):
            total += float(m.group(4))
            found = True
    assert found, (name, labels)
    return total


def test_metrics_text_format(client):
    r = client.get("/metrics")
    assert r.status_code == 200
    assert r.mimetype == "text/plain"
    assert "# TYPE rolloff_http_requests_total counter" in r.get_data(as_text=True)
    assert "# TYPE rolloff_http_request_duration_seconds histogram" in r.get_data(as_text=True)


def test_counts_by_url_rule_and_status(client):
    for _ in range(3):
        assert client.get("/v1/values/nearest?value=4.87k&series=E24").status_code == 200
    client.get("/v1/values/nearest?value=nope&series=E24")
    client.get("/v1/no/such/path/1234")
    client.get("/v1/no/such/path/5678")
    text = client.get("/metrics").get_data(as_text=True)
    assert _value(text, "rolloff_http_requests_total", endpoint="/v1/values/nearest", status="200",
                  method="GET") == 3
    assert _value(text, "rolloff_http_requests_total", endpoint="<unmatched>", status="404") == 2
    # raw paths never become labels (label values only: a sample value, such as a process start time, may
    # hold any digits)
    label_values = re.findall(r'\w+="([^"]*)"', text)
    assert label_values and not any("such/path" in v or "1234" in v or "5678" in v for v in label_values)
    count = _value(text, "rolloff_http_request_duration_seconds_count", endpoint="/v1/values/nearest",
                   status="200")
    assert count == 3
    assert _value(text, "rolloff_http_request_duration_seconds_bucket", endpoint="/v1/values/nearest",
                  status="200", le="+Inf") == 3


def test_count_trials():
    app = create_app({"TESTING": True})
    with app.app_context():
        count_trials(1000)
        count_trials(np.int64(24))
        count_trials(0)
    text = app.test_client().get("/metrics").get_data(as_text=True)
    assert _value(text, "rolloff_monte_carlo_trials_total") == 1024


def test_count_trials_is_a_no_op_outside_an_app():
    count_trials(10)  # no application context: nothing to count into, no error


def test_count_trials_rejects_nonsense():
    with pytest.raises(ValueError):
        count_trials(-1)
    with pytest.raises(TypeError):
        count_trials(2.5)


def test_apps_do_not_share_counts():
    a, b = create_app({"TESTING": True}), create_app({"TESTING": True})
    a.test_client().get("/healthz")
    text = b.test_client().get("/metrics").get_data(as_text=True)
    assert 'endpoint="/healthz"' not in text


def test_metrics_is_get_only(client):
    r = client.post("/metrics")
    assert r.status_code == 405
    assert r.mimetype == "application/problem+json"
