"""Mutated design documents never get a 500: hypothesis edits a returned document the ways a hand or a
spreadsheet would (parts deleted or repeated, sections a topology cannot realize, values at and beyond the
limits, wrong types, unknown keys) and sends it to every endpoint that reads documents."""

from __future__ import annotations

import copy

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service import create_app

BASE_REQUESTS = [
    {"response": "lowpass", "family": "chebyshev1", "passband_hz": 1000, "stopband_hz": 2500,
     "passband_ripple_db": 0.5, "stopband_attenuation_db": 40, "opamp": {"gbw_hz": 10e6}},
    {"response": "bandstop", "family": "elliptic", "passband_hz": [40, 75], "stopband_hz": [48, 62],
     "passband_ripple_db": 1.0, "stopband_attenuation_db": 30},
]

_APP = create_app({"TESTING": True, "log_level": "critical", "request_deadline_s": 300})
_CLIENT = _APP.test_client()
DOCS = [_CLIENT.post("/v1/designs", json=body).get_json() for body in BASE_REQUESTS]

ODD_VALUES = [0, -1, 1e-30, 1e30, 1e300, "1e3k", "", None, True, [], {}, "4k7", "10n", 3.3e-9,
              10**400, "NaN", "Infinity", "１０k"]
SECTION_KINDS = ["lowpass", "highpass", "bandpass", "notch", "lowpass_notch", "highpass_notch", "allpass", "x"]
TOPOLOGIES = ["sallen_key", "multiple_feedback", "state_variable", "tow_thomas", "twin_t_notch",
              "delyiannis_friend_notch", "rc_first_order", "nonexistent"]


def _mutation():
    stage = st.integers(min_value=0, max_value=20)
    part = st.integers(min_value=0, max_value=20)
    value = st.sampled_from(ODD_VALUES)
    return st.one_of(
        st.tuples(st.just("delete_component"), stage, part),
        st.tuples(st.just("repeat_ref"), stage, part),
        st.tuples(st.just("component_value"), stage, part, value),
        st.tuples(st.just("component_kind"), stage, part, st.sampled_from(["resistor", "capacitor", "inductor", 7])),
        st.tuples(st.just("section_field"), stage, st.sampled_from(["order", "q", "f0_hz", "fz_hz", "gain", "kind"]),
                  st.one_of(value, st.sampled_from(SECTION_KINDS))),
        st.tuples(st.just("topology"), stage, st.sampled_from(TOPOLOGIES)),
        st.tuples(st.just("strategy"), stage, st.sampled_from(["unity_gain", "given_gain", "x", None, 3])),
        st.tuples(st.just("opamp_field"), stage, st.sampled_from(["gbw_hz", "rout_ohm", "a0_db", "vos_v", "ref"]),
                  value),
        st.tuples(st.just("unknown_key"), st.sampled_from(["", "settings", "requirement", "stage"]),
                  st.text(min_size=1, max_size=8)),
        st.tuples(st.just("requirement_field"),
                  st.sampled_from(["passband_hz", "stopband_hz", "passband_ripple_db", "response", "family",
                                   "group_delay", "passband_upper_hz"]),
                  st.one_of(value, st.just([1000, 10]), st.just({"frequency_hz": 1, "max_deviation_pct": 200}))),
        st.tuples(st.just("settings_field"),
                  st.sampled_from(["gbw_error", "ranges", "series", "output_amplitude_v", "section_order"]),
                  st.one_of(value, st.just({"resistor": [10, 1]}), st.just(5))),
        st.tuples(st.just("drop_stage"), stage),
        st.tuples(st.just("empty_stages")),
    )


def _apply(doc: dict, m: tuple) -> dict:
    d = copy.deepcopy(doc)
    stages = d["stages"]
    kind = m[0]

    def stage_at(i):
        return stages[i % len(stages)] if stages else None

    if kind == "delete_component" and stages:
        comps = stage_at(m[1])["components"]
        if comps:
            comps.pop(m[2] % len(comps))
    elif kind == "repeat_ref" and stages:
        comps = stage_at(m[1])["components"]
        if len(comps) > 1:
            comps[m[2] % len(comps)]["ref"] = comps[(m[2] + 1) % len(comps)]["ref"]
    elif kind == "component_value" and stages:
        comps = stage_at(m[1])["components"]
        if comps:
            comps[m[2] % len(comps)]["value"] = m[3]
    elif kind == "component_kind" and stages:
        comps = stage_at(m[1])["components"]
        if comps:
            comps[m[2] % len(comps)]["kind"] = m[3]
    elif kind == "section_field" and stages:
        stage_at(m[1])["section"][m[2]] = m[3]
    elif kind == "topology" and stages:
        stage_at(m[1])["topology"] = m[2]
    elif kind == "strategy" and stages:
        stage_at(m[1])["strategy"] = m[2]
    elif kind == "opamp_field" and stages:
        ops = stage_at(m[1])["opamps"]
        if ops:
            ops[0][m[2]] = m[3]
    elif kind == "unknown_key":
        target = {"": d, "settings": d.get("settings") or {}, "requirement": d.get("requirement") or {},
                  "stage": stages[0] if stages else d}[m[1]]
        target["x_" + m[2]] = 1
    elif kind == "requirement_field" and d.get("requirement"):
        d["requirement"][m[1]] = m[2]
    elif kind == "settings_field" and d.get("settings") is not None:
        d["settings"][m[1]] = m[2]
    elif kind == "drop_stage" and stages:
        stages.pop(m[1] % len(stages))
    elif kind == "empty_stages":
        d["stages"] = []
    return d


def _check(response, where: str):
    assert response.status_code < 500, (where, response.status_code, response.get_data(as_text=True)[:400])
    if response.status_code >= 400:
        assert response.content_type == "application/problem+json", where
        body = response.get_data(as_text=True)
        assert "Traceback" not in body and "/service/" not in body, where


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow], derandomize=True)
@given(base=st.integers(min_value=0, max_value=len(BASE_REQUESTS) - 1),
       mutations=st.lists(_mutation(), min_size=1, max_size=3))
def test_no_mutated_document_gets_a_500(base, mutations):
    doc = DOCS[base]
    for m in mutations:
        doc = _apply(doc, m)
    _check(_CLIENT.post("/v1/designs/evaluate", json=doc), "evaluate")
    _check(_CLIENT.post("/v1/responses", json={"design": doc}), "responses")
    _check(_CLIENT.post("/v1/tolerance", json={"design": doc, "trials": 4, "seed": 1}), "tolerance")
    _check(_CLIENT.post("/v1/designs/evaluate?format=svg", json=doc), "schematic")


@pytest.mark.parametrize("base", range(len(BASE_REQUESTS)))
def test_the_unmutated_documents_round_trip(base):
    doc = DOCS[base]
    again = _CLIENT.post("/v1/designs/evaluate", json=doc).get_json()
    assert again["verdict"] == doc["verdict"]
