"""GET /v1/catalog lists what the service dispatches through, and nothing else."""

from __future__ import annotations

from service.approximation import Family, ResponseType, SectionKind
from service.components import SERIES
from service.realization import TOPOLOGIES
from tests.conftest import problem


def test_catalog_lists_the_registries(client):
    body = client.get("/v1/catalog").get_json()
    assert body["responses"] == [r.value for r in ResponseType]
    assert [f["family"] for f in body["families"]] == [f.value for f in Family]
    assert set(body["section_kinds"]) == {k.value for k in SectionKind}
    assert [t["name"] for t in body["topologies"]] == list(TOPOLOGIES)
    assert [s["name"] for s in body["series"]] == list(SERIES)
    for t in body["topologies"]:
        assert t["kinds"] and t["strategies"] and t["reference"]
    assert body["limits"]["max_order"]["setting"] == "ROLLOFF_MAX_ORDER"
    for endpoint in ("POST /v1/designs", "POST /v1/tolerance", "POST /v1/responses", "GET /v1/values/nearest"):
        assert endpoint in body["endpoints"]


def test_every_listed_topology_realizes_a_kind_it_claims(client):
    body = client.get("/v1/catalog").get_json()
    for t in body["topologies"]:
        if "lowpass" in t["kinds"] or "highpass" in t["kinds"]:
            response = "lowpass" if "lowpass" in t["kinds"] else "highpass"
            req = {"response": response, "family": "butterworth", "order": t["order"], "cutoff_hz": 1000,
                   "gain": 2.0 if "noninverting" in t["name"] else 1.0}
        else:  # notch-only: a first-order bandstop prototype is one notch section
            req = {"response": "bandstop", "family": "butterworth", "order": 1, "cutoff_hz": [55, 65]}
        r = client.post("/v1/designs", json=dict(req, topology=t["name"]))
        assert r.status_code == 200, (t["name"], r.get_json())
        assert {st["topology"] for st in r.get_json()["stages"]} == {t["name"]}


def test_configured_limits_are_listed():
    from service import create_app

    body = create_app({"max_trials": 123}).test_client().get("/v1/catalog").get_json()
    assert body["limits"]["max_trials"]["value"] == 123


def test_unknown_query_parameter(client):
    assert "verbose" in problem(client.get("/v1/catalog?verbose=1"), 422)["errors"]


def test_catalog_states_the_automatic_topology_rule(client):
    from service.realization.topologies import describe_auto

    auto = client.get("/v1/catalog").get_json()["auto_topology"]
    assert auto == describe_auto()
    assert "fewest op-amps" in auto["rule"]
    assert all(name in TOPOLOGIES for names in auto["candidates"].values() for name in names)
