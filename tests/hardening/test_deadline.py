"""The request deadline: the module, the engines' checks, and the 503 the API answers."""

from __future__ import annotations

import gc
import threading
import time
import tracemalloc

import numpy as np
import pytest

from service import create_app, deadline
from service.deadline import DeadlineExceeded
from service.errors import RolloffError

DESIGN = {"response": "lowpass", "family": "elliptic", "order": 10, "cutoff_hz": 1000, "passband_ripple_db": 0.1,
          "stopband_attenuation_db": 80}


# --- the module ----------------------------------------------------------------------------------

def test_without_a_deadline_check_never_raises():
    assert deadline.remaining() is None
    deadline.check("anywhere")


def test_check_raises_once_the_time_has_passed():
    with deadline.deadline(0.01):
        deadline.check("early")  # not yet
        time.sleep(0.02)
        with pytest.raises(DeadlineExceeded) as info:
            deadline.check("tolerance.montecarlo")
    assert isinstance(info.value, RolloffError) and isinstance(info.value, TimeoutError)
    assert info.value.seconds == 0.01 and info.value.where == "tolerance.montecarlo"
    assert deadline.remaining() is None  # restored on exit


def test_a_nested_deadline_shortens_but_never_extends():
    with deadline.deadline(0.01):
        with deadline.deadline(100):
            assert deadline.remaining() <= 0.01
        with deadline.deadline(0.001):
            assert deadline.remaining() <= 0.001
        with deadline.deadline(None):  # None lifts the limit inside
            assert deadline.remaining() is None
        assert 0 < deadline.remaining() <= 0.01


@pytest.mark.parametrize("bad", [0, -1, float("nan")])
def test_a_deadline_must_be_positive(bad):
    with pytest.raises(ValueError):
        with deadline.deadline(bad):
            pass


def test_each_thread_has_its_own_deadline():
    seen = {}

    def other():
        seen["remaining"] = deadline.remaining()
        deadline.check("other thread")  # never raises: this thread has no limit

    with deadline.deadline(1e-6):
        time.sleep(0.001)
        t = threading.Thread(target=other)
        t.start()
        t.join()
    assert seen == {"remaining": None}


def test_start_and_stop_pair_like_the_request_hooks():
    token = deadline.start(5)
    assert 0 < deadline.remaining() <= 5
    deadline.stop(token)
    assert deadline.remaining() is None


# --- the engines stop at a chunk boundary -------------------------------------------------------

def _design_document():
    app = create_app({"TESTING": True, "log_level": "error"})
    r = app.test_client().post("/v1/designs", json=DESIGN)
    assert r.status_code == 200
    return r.get_json()


DOC = _design_document()


def test_circuit_engine_stops_past_the_deadline_and_runs_without_one():
    from service.realization import cascade_circuit
    from service.workflows import DesignDocument

    circuit = cascade_circuit(DesignDocument.from_json(DOC).plans())
    f = np.geomspace(10, 1e5, 2001)
    from service.circuit import ac_response

    h = ac_response(circuit, f)  # no limit: computes
    assert h.shape == (1, f.size) and np.all(np.isfinite(h))
    for method in ("staged", "full"):
        with deadline.deadline(1e-9):
            time.sleep(0.001)
            with pytest.raises(DeadlineExceeded) as info:
                ac_response(circuit, f, method=method)
        assert info.value.where.startswith("circuit.")


def test_tolerance_run_stops_past_the_deadline():
    from tests.tolerance.conftest import run_tolerance

    with deadline.deadline(1e-9):
        time.sleep(0.001)
        with pytest.raises(DeadlineExceeded):
            run_tolerance(DOC, trials=200, seed=1, frequencies_hz=np.geomspace(10, 1e5, 101))


# --- the API ------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def tiny():
    """An app whose requests get 50 microseconds."""
    return create_app({"TESTING": True, "log_level": "critical", "request_deadline_s": 5e-5}).test_client()


@pytest.mark.parametrize("path, body", [
    ("/v1/designs", DESIGN),
    ("/v1/designs/evaluate", DOC),
    ("/v1/responses", {"design": DOC}),
    ("/v1/tolerance", {"design": DOC, "trials": 500, "seed": 1}),
])
def test_a_request_past_its_deadline_is_a_503_problem_with_retry_after(tiny, path, body):
    r = tiny.post(path, json=body)
    assert r.status_code == 503, r.get_data(as_text=True)[:300]
    assert r.content_type == "application/problem+json"
    assert r.headers["Retry-After"] == "1"  # the deadline, rounded up to whole seconds
    problem = r.get_json()
    assert problem["type"] == "urn:rolloff:problem:deadline-exceeded"
    assert problem["setting"] == "ROLLOFF_REQUEST_DEADLINE_S" and problem["limit"] == "request_deadline_s"
    assert "Traceback" not in r.get_data(as_text=True) and "/service/" not in r.get_data(as_text=True)


@pytest.mark.parametrize("path", ["/healthz", "/readyz", "/v1/catalog", "/metrics", "/v1/openapi.json"])
def test_operations_endpoints_run_without_a_deadline(tiny, path):
    assert tiny.get(path).status_code == 200


def test_a_stopped_request_leaves_no_arrays_behind():
    client = create_app({"TESTING": True, "log_level": "critical", "request_deadline_s": 0.3,
                         "max_work": 10**12}).test_client()  # the work budget would refuse it before it starts
    body = {"design": DOC, "trials": 20_000, "seed": 1, "frequencies": {"start_hz": 10, "stop_hz": 1e5,
                                                                      "points": 1500}}
    client.post("/v1/designs/evaluate", json=DOC)  # imports and caches outside the measurement
    gc.collect()
    tracemalloc.start()
    try:
        before = tracemalloc.get_traced_memory()[0]
        r = client.post("/v1/tolerance", json=body)
        gc.collect()
        after, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    if r.status_code != 503:
        pytest.skip(f"the request finished within 0.3 s here ({r.status_code}): nothing was abandoned")
    assert peak - before > 4 * 2**20  # it had allocated its working arrays (numpy reports to tracemalloc)
    assert after - before < min(2**20, (peak - before) / 4), (before, after, peak)  # gone after the 503
