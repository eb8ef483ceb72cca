"""A load-balanced pair, for real on loopback: `rolloff serve` replicas behind HAProxy
(deploy/haproxy/rolloff.cfg, Debian's haproxy) with health checks on /readyz.

(a) the same request gets byte-identical bodies from either replica and through the balancer;
(b) zero failed requests during a bounded load run while one replica is stopped gracefully
    (SIGTERM, then started again) and the other killed (SIGKILL to all its processes), except
    at most the killed replica's replies already under way at that instant;
(c) a replica busy computing stays in rotation; it leaves only when its health check fails
    (SIGSTOP), takes no traffic while out, and comes back;
and a replica with an invalid setting exits at start with one line naming it and never gets traffic.
Bounded: every load loop stops by request count and by time.
"""

from __future__ import annotations

import json
import re
import threading
import time
from collections import Counter

import pytest

from tests.deploy import demo
from tests.deploy.cluster import HAPROXY_CFG, Balancer, Replica, call


@pytest.fixture(scope="module")
def design_document():
    from service import create_app

    client = create_app({"TESTING": True}).test_client()
    response = client.post("/v1/designs", json=demo.DESIGN)
    assert response.status_code == 200
    return response.get_json()


class Load:
    """Client threads sending a mix of requests through the balancer until stopped (or a cap is hit)."""

    MIX = [
        ("GET", "/v1/values/nearest?value=4.87k&series=E24", None),
        ("GET", "/v1/approximations?response=bandpass&family=butterworth&order=3&cutoff_hz=35k,45k", None),
        ("POST", "/v1/approximations", {**demo.ACCELEROMETER, "family": "elliptic"}),
        ("POST", "/v1/designs", demo.DESIGN),
    ]

    def __init__(self, port: int, threads: int = 3, max_requests: int = 4000, max_s: float = 90):
        self.port, self.max_requests, self.max_s = port, max_requests, max_s
        self.results: Counter = Counter()
        self.failures: list[tuple[float, float, str]] = []  # (start, end, what) of each failed request
        self._stop = threading.Event()
        self._lock = threading.Lock()
        self._threads = [threading.Thread(target=self._run, args=(i,), daemon=True) for i in range(threads)]

    def _run(self, offset: int) -> None:
        t0, i = time.monotonic(), offset
        while not self._stop.is_set() and time.monotonic() - t0 < self.max_s:
            with self._lock:
                if sum(self.results.values()) >= self.max_requests:
                    return
            method, path, payload = self.MIX[i % len(self.MIX)]
            i += 1
            started = time.monotonic()
            try:
                status = call(self.port, method, path, payload, timeout=30)[0]
                outcome = "ok" if 200 <= status < 300 else f"HTTP {status}"
            except Exception as exc:  # noqa: BLE001 - any exception is a failed request, counted
                outcome = f"{type(exc).__name__}"
            with self._lock:
                self.results[outcome] += 1
                if outcome != "ok":
                    self.failures.append((started, time.monotonic(), f"{method} {path}: {outcome}"))

    def __enter__(self) -> "Load":
        for t in self._threads:
            t.start()
        return self

    def __exit__(self, *exc) -> None:
        self._stop.set()
        for t in self._threads:
            t.join(60)


@pytest.fixture
def stack():
    """Started replicas and balancers, stopped at the end whatever happens."""
    started: list = []
    yield started
    for item in reversed(started):
        item.stop()


def test_either_replica_gives_the_same_bytes(stack, design_document):
    one = Replica(workers=1).start()
    stack.append(one)
    two = Replica(workers=2).start()
    stack.append(two)
    lb = Balancer({"replica1": one.port, "replica2": two.port}).start()
    stack.append(lb)
    lb.wait_status("replica1", "UP")
    lb.wait_status("replica2", "UP")
    requests = [("POST", "/v1/designs", demo.DESIGN),
                ("POST", "/v1/tolerance", demo.tolerance_request(design_document, trials=500, seed=7))]
    for method, path, payload in requests:
        bodies, ids = set(), set()
        for port in (one.port, two.port, lb.port, lb.port, lb.port, lb.port):
            status, headers, body = call(port, method, path, payload)
            assert status == 200, body[:300]
            bodies.add(body)
            ids.add(headers["x-request-id"])
        assert len(bodies) == 1, f"{path}: {len(bodies)} different bodies"
        assert len(ids) == 6  # every reply has its own request id; only the header differs
    served = {name: int(row["stot"]) for name, row in lb.stats().items()}
    assert served["replica1"] > 0 and served["replica2"] > 0  # both answered through the balancer


def test_no_failed_request_through_a_graceful_stop_and_a_kill_costs_only_replies_under_way(stack):
    """Zero failed requests while one replica stops gracefully and is replaced, and after the other is
    killed; the kill may cost only requests in flight on it at that instant (at most one per worker),
    those whose reply had already begun: a balancer cannot replay a request once it has forwarded
    part of the answer. Every request refused or cut before its answer began is retried elsewhere."""
    a = Replica(workers=2).start()
    stack.append(a)
    b = Replica(workers=2).start()
    stack.append(b)
    lb = Balancer({"a": a.port, "b": b.port}).start()
    stack.append(lb)
    lb.wait_status("a", "UP")
    lb.wait_status("b", "UP")
    with Load(lb.port) as load:
        time.sleep(2)
        assert a.terminate() == 0                    # graceful: in-flight requests finish
        lb.wait_status("a", "DOWN")
        a2 = Replica(port=a.port, workers=2).start()  # the replacement, on the same address
        stack.append(a2)
        lb.wait_status("a", "UP")
        time.sleep(1)
        before_kill = sum(load.results.values())
        kill_started = time.monotonic()
        b.kill()                                     # every process of b, mid-request
        kill_done = time.monotonic()
        lb.wait_status("b", "DOWN")
        time.sleep(2)
        after_kill = sum(load.results.values()) - before_kill
    total = sum(load.results.values())
    assert total > 50 and after_kill > 5, load.results
    in_flight_at_kill = [f for f in load.failures if f[0] <= kill_done and f[1] >= kill_started]
    assert in_flight_at_kill == load.failures, (load.results, load.failures, lb.output()[-3000:])
    assert len(in_flight_at_kill) <= 2, load.failures  # b's two workers: at most one request each
    stats = lb.stats()
    assert int(stats["a"]["stot"]) > 0 and int(stats["b"]["stot"]) > 0


def test_busy_replica_stays_in_rotation_until_its_health_fails(stack, design_document):
    busy = Replica(workers=2).start()
    stack.append(busy)
    calm = Replica(workers=2).start()
    stack.append(calm)
    lb = Balancer({"busy": busy.port, "calm": calm.port}).start()
    stack.append(lb)
    lb.wait_status("busy", "UP")
    lb.wait_status("calm", "UP")

    # Busy: one worker kept computing Monte Carlo runs sent straight to it (not through the balancer).
    heavy = demo.tolerance_request(design_document, trials=500, seed=3)
    stop = threading.Event()
    heavy_done: Counter = Counter()

    def keep_busy() -> None:
        t0 = time.monotonic()
        while not stop.is_set() and time.monotonic() - t0 < 60 and heavy_done["n"] < 40:
            try:
                status = call(busy.port, "POST", "/v1/tolerance", heavy, timeout=60)[0]
            except Exception as exc:  # noqa: BLE001 - reported by the assertion below
                status = repr(exc)
            heavy_done["n" if status == 200 else f"failed: {status}"] += 1

    # The replica's own health, probed directly while it is busy: the balancer's verdict must follow it.
    probe_s: list[float] = []

    def probe() -> None:
        while not stop.is_set():
            t0 = time.monotonic()
            try:
                ok = call(busy.port, "GET", "/readyz", timeout=15)[0] == 200
            except OSError:
                ok = False
            probe_s.append(time.monotonic() - t0 if ok else float("inf"))
            time.sleep(0.25)

    threads = [threading.Thread(target=keep_busy, daemon=True), threading.Thread(target=probe, daemon=True)]
    for t in threads:
        t.start()
    try:
        time.sleep(1)
        served_before = int(lb.stats()["busy"]["stot"])
        statuses, notes = set(), []
        for _ in range(40):
            assert call(lb.port, "GET", "/v1/values/nearest?value=4.87k&series=E24")[0] == 200
            row = lb.stats()["busy"]
            statuses.add(row["status"])
            if row["status"] != "UP":
                notes.append({k: row.get(k) for k in ("status", "check_status", "check_duration")})
            time.sleep(0.05)
    finally:
        stop.set()
        for t in threads:
            t.join(90)
    assert heavy_done["n"] >= 1 and set(heavy_done) == {"n"}, heavy_done
    assert int(lb.stats()["busy"]["stot"]) > served_before  # busy, and still given its share
    # "UP" or "UP 1/2" (one slow check, still in rotation). Taken out ("DOWN") only if its health
    # really failed: a direct /readyz took longer than the balancer's check timeout (on a machine
    # whose cores are saturated by other work, a stall can do that).
    check_timeout = float(re.search(r"timeout check (\d+)s", HAPROXY_CFG.read_text()).group(1))
    if not all(status.startswith("UP") for status in statuses):
        assert max(probe_s) > check_timeout, (statuses, notes, sorted(probe_s)[-5:])

    # Health fails: the replica hangs (every process stopped). Out after its failed checks...
    busy.pause(True)
    try:
        lb.wait_status("busy", "DOWN")
        served_while_down = int(lb.stats()["busy"]["stot"])
        for _ in range(20):
            assert call(lb.port, "GET", "/v1/catalog", timeout=10)[0] == 200
        assert int(lb.stats()["busy"]["stot"]) == served_while_down  # no request sent to it while out
    finally:
        busy.pause(False)
    lb.wait_status("busy", "UP")                            # ...and back after its good checks


def test_misconfigured_replica_exits_with_one_line_and_never_gets_traffic(stack):
    good = Replica(workers=1).start()
    stack.append(good)
    bad = Replica(workers=1, env={"ROLLOFF_WORKERS": "abc"}).start(wait=False)
    stack.append(bad)
    assert bad.proc.wait(timeout=60) == 2
    lines = bad.output().splitlines()
    assert lines == ["rolloff: invalid configuration: ROLLOFF_WORKERS='abc' is not valid: "
                     "expected a whole number from 1 up"]
    lb = Balancer({"good": good.port, "bad": bad.port}).start()
    stack.append(lb)
    lb.wait_status("bad", "DOWN")
    lb.wait_status("good", "UP")
    for _ in range(20):
        assert call(lb.port, "GET", "/v1/catalog")[0] == 200
    stats = lb.stats()
    assert int(stats["bad"]["stot"]) == 0 and int(stats["good"]["stot"]) >= 20
    assert json.loads(call(lb.port, "GET", "/readyz")[2]) is not None
