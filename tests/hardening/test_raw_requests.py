"""Requests only a live gunicorn sees (tests/hardening/corpus.py: raw_cases), over real sockets.

Malformed request lines, header limits, chunked bodies and bodies shorter
than announced: each is answered by a problem+json with the right status, no
traceback or path, and the server keeps answering. The body deadline is set
to 2 s here so that the late cases end quickly.
"""

from __future__ import annotations

import pytest

from tests.hardening import corpus
from tests.hardening.raw import judge_raw, send_raw
from tests.hardening.server import Gunicorn, request

BODY_TIMEOUT_S = 2.0
CASES = corpus.raw_cases(BODY_TIMEOUT_S)

pytestmark = pytest.mark.filterwarnings("ignore::ResourceWarning")


@pytest.fixture(scope="module")
def server():
    with Gunicorn(workers=2, env={"ROLLOFF_BODY_TIMEOUT_S": str(int(BODY_TIMEOUT_S))}) as g:
        yield g


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_raw_request_gets_a_problem(server, case):
    answer, seconds = send_raw(server.port, case)
    verdict = judge_raw(case, answer, seconds)
    assert verdict is None, verdict
    assert request(server.port, "GET", "/healthz", timeout=5)[0] == 200
