"""The bad-input corpus (tests/hardening/corpus.py) through the Flask test client.

Every hostile request gets a 4xx application/problem+json naming the field,
with no traceback or server path in the body, and the service answers a good
request normally after each batch. Cases in ``corpus.PENDING`` (fixes owned
elsewhere) are run and their outcome reported in the skip reason until
``corpus.ENFORCE_PENDING`` is switched on.
"""

from __future__ import annotations

import json

import pytest

from service import create_app
from tests.hardening import corpus

_APP = create_app({"TESTING": True})
_RULES = {r.rule for r in _APP.url_map.iter_rules()}


def _design_document():
    if "/v1/designs" not in _RULES:
        return None
    r = _APP.test_client().post("/v1/designs", json=corpus.GOOD_DESIGN_REQUEST)
    assert r.status_code == 200, r.get_data(as_text=True)
    return r.get_json()


_DOC = _design_document()
# the evaluate/response/tolerance cases need a document; placeholders keep their ids when it is absent
_CASES = corpus.cases(_DOC if _DOC is not None else {"stages": [{"components": [{"ref": "R1", "value": 1.0}], "section": {}}]})


def _param(case: corpus.Case):
    marks = []
    if case.route and case.route not in _RULES:
        marks.append(pytest.mark.skip(reason=f"{case.route} is not served yet"))
    if case.known:
        marks.append(pytest.mark.xfail(strict=True, reason=case.known))
    return pytest.param(case, id=case.name, marks=marks)


def test_corpus_is_large_enough():
    assert len(_CASES) >= 300
    assert len({c.name for c in _CASES}) == len(_CASES)
    assert set(corpus.PENDING) <= {c.name for c in _CASES}


@pytest.fixture(scope="module")
def client():
    return _APP.test_client()


def _send(client, case: corpus.Case):
    return client.open(case.url, method=case.method, data=case.encoded(), headers=case.request_headers())


@pytest.mark.parametrize("case", [_param(c) for c in _CASES])
def test_hostile_request_gets_a_problem_naming_the_field(client, case):
    r = _send(client, case)
    verdict = corpus.judge(case, r.status_code, r.content_type or "", r.get_data())
    if case.name in corpus.PENDING and not corpus.ENFORCE_PENDING:
        pytest.skip(f"fix owned elsewhere ({corpus.PENDING[case.name]}); today: "
                    + ("PASSES" if verdict is None else verdict[:200]))
    assert verdict is None, verdict


@pytest.mark.parametrize("batch", range(0, len(_CASES), 15))
def test_service_answers_normally_after_each_batch(client, batch):
    for case in _CASES[batch:batch + 15]:
        if case.route is None or case.route in _RULES:
            _send(client, case)
    for method, path, body in corpus.GOOD_REQUESTS:
        r = client.open(path, method=method, data=None if body is None else json.dumps(body),
                        content_type="application/json" if body is not None else None)
        assert r.status_code == 200, (path, r.get_data(as_text=True)[:300])
