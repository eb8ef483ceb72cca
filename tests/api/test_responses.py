"""/v1/responses through the test client."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest
import scipy.signal as sig

from service.api.views.designs import EVALUATE_EXAMPLE
from service.api.views.responses import EXAMPLE
from tests.conftest import problem

URL = "/v1/responses"


def test_zpk_response_matches_scipy(client):
    poles = [[-1000.0, 2000.0], [-1000.0, -2000.0], [-500.0, 0.0]]
    body = client.post(URL, json={"poles": poles, "gain": 2.5e9, "frequencies": [10, 100, 300, 1000, 3000]}).get_json()
    p = np.array([complex(*x) for x in poles])
    # source: scipy.signal.freqs_zpk (reference library)
    _, h = sig.freqs_zpk([], p, 2.5e9, worN=2 * np.pi * np.array(body["frequency_hz"]))
    assert np.allclose(body["magnitude_db"], 20 * np.log10(np.abs(h)), atol=1e-9)


def test_second_order_butterworth_overshoot_is_4_3_percent(client):
    body = client.post(URL, json={"filter": {"response": "lowpass", "family": "butterworth", "order": 2,
                                             "cutoff_hz": "1kHz"}}).get_json()
    # source: K. Ogata, Modern Control Engineering, 5th ed., eq. 5-21: Mp = exp(-pi*zeta/sqrt(1-zeta^2)), zeta=1/sqrt2
    assert body["metrics"]["overshoot_pct"] == pytest.approx(100 * np.exp(-np.pi), rel=1e-3)
    assert body["metrics"]["f3db_hz"] == pytest.approx(1000.0, rel=1e-9)


def test_mask_example_and_formats(client):
    body = client.post(URL, json=EXAMPLE).get_json()
    assert body["mask_result"]["pass"] is True and len(body["mask_result"]["segments"]) == 2
    r = client.post(URL, json=dict(EXAMPLE, format="csv"))
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    assert len(rows) == 401 and set(rows[0]) == {"frequency_hz", "magnitude_db", "phase_deg", "group_delay_s"}
    r = client.post(URL, json=dict(EXAMPLE, format="svg"))
    assert r.mimetype == "image/svg+xml" and b"<svg" in r.data[:500]


def test_failing_mask_is_reported(client):
    req = {"filter": {"response": "lowpass", "family": "chebyshev1", "order": 5, "cutoff_hz": 1000,
                      "passband_ripple_db": 1.0},
           "frequencies": {"start_hz": 10, "stop_hz": 1000, "points": 7},
           "mask": [{"start_hz": 0, "stop_hz": 1000, "max_loss_db": 0.95}]}
    body = client.post(URL, json=req).get_json()
    # a 1 dB ripple peak between 7 coarse points still fails a 0.95 dB mask (refined search)
    assert body["mask_result"]["pass"] is False
    assert body["mask_result"]["worst_margin_db"] == pytest.approx(-0.05, abs=1e-6)


def test_design_at_circuit_level(client):
    body = client.post(URL, json={"design": EVALUATE_EXAMPLE, "frequencies": [10, 1000, 10000]}).get_json()
    # C1 = 22n, C2 = 10n, R = 10.7k unity-gain Sallen-Key: H(0) = 1 (common practice)
    assert body["magnitude_db"][0] == pytest.approx(0.0, abs=1e-3)
    assert body["magnitude_db"][2] < -35


def test_get_form(client):
    r = client.get(URL + "?response=lowpass&family=bessel&order=4&cutoff_hz=1k&start_hz=10&stop_hz=10k&points=50")
    body = r.get_json()
    assert len(body["frequency_hz"]) == 50 and body["metrics"]["group_delay_s"] > 0


@pytest.mark.parametrize("req, field", [
    ({"poles": [[-1, 0]], "gain": 1, "filter": {"response": "lowpass", "family": "butterworth", "order": 1,
                                                 "cutoff_hz": 1}}, "body"),
    ({"poles": [[-1, 0]]}, "gain"),
    ({"zeros": [[0, 0]], "gain": 1}, "poles"),
    ({"poles": [[-1, 0]], "gain": 1, "frequencies": {"start_hz": 10, "stop_hz": 1, "points": 5}}, "frequencies"),
    ({"poles": [[-1, 0]], "gain": 1, "frequencies": [3, 2, 1]}, "frequencies"),
    ({"poles": [[-1, 0]], "gain": 1, "frequencies": {"start_hz": 1, "stop_hz": 10, "points": 20000}},
     "frequencies.points"),
    ({"poles": [[-1, 0]], "gain": 1, "mask": [{"start_hz": 0, "stop_hz": 10}]}, "mask"),
    ({"poles": [["a", 0]], "gain": 1}, "poles"),
])
def test_bad_requests_name_the_field(client, req, field):
    errors = problem(client.post(URL, json=req), 422)["errors"]
    assert any(k.startswith(field) for k in errors), errors


def test_point_limit_names_the_setting():
    from service import create_app

    c = create_app({"max_frequency_points": 100}).test_client()
    body = problem(c.post(URL, json={"poles": [[-1, 0]], "gain": 1, "frequencies":
                                     {"start_hz": 1, "stop_hz": 10, "points": 200}}), 422)
    assert body["setting"] == "ROLLOFF_MAX_FREQUENCY_POINTS"
