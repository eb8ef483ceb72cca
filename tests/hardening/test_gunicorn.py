"""The service under a real gunicorn on loopback: drain on SIGTERM, a killed worker, metrics of all workers.

Each test starts its own gunicorn master on a free 127.0.0.1 port with the
project's configuration (service/gunicorn_conf.py) and stops it. Loops are
bounded in count; waits are bounded by generous timeouts (no wall-time
assertions).
"""

from __future__ import annotations

import json
import re
import signal
import threading
import time

import pytest

from tests.hardening.server import Gunicorn, request

pytestmark = pytest.mark.filterwarnings("ignore::ResourceWarning")

SLOW_APP = "tests.hardening.slow_wsgi:app"


def _wait_for(predicate, timeout: float = 30.0, step: float = 0.1):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        value = predicate()
        if value:
            return value
        time.sleep(step)
    return predicate()


def test_sigterm_drains_in_flight_request():
    server = Gunicorn(workers=2, app=SLOW_APP, env={"ROLLOFF_GRACEFUL_TIMEOUT_S": "20"}).start()
    result = {}

    def slow():
        try:
            result["reply"] = request(server.port, "GET", "/test/slow?s=2", timeout=30)
        except OSError as exc:
            result["error"] = exc

    try:
        t = threading.Thread(target=slow)
        t.start()
        time.sleep(0.5)  # the request is being handled (it sleeps 2 s)
        server.signal(signal.SIGTERM)
        t.join(timeout=40)
        assert "error" not in result, result
        status, headers, body = result["reply"]
        assert status == 200
        assert json.loads(body) == {"slept_s": 2.0}
        assert server.proc.wait(timeout=30) == 0
    finally:
        server.stop()


def test_killed_worker_is_replaced_and_at_most_its_request_is_lost():
    server = Gunicorn(workers=2, app=SLOW_APP).start()
    outcomes: list[str] = []
    lock = threading.Lock()
    kill_at = threading.Event()

    def client(n: int):
        for i in range(n):
            path = "/test/slow?s=0.1" if i % 2 else "/v1/values/nearest?value=4.87k&series=E24"
            try:
                status = request(server.port, "GET", path, timeout=30)[0]
                outcome = "ok" if status == 200 else f"status {status}"
            except OSError as exc:
                outcome = f"lost ({exc.__class__.__name__})"
            with lock:
                outcomes.append(outcome)
                if len(outcomes) == 20:
                    kill_at.set()

    try:
        before = server.worker_pids()
        assert len(before) == 2
        threads = [threading.Thread(target=client, args=(20,)) for _ in range(4)]
        for t in threads:
            t.start()
        assert kill_at.wait(timeout=60)
        victim = before[0]
        server_pid_alive = server.proc.poll() is None
        import os

        os.kill(victim, signal.SIGKILL)
        for t in threads:
            t.join(timeout=120)
        assert server_pid_alive and server.proc.poll() is None
        lost = [o for o in outcomes if o != "ok"]
        assert len(outcomes) == 80
        # a worker holds at most one request per client thread (4 here): only those can be lost
        assert len(lost) <= 4, lost
        assert all(o.startswith("lost") for o in lost), lost
        after = _wait_for(lambda: (p := server.worker_pids()) and len(p) == 2 and victim not in p and p)
        assert after and victim not in after and len(after) == 2
        for _ in range(6):
            assert request(server.port, "GET", "/v1/catalog", timeout=30)[0] == 200
    finally:
        server.stop()


def _series_sum(text: str, name: str, **labels) -> float:
    total = 0.0
    for line in text.splitlines():
        m = re.match(r"^([^{ ]+)(\{(.*)\})? (\S+)$", line)
        if not m or m.group(1) != name:
            continue
        got = dict(re.findall(r'(\w+)="([^"]*)"', m.group(3) or ""))
        if all(got.get(k) == v for k, v in labels.items()):
            total += float(m.group(4))
    return total


def test_metrics_sum_over_workers_and_survive_a_killed_worker():
    import os

    with Gunicorn(workers=2, app=SLOW_APP) as server:
        # keep both workers busy so that the catalog requests spread over them
        pids = set()
        for _ in range(30):
            status, headers, _ = request(server.port, "GET", "/v1/catalog", timeout=30)
            assert status == 200
        seen = []
        for _ in range(10):
            status, _, body = request(server.port, "GET", "/metrics", timeout=30)
            assert status == 200
            seen.append(_series_sum(body.decode(), "rolloff_http_requests_total", endpoint="/v1/catalog",
                                    status="200"))
        # whichever worker answers /metrics, it reports the requests of both
        assert seen == [30.0] * 10
        files = os.listdir(server.metrics_dir)
        pids = {int(m.group(1)) for f in files if (m := re.match(r"\w+_(\d+)\.db$", f))}
        # one metrics file per process that answered (sequential requests may all land on one worker)
        assert pids and pids <= set(server.worker_pids()) | {server.proc.pid}
        victim = server.worker_pids()[0]
        os.kill(victim, signal.SIGKILL)
        _wait_for(lambda: len(server.worker_pids()) == 2 and victim not in server.worker_pids())
        status, _, body = request(server.port, "GET", "/metrics", timeout=30)
        # a dead worker's counts stay in the totals
        assert _series_sum(body.decode(), "rolloff_http_requests_total", endpoint="/v1/catalog",
                           status="200") == 30.0
