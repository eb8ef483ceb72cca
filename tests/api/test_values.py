"""GET/POST /v1/values/nearest."""

from __future__ import annotations

import csv
import io

import pytest

from tests.conftest import problem

URL = "/v1/values/nearest"


def test_get_names_4k7_nearest_with_neighbours(client):
    # source: IEC 60063:2015, Table 1 (E24: ... 4.3, 4.7, 5.1 ...)
    body = client.get(URL + "?value=4.87k&series=E24").get_json()
    assert (body["nearest"], body["below"], body["above"]) == (4700.0, 4700.0, 5100.0)
    assert body["formatted"] == {"nearest": "4.7k", "below": "4.7k", "above": "5.1k"}
    assert body["service_version"]


def test_text_format_is_the_number_alone(client):
    r = client.get(URL + "?value=4.87k&series=E24&format=text")
    assert r.mimetype == "text/plain" and r.get_data(as_text=True) == "4700"


def test_e192_listed_exception(client):
    # source: IEC 60063:2015, Table 2 (E192 lists 9.20)
    body = client.get(URL + "?value=9.2&series=E192").get_json()
    assert body["nearest"] == 9.2 and body["nearest_error"] == 0.0
    assert client.get(URL + "?value=9.2&series=E192&format=text").get_data(as_text=True) == "9.2"


def test_csv_table(client):
    r = client.get(URL + "?value=10n&series=E12&format=csv")
    assert r.mimetype == "text/csv"
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    assert len(rows) == 1 and float(rows[0]["nearest"]) == 1e-8 and rows[0]["series"] == "E12"


@pytest.mark.parametrize("value", ["4k7", "4.7k", "4700", "4.7kΩ", "4700 ohm", 4700, 4700.0])
def test_post_accepts_each_spelling(client, value):
    body = client.post(URL, json={"value": value, "series": "E12"}).get_json()
    assert body["nearest"] == 4700.0


def test_default_series_is_e24(client):
    assert client.post(URL, json={"value": "5k"}).get_json()["nearest"] == 5100.0


@pytest.mark.parametrize("query, field", [
    ("value=-1", "value"), ("value=0", "value"), ("value=abc", "value"), ("value=10K", "value"),
    ("value=1k&series=E13", "series"), ("value=1k&format=xml", "format"), ("series=E12", "value"),
    ("value=4.7kHz", "value"), ("value=1e400", "value"),
])
def test_bad_queries_are_422_naming_the_field(client, query, field):
    body = problem(client.get(f"{URL}?{query}"), 422)
    assert field in body["errors"], body


def test_acceptance_bad_inputs(client):
    problem(client.post(URL, data="{bad", content_type="application/json"), 400)
    assert "nonsense" in problem(client.post(URL, json={"value": 1, "nonsense": 1}), 422)["errors"]
    problem(client.post(URL, data=b"[" + b"1," * (1024 * 1024) + b"1]", content_type="application/json"), 413)
    assert "value" in problem(client.get(URL + "?value=-1"), 422)["errors"]
