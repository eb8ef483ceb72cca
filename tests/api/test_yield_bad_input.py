"""Bad input of a design to a yield target, and of priced grades: a 422 naming the field, never a 500.

Every problem is checked as an RFC 9457 problem document (``tests.conftest.problem``: type, title, status,
detail, instance).  # source: IETF RFC 9457, Problem Details for HTTP APIs, section 3.1
"""

from __future__ import annotations

import copy

import pytest

from service import create_app
from tests.conftest import problem

URL = "/v1/designs"
BASE = {
    "response": "lowpass", "family": "chebyshev1", "passband_hz": "1kHz", "stopband_hz": "3kHz",
    "passband_ripple_db": 0.5, "stopband_attenuation_db": 40,
    "parts": {"resistors": {"series": "E96", "grades": [{"tolerance": 0.01, "cost": 1},
                                                        {"tolerance": 0.001, "cost": 3}]},
              "capacitors": {"series": "E12", "grades": [{"tolerance": 0.05, "cost": 1},
                                                         {"tolerance": 0.01, "cost": 2.5}]}},
    "yield": {"target": 0.9, "trials": 1000, "seed": 3},
}


def _with(path: str, value):
    body = copy.deepcopy(BASE)
    node = body
    keys = path.split(".")
    for k in keys[:-1]:
        node = node[int(k)] if k.isdigit() else node[k]
    last = keys[-1]
    if value is KeyError:
        del node[last]
    elif last.isdigit():
        node[int(last)] = value
    else:
        node[last] = value
    return body


@pytest.mark.parametrize("target", [0, 1, -0.5, 1.5, 0.0, 1.0, "high", None, True])
def test_target_outside_zero_one(client, target):
    body = problem(client.post(URL, json=_with("yield.target", target)), 422)
    assert "yield.target" in body["errors"]


@pytest.mark.parametrize("path, value, field", [
    ("yield.target", KeyError, "yield.target"),
    ("parts.resistors.grades.0", {"cost": 1}, "parts.resistors.grades[0].tolerance"),
    ("parts.resistors.grades.0", {"tolerance": None, "cost": 1}, "parts.resistors.grades[0].tolerance"),
    ("parts.capacitors.grades.1", {"tolerance": 0, "cost": 1}, "parts.capacitors.grades[1].tolerance"),
    ("parts.resistors.grades.0", {"tolerance": 0.6, "cost": 1}, "parts.resistors.grades[0].tolerance"),
    ("parts.resistors.grades.0", {"tolerance": 0.01, "cost": 0}, "parts.resistors.grades[0].cost"),
    ("parts.resistors.grades.0", {"tolerance": 0.01, "cost": -2}, "parts.resistors.grades[0].cost"),
    ("parts.resistors.grades.0", {"tolerance": 0.01}, "parts.resistors.grades[0].cost"),
    ("parts.capacitors.grades.0", {"tolerance": 0.05, "cost": 1, "grade": "A"}, "parts.capacitors.grades[0].grade"),
    ("parts.resistors.grades", [], "parts.resistors.grades"),
    ("parts.resistors.grades", [{"tolerance": 0.01, "cost": 1}, {"tolerance": 0.01, "cost": 2}],
     "parts.resistors.grades"),
    ("parts.resistors.tolerance", 0.01, "parts.resistors.tolerance"),
    ("yield.trials", 0, "yield.trials"),
    ("yield.trials", 2.5, "yield.trials"),
    ("yield.seed", -1, "yield.seed"),
    ("yield.distribution", "cauchy", "yield.distribution"),
    ("yield.temperature", {"min_c": 80, "max_c": 20}, "yield.temperature.max_c"),
    ("yield.colour", "red", "yield.colour"),
])
def test_bad_fields(client, path, value, field):
    body = problem(client.post(URL, json=_with(path, value)), 422)
    assert field in body["errors"], body["errors"]


def test_stock_cost_at_or_below_zero(client):
    stock = [{"kind": "capacitor", "value": "10n", "tolerance": 0.05, "cost": 0},
             {"kind": "capacitor", "value": "10n", "tolerance": 0.01, "cost": -1}]
    body = problem(client.post(URL, json=_with("parts", {"stock": stock})), 422)
    assert "parts.stock[0].cost" in body["errors"] and "parts.stock[1].cost" in body["errors"]


def test_yield_on_a_design_by_order(client):
    body = {k: v for k, v in BASE.items() if k not in ("passband_hz", "stopband_hz", "stopband_attenuation_db")}
    body.update(order=4, cutoff_hz="1kHz")
    p = problem(client.post(URL, json=body), 422)
    assert "yield" in p["errors"]


def test_a_target_the_trials_cannot_show(client):
    # source: E. B. Wilson, JASA 22 (1927): with all n boards passing the interval's lower end is n/(n + z^2);
    # 0.999 needs n >= 1.96^2 * 999 = 3,838 boards
    p = problem(client.post(URL, json=_with("yield.target", 0.999)), 422)
    assert "yield.trials" in p["errors"] and "3838" in p["detail"]


def test_trials_and_work_within_the_limits():
    c = create_app({"TESTING": True, "max_trials": 500}).test_client()
    p = problem(c.post(URL, json=BASE), 422)
    assert "yield.trials" in p["errors"] and p["setting"] == "ROLLOFF_MAX_TRIALS"
    c = create_app({"TESTING": True, "max_work": 4_000_000}).test_client()
    p = problem(c.post(URL, json=BASE), 422)
    assert "yield.trials" in p["errors"] and p["setting"] == "ROLLOFF_MAX_WORK" and "at most" in p["detail"]


def test_compare_quick_yield_needs_parts(client):
    body = {"response": "lowpass", "passband_hz": "1kHz", "stopband_hz": "3kHz", "passband_ripple_db": 0.5,
            "stopband_attenuation_db": 40, "yield": {"trials": 500}}
    p = problem(client.post("/v1/approximations/compare", json=body), 422)
    assert "yield" in p["errors"]
    body.pop("yield")
    body["parts"] = {"resistors": {"tolerance": 0.01, "grades": [{"tolerance": 0.01, "cost": 1}]}}
    p = problem(client.post("/v1/approximations/compare", json=body), 422)
    assert "parts.resistors.tolerance" in p["errors"]


def test_refused_before_any_design_or_confirmation(monkeypatch):
    # the cost model answers first: no design is made and no board is drawn for a request it refuses
    from service.workflows import yielding

    def forbidden(*args, **kwargs):
        raise AssertionError("work started before the cost check")

    monkeypatch.setattr(yielding, "design", forbidden)
    monkeypatch.setattr(yielding, "verified_yield", forbidden)
    for config in ({"max_trials": 500}, {"max_work": 4_000_000}):
        c = create_app(dict(TESTING=True, **config)).test_client()
        p = problem(c.post(URL, json=BASE), 422)
        assert "yield.trials" in p["errors"]
    c = create_app({"TESTING": True}).test_client()
    p = problem(c.post(URL, json=_with("yield.target", 0.999)), 422)
    assert "yield.trials" in p["errors"]
    p = problem(c.post(URL, json=_with("yield.distribution", {"resistor": "cauchy"})), 422)
    assert any(k.startswith("yield.distribution") for k in p["errors"]), p["errors"]
