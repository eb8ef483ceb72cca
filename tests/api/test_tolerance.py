"""/v1/tolerance through the test client."""

from __future__ import annotations

import copy
import csv
import io

import pytest

from service.api.views.designs import EVALUATE_EXAMPLE
from service.api.views.tolerance import EXAMPLE
from tests.conftest import problem

URL = "/v1/tolerance"


def test_example_has_full_yield_and_wilson_interval(client):
    body = client.post(URL, json=EXAMPLE).get_json()
    y = body["yield"]
    assert y["trials"] == 2000 and y["fraction"] == 1.0
    # source: E. B. Wilson, JASA 22 (1927) 209-212: for n of n, lower bound n / (n + z^2), z = 1.959964
    assert y["ci95_low"] == pytest.approx(2000 / (2000 + 1.959964 ** 2), rel=1e-6)
    assert set(body["magnitude_db_percentiles"]) == {"min", "p0.135", "p2.5", "p50", "p97.5", "p99.865", "max"}
    assert len(body["trials"]) == 2 and set(body["trials"][0]["values"]) == {"C1", "C2", "R1", "R2"}
    assert {row["ref"] for row in body["sensitivity"]} == {"C1", "C2", "R1", "R2"}


def test_same_seed_same_numbers(client):
    a = client.post(URL, json=dict(EXAMPLE, trials=300)).get_json()
    b = client.post(URL, json=dict(EXAMPLE, trials=300)).get_json()
    c = client.post(URL, json=dict(EXAMPLE, trials=300, seed=8)).get_json()
    assert a["metrics"] == b["metrics"]
    assert a["metrics"]["f3db_hz"]["mean"] != c["metrics"]["f3db_hz"]["mean"]


def test_zero_tolerances_give_zero_spread(client):
    design = copy.deepcopy(EVALUATE_EXAMPLE)
    for comp in design["stages"][0]["components"]:
        comp["tolerance"] = 0.0
    body = client.post(URL, json={"design": design, "trials": 50}).get_json()
    assert body["metrics"]["f3db_hz"]["std"] == pytest.approx(0.0, abs=1e-9)


def test_csv_and_svg(client):
    r = client.post(URL, json=dict(EXAMPLE, trials=200, format="csv"))
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    assert r.mimetype == "text/csv" and "magnitude_db_p2.5" in rows[0]
    r = client.post(URL, json=dict(EXAMPLE, trials=200, format="svg"))
    assert r.mimetype == "image/svg+xml" and b"<svg" in r.data[:500]


@pytest.mark.parametrize("change, field", [
    ({"trials": 0}, "trials"), ({"trials": 1.5}, "trials"), ({"distribution": "cauchy"}, "distribution"),
    ({"distribution": {"inductor": "uniform"}}, "distribution"), ({"temperature": {"min_c": 50, "max_c": 0}},
                                                                  "temperature"),
    ({"include_trials": 5000}, "include_trials"), ({"seed": -1}, "seed"),
])
def test_bad_requests_name_the_field(client, change, field):
    errors = problem(client.post(URL, json=dict(EXAMPLE, **change)), 422)["errors"]
    assert any(k.startswith(field) for k in errors), errors


def test_missing_part_names_it(client):
    design = copy.deepcopy(EVALUATE_EXAMPLE)
    design["stages"][0]["components"].pop()
    errors = problem(client.post(URL, json={"design": design}), 422)["errors"]
    assert any(k.startswith("design.stages[0].components") for k in errors), errors


def test_work_budget_names_the_setting():
    from service import create_app

    c = create_app({"max_work": 10_000}).test_client()
    body = problem(c.post(URL, json=dict(EXAMPLE, trials=1000)), 422)
    assert body["setting"] == "ROLLOFF_MAX_WORK"
    body = problem(create_app({"max_trials": 10}).test_client().post(URL, json=dict(EXAMPLE, trials=11)), 422)
    assert body["setting"] == "ROLLOFF_MAX_TRIALS"


def test_work_budget_weighs_multi_opamp_stages_and_says_what_fits():
    import re

    from service import create_app
    from service.workflows.costs import CircuitShape

    notch = {"response": "bandstop", "family": "butterworth", "order": 1, "cutoff_hz": [55, 65],
             "topology": "state_variable"}
    assert CircuitShape((4,)).point_weight() == 16        # one stage of four op-amps weighs 4^2 per point
    c = create_app({"max_work": 6_000_000}).test_client()
    doc = c.post("/v1/designs", json=notch).get_json()
    body = problem(c.post(URL, json={"design": doc, "trials": 1000, "frequencies": [10, 55, 60, 65, 100]}), 422)
    fits = int(re.search(r"at most ([\d,]+) trials", body["detail"]).group(1).replace(",", ""))
    assert 0 < fits < 1000
    assert c.post(URL, json={"design": doc, "trials": fits, "frequencies": [10, 55, 60, 65, 100]}).status_code == 200
    problem(c.post(URL, json={"design": doc, "trials": fits + 1, "frequencies": [10, 55, 60, 65, 100]}), 422)