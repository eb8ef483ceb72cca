"""Representations: path suffix, format and Accept; 406; field= as text and CSV; CSV shape; bad input."""

from __future__ import annotations

import csv
import io

import pytest

from tests.conftest import problem

APPROX = ("/v1/approximations?response=lowpass&family=elliptic&passband_hz=10k&stopband_hz=25.6k"
          "&passband_ripple_db=0.1&stopband_attenuation_db=80")
NEAREST = "/v1/values/nearest?value=4.87k&series=E24"
DESIGN_QUERY = ("/v1/designs?response=lowpass&family=chebyshev1&passband_hz=1k&stopband_hz=3k&passband_ripple_db=0.5"
                "&stopband_attenuation_db=40&parts.resistors.series=E96&parts.capacitors.tolerance=0.05")
DESIGN_BODY = {"response": "lowpass", "family": "chebyshev1", "passband_hz": "1k", "stopband_hz": "3k",
               "passband_ripple_db": 0.5, "stopband_attenuation_db": 40,
               "parts": {"resistors": {"series": "E96"}, "capacitors": {"tolerance": 0.05}}}
BROWSER = "text/html,application/xhtml+xml,application/xml;q=0.9,image/avif,image/webp,*/*;q=0.8"


def rows_of(response) -> list[list[str]]:
    """A CSV reply: RFC 4180 line ends, one header row, every row as wide as the header."""
    text = response.get_data(as_text=True)
    assert text.endswith("\r\n") and "\n" not in text.replace("\r\n", "")
    rows = list(csv.reader(io.StringIO(text)))
    assert len(rows) >= 2 and all(len(r) == len(rows[0]) for r in rows)
    return rows


# ------------------------------------------------------------------------------------ choosing a representation

def test_suffix_format_and_accept_choose_the_same_representation(client):
    by_suffix = client.get(NEAREST.replace("nearest?", "nearest.csv?"))
    by_format = client.get(NEAREST + "&format=csv")
    by_accept = client.get(NEAREST, headers={"Accept": "text/csv"})
    for r in (by_suffix, by_format, by_accept):
        assert r.status_code == 200 and r.mimetype == "text/csv"
    assert by_suffix.get_data() == by_format.get_data() == by_accept.get_data()
    assert "Accept" in by_accept.headers["Vary"] and "Vary" not in by_suffix.headers


@pytest.mark.parametrize("accept", [BROWSER, "*/*", "application/json", "application/*", None])
def test_json_is_the_default(client, accept):
    r = client.get(NEAREST, headers={"Accept": accept} if accept else {})
    assert r.status_code == 200 and r.mimetype == "application/json"


def test_accept_ranks_the_representations(client):
    r = client.get(APPROX, headers={"Accept": "text/csv;q=0.9, application/json;q=0.5"})
    assert r.mimetype == "text/csv"
    r = client.get("/v1/responses?response=lowpass&family=butterworth&order=2&cutoff_hz=1k",
                   headers={"Accept": "image/svg+xml"})
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"


def test_format_wins_over_accept(client):
    r = client.get(NEAREST + "&format=csv", headers={"Accept": "application/json"})
    assert r.mimetype == "text/csv"


@pytest.mark.parametrize("path, accept", [
    (NEAREST, "image/png"), ("/v1/catalog", "text/csv"), ("/healthz", "text/html"),
    (APPROX, "image/svg+xml"), (NEAREST, "application/json;q=0"),
])
def test_accept_matching_nothing_is_406(client, path, accept):
    body = problem(client.get(path, headers={"Accept": accept}), 406)
    assert "application/json" in body["available"] and accept.split(";")[0] in body["detail"]


def test_406_comes_before_any_work(client):
    # the body is not even JSON: the representation is refused first
    r = client.post("/v1/designs", data="not json", content_type="application/json", headers={"Accept": "image/png"})
    problem(r, 406)


def test_format_contradicting_the_suffix_or_the_body_is_422(client):
    assert "format" in problem(client.get(NEAREST.replace("nearest?", "nearest.csv?") + "&format=text"), 422)["errors"]
    r = client.post("/v1/designs?format=csv", json=dict(DESIGN_BODY, format="spice"))
    assert "format" in problem(r, 422)["errors"]


def test_a_representation_an_operation_does_not_have_is_404_or_422(client):
    assert client.get("/v1/catalog.csv").status_code == 404
    assert "format" in problem(client.get(NEAREST + "&format=svg"), 422)["errors"]


# ------------------------------------------------------------------------------------ field=

def test_field_answers_one_value_without_trailing_newline(client):
    # LibreOffice's =VALUE(WEBSERVICE(url)) reads "6" and fails on "6\n" (STACK-NOTES, measured)
    r = client.get(APPROX + "&format=text&field=order")
    assert r.status_code == 200 and r.mimetype == "text/plain"
    json_order = client.get(APPROX).get_json()["order"]
    assert r.get_data(as_text=True) == str(json_order)
    assert client.get(APPROX + "&field=order").get_data(as_text=True) == str(json_order)  # field implies text


def test_field_text_of_booleans_nulls_and_numbers(client):
    assert client.get(DESIGN_QUERY + "&field=summary.meets").get_data(as_text=True) == "true"
    by_order = "/v1/designs?response=lowpass&family=butterworth&order=2&cutoff_hz=1k&field=summary.meets"
    assert client.get(by_order).get_data(as_text=True) == ""           # null: an empty cell
    assert client.get(NEAREST + "&field=nearest").get_data(as_text=True) == "4700"
    assert client.get(NEAREST + "&field=series").get_data(as_text=True) == "E24"


def test_field_counts_stages_from_one_and_names_parts_by_ref(client):
    doc = client.get(DESIGN_QUERY).get_json()
    second = doc["stages"][1]
    part = second["components"][-1]
    text = client.get(DESIGN_QUERY + f"&field=stages.2.components.{part['ref']}.value").get_data(as_text=True)
    assert float(text) == part["value"]
    assert client.get(DESIGN_QUERY + "&field=stages.2.number").get_data(as_text=True) == "2"


def test_field_as_csv_is_a_table(client):
    rows = rows_of(client.get(DESIGN_QUERY + "&format=csv&field=stages.1.components"))
    doc = client.get(DESIGN_QUERY).get_json()
    assert rows[0][:3] == ["ref", "role", "kind"]
    assert [r[0] for r in rows[1:]] == [c["ref"] for c in doc["stages"][0]["components"]]
    r = client.get(DESIGN_QUERY + "&field=bom_lines", headers={"Accept": "text/csv"})
    assert r.mimetype == "text/csv" and len(rows_of(r)) == len(doc["bom_lines"]) + 1


@pytest.mark.parametrize("query, reason", [
    ("&field=nope", "top-level fields are"),
    ("&field=stages.9.number", "entries, numbered from 1"),
    ("&field=stages.0.number", "numbered from 1"),
    ("&field=stages.1.components.R99.value", "by ref"),
    ("&field=summary", "is an object"),
    ("&field=summary..meets", "dotted path"),
    ("&format=json&field=order", "text"),
    ("&format=spice&field=order", "text"),
    ("&format=text", "field="),
])
def test_bad_field_is_422_naming_it(client, query, reason):
    body = problem(client.get(DESIGN_QUERY + query), 422)
    assert "field" in body["errors"] and reason in body["errors"]["field"][0], body


def test_unknown_field_lists_the_top_level_fields_before_computing(client):
    body = problem(client.get(APPROX + "&field=ordr"), 422)
    message = body["errors"]["field"][0]
    for name in ("order", "sections", "poles", "edges"):
        assert name in message


# ------------------------------------------------------------------------------------ query parameters

@pytest.mark.parametrize("query, name", [
    ("/v1/values/nearest?value=1k&value=2k", "value"),
    ("/v1/approximations?response=lowpass&family=butterworth&order=2&order=3&cutoff_hz=1k", "order"),
    (DESIGN_QUERY + "&parts.resistors.series=E24", "parts.resistors.series"),
    (APPROX + "&field=order&field=degree", "field"),
])
def test_repeated_scalar_parameter_is_422_naming_it(client, query, name):
    body = problem(client.get(query), 422)
    assert body["errors"][name] == ["given 2 times; this parameter takes one value"]


def test_pairs_as_repeated_parameters_or_commas(client):
    base = "/v1/approximations?response=bandpass&family=butterworth&order=3"
    repeated = client.get(base + "&cutoff_hz=35k&cutoff_hz=45k").get_json()
    commas = client.get(base + "&cutoff_hz=35k,45k").get_json()
    assert repeated["cutoff_hz"] == commas["cutoff_hz"] == [35000.0, 45000.0]
    assert "cutoff_hz" in problem(client.get(base + "&cutoff_hz=35k"), 422)["errors"]


def test_get_and_post_designs_agree(client):
    by_get = client.get(DESIGN_QUERY).get_json()
    by_post = client.post("/v1/designs", json=DESIGN_BODY).get_json()
    assert by_get["bom_lines"] == by_post["bom_lines"] and by_get["summary"] == by_post["summary"]


def test_get_design_errors_name_the_query_parameter(client):
    body = problem(client.get(DESIGN_QUERY.replace("series=E96", "series=E7")), 422)
    assert "parts.resistors.series" in body["errors"]
    body = problem(client.get(DESIGN_QUERY + "&opamp.slew_v_per_us=5"), 422)
    assert "opamp.gbw_hz" in body["errors"]


def test_get_responses_by_requirement_verify_it(client):
    r = client.get("/v1/responses?response=lowpass&family=chebyshev1&passband_hz=1k&stopband_hz=3k"
                   "&passband_ripple_db=0.5&stopband_attenuation_db=40")
    body = r.get_json()
    assert body["mask_result"]["meets"] is True
    assert {s["band"] for s in body["mask_result"]["segments"]} == {"passband", "stopband"}


def test_get_compare(client):
    body = client.get("/v1/approximations/compare?response=lowpass&passband_hz=1k&stopband_hz=3k"
                      "&passband_ripple_db=0.5&stopband_attenuation_db=40&field=recommended")
    assert body.status_code == 200 and body.get_data(as_text=True) in {"butterworth", "chebyshev1", "chebyshev2",
                                                                     "elliptic", "bessel", "legendre"}


# ------------------------------------------------------------------------------------ CSV

@pytest.mark.parametrize("path", [
    NEAREST + "&format=csv", APPROX + "&format=csv", DESIGN_QUERY + "&format=csv",
    "/v1/responses?response=lowpass&family=butterworth&order=2&cutoff_hz=1k&format=csv",
    "/v1/approximations/compare?response=lowpass&passband_hz=1k&stopband_hz=3k&passband_ripple_db=0.5"
    "&stopband_attenuation_db=40&format=csv",
])
def test_every_csv_is_a_header_and_rows_offered_as_a_download(client, path):
    r = client.get(path)
    assert r.status_code == 200 and r.mimetype == "text/csv"
    assert r.headers["Content-Disposition"].startswith('attachment; filename="')
    rows_of(r)


def test_csv_booleans_are_lower_case(client):
    rows = rows_of(client.get("/v1/approximations/compare?response=lowpass&passband_hz=1k&stopband_hz=3k"
                              "&passband_ripple_db=0.5&stopband_attenuation_db=40&format=csv"))
    meets = rows[0].index("meets")
    assert {r[meets] for r in rows[1:]} <= {"true", "false"}


def test_compare_csv_carries_the_json_figures(client):
    """The comparison's CSV rows hold the same figures as its JSON, rounded to the same 6 significant digits."""
    query = ("/v1/approximations/compare?response=lowpass&passband_hz=1k&stopband_hz=3k&passband_ripple_db=0.5"
             "&stopband_attenuation_db=40")
    families = client.get(query).get_json()["families"]
    rows = rows_of(client.get(query + "&format=csv"))
    header = rows[0]
    assert len(rows) - 1 == len(families)
    for row, fam in zip(rows[1:], families):
        for name in ("max_q", "group_delay_variation_s", "overshoot_pct", "settling_time_1pct_s", "margin_db"):
            got = row[header.index(name)]
            assert (got == "" and fam[name] is None) or float(got) == fam[name], (fam["family"], name, got)
            assert len(got.replace("-", "").replace(".", "").split("e")[0].lstrip("0")) <= 6, got


# ------------------------------------------------------------------------------------ the catalog of fields

GET_FORMS = {
    "GET /v1/values/nearest": NEAREST,
    "GET /v1/approximations": APPROX,
    "GET /v1/approximations/compare": "/v1/approximations/compare?response=lowpass&passband_hz=1k&stopband_hz=3k"
                                      "&passband_ripple_db=0.5&stopband_attenuation_db=40",
    "GET /v1/designs": DESIGN_QUERY,
    "GET /v1/responses": "/v1/responses?response=lowpass&family=chebyshev1&passband_hz=1k&stopband_hz=3k"
                         "&passband_ripple_db=0.5&stopband_attenuation_db=40&points=51",
    "GET /v1/catalog": "/v1/catalog?",
}


def test_every_top_level_field_of_the_catalog_is_selectable(client):
    from service.api.formats import number_text

    fields = client.get("/v1/catalog").get_json()["fields"]
    assert set(GET_FORMS) <= set(fields)
    for operation, url in GET_FORMS.items():
        reply = client.get(url).get_json()
        assert list(reply) == [f for f in fields[operation] if f in reply], operation   # the catalog is the reply's
        for name in fields[operation]:
            if name not in reply:
                continue
            value = reply[name]
            if isinstance(value, (dict, list)):
                if operation == "GET /v1/catalog":          # text only: an object or a list is a 422
                    assert "field" in problem(client.get(f"{url}&format=text&field={name}"), 422)["errors"]
                    continue
                r = client.get(f"{url}&format=csv&field={name}")
                assert r.status_code == 200 and r.mimetype == "text/csv", (operation, name)
                if value:
                    rows_of(r)
                continue
            text = client.get(f"{url}&format=text&field={name}").get_data(as_text=True)
            expected = "" if value is None else value if isinstance(value, str) else number_text(value)
            assert text == expected, (operation, name)
