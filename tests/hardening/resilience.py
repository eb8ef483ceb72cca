"""Slow clients, heavy requests, health probes, stops and kills against a real gunicorn, over real sockets.

Shared by tests/hardening/test_resilience.py (which asserts) and its
``main()`` (``python -m tests.hardening.resilience``), which prints the
figures: probes answered, requests lost when a worker is killed and on
SIGTERM. Only 127.0.0.1 is used; every loop is bounded in count or time.
"""

from __future__ import annotations

import http.client
import json
import os
import re
import signal
import socket
import statistics
import threading
import time
from dataclasses import dataclass, field

from tests.hardening.server import Gunicorn, request

JSON = {"Content-Type": "application/json"}
#: A design large enough to make heavy requests of every computing endpoint.
BIG_DESIGN = {"response": "bandpass", "family": "elliptic", "order": 10, "cutoff_hz": [35e3, 45e3],
              "passband_ripple_db": 0.1, "stopband_attenuation_db": 80}


#: How long the load run waits, at most, for the drip clients to be cut off (the service's default
#: body deadline is 8 s, ROLLOFF_BODY_TIMEOUT_S).
DRIP_WAIT_S = 20.0


class DripClient(threading.Thread):
    """Opens a POST with a 1,000-byte Content-Length and sends its body one byte every ``interval`` s.

    When the server ends the connection (its body deadline), it starts over,
    until :meth:`stop`. ``answers`` holds the status line of every answer.
    """

    def __init__(self, port: int, interval: float = 0.5):
        super().__init__(daemon=True)
        self.port, self.interval = port, interval
        self.answers: list[str] = []
        self._halt = threading.Event()

    def stop(self) -> None:
        self._halt.set()

    def run(self) -> None:
        while not self._halt.is_set():
            try:
                with socket.create_connection(("127.0.0.1", self.port), timeout=30) as s:
                    s.sendall(b"POST /v1/tolerance HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
                              b"Content-Length: 1000\r\n\r\n{")
                    s.settimeout(self.interval)
                    while not self._halt.is_set():
                        try:
                            data = s.recv(4096)
                        except socket.timeout:
                            try:
                                s.sendall(b" ")
                            except OSError:
                                break
                            continue
                        if data:
                            self.answers.append(data.split(b"\r\n", 1)[0].decode("latin-1"))
                        break
            except OSError:
                time.sleep(self.interval)


@dataclass
class Probes:
    """Health probes sent every ``every`` s, each given ``timeout`` s (as an orchestrator does)."""

    port: int
    path: str = "/healthz"
    every: float = 0.25
    timeout: float = 1.0
    results: list[tuple[bool, float]] = field(default_factory=list)

    def __post_init__(self):
        self._halt = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def start(self) -> "Probes":
        self._thread.start()
        return self

    def stop(self) -> None:
        self._halt.set()
        self._thread.join(timeout=10)

    def _run(self) -> None:
        while not self._halt.is_set():
            t0 = time.perf_counter()
            try:
                ok = request(self.port, "GET", self.path, timeout=self.timeout)[0] == 200
            except OSError:
                ok = False
            self.results.append((ok, time.perf_counter() - t0))
            self._halt.wait(max(0.0, self.every - (time.perf_counter() - t0)))

    @property
    def answered(self) -> int:
        return sum(ok for ok, _ in self.results)


def heavy_requests(port: int) -> list[tuple[str, str, bytes]]:
    """Eight requests near the largest the service allows: (label, path, body).

    The tolerance requests take the most trials the service accepts (read from
    its own 422 answer) and the design the largest order it accepts, so they
    follow whatever limits are configured.
    """
    status, _, body = request(port, "POST", "/v1/designs", json.dumps(BIG_DESIGN).encode(), JSON, timeout=60)
    assert status == 200, body[:300]
    doc = json.loads(body)
    probe = {"design": doc, "trials": 100_000, "seed": 1}
    status, _, body = request(port, "POST", "/v1/tolerance", json.dumps(probe).encode(), JSON, timeout=60)
    m = re.search(r"use at most ([\d,]+) trials", body.decode("utf-8", "replace"))
    trials = int(m.group(1).replace(",", "")) if (status == 422 and m) else 100_000
    tol = json.dumps({"design": doc, "trials": trials, "seed": 1}).encode()
    resp = json.dumps({"design": doc, "frequencies": {"start_hz": 1e3, "stop_hz": 1e6, "points": 10_000},
                       "time": {"stop_s": 0.01, "points": 10_000}}).encode()
    design = None
    for order in (20, 18, 16, 14, 12, 10):  # the largest order of the same design the work budget accepts
        design = json.dumps(dict(BIG_DESIGN, order=order)).encode()
        if request(port, "POST", "/v1/designs", design, JSON, timeout=60)[0] == 200:
            break
    return ([("tolerance", "/v1/tolerance", tol)] * 4 + [("responses", "/v1/responses", resp)] * 2
            + [("designs", "/v1/designs", design)] * 2)


def send_all(port: int, requests_: list[tuple[str, str, bytes]], timeout: float = 120.0
             ) -> list[tuple[str, int | str, dict]]:
    """Send every request at once (one thread each); (label, status or error name, headers) per request."""
    out: list = [None] * len(requests_)

    def one(i, label, path, body):
        try:
            status, headers, _ = request(port, "POST", path, body, JSON, timeout=timeout)
            out[i] = (label, status, headers)
        except OSError as exc:
            out[i] = (label, exc.__class__.__name__, {})

    threads = [threading.Thread(target=one, args=(i, *r)) for i, r in enumerate(requests_)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout + 10)
    return out


def slow_clients_and_heavy_load(server: Gunicorn) -> dict:
    """Two drip clients + eight heavy requests at once, /healthz and /readyz probed all along."""
    heavy = heavy_requests(server.port)
    drips = [DripClient(server.port) for _ in range(2)]
    for d in drips:
        d.start()
    time.sleep(1.0)  # both drips hold a connection before the heavy requests arrive
    health = Probes(server.port, "/healthz").start()
    ready = Probes(server.port, "/readyz", every=0.5).start()
    results = send_all(server.port, heavy)
    # On a fast machine the heavy requests end before the body deadline: the probes go on until each
    # drip client has been cut off once (or a bound well past the deadline), so the 408 is always seen.
    deadline = time.monotonic() + DRIP_WAIT_S
    while time.monotonic() < deadline and not all(d.answers for d in drips):
        time.sleep(0.25)
    health.stop()
    ready.stop()
    for d in drips:
        d.stop()
    return {"heavy": results, "health": health, "ready": ready, "drips": drips}


class Traffic(threading.Thread):
    """A client sending a POST after another on new connections, recording each outcome."""

    def __init__(self, port: int, body: bytes, path: str = "/v1/designs"):
        super().__init__(daemon=True)
        self.port, self.body, self.path = port, body, path
        self.outcomes: list[str] = []
        self._halt = threading.Event()

    def stop(self) -> None:
        self._halt.set()

    def run(self) -> None:
        while not self._halt.is_set():
            conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=60)
            try:
                conn.connect()
            except ConnectionRefusedError:
                self.outcomes.append("refused")  # never accepted: a proxy retries it elsewhere
                time.sleep(0.05)
                continue
            except OSError as exc:
                self.outcomes.append(f"connect {exc.__class__.__name__}")
                continue
            try:
                conn.request("POST", self.path, body=self.body, headers=JSON)
                resp = conn.getresponse()
                resp.read()
                self.outcomes.append(str(resp.status))
            except OSError as exc:
                self.outcomes.append(f"lost ({exc.__class__.__name__})")
            except http.client.HTTPException as exc:
                self.outcomes.append(f"lost ({exc.__class__.__name__})")
            finally:
                conn.close()


def lost(outcomes: list[str]) -> list[str]:
    """Requests that were accepted (connected) but got no answer."""
    return [o for o in outcomes if o.startswith("lost") or o.startswith("connect ")]


def stop_under_traffic(server: Gunicorn, clients: int = 6, run_s: float = 2.0) -> list[str]:
    """SIGTERM while ``clients`` send designs back to back; every outcome (status, refused, lost)."""
    body = json.dumps(BIG_DESIGN).encode()
    traffic = [Traffic(server.port, body) for _ in range(clients)]
    for t in traffic:
        t.start()
    time.sleep(run_s)
    server.signal(signal.SIGTERM)
    server.proc.wait(timeout=60)
    for t in traffic:
        t.stop()
    for t in traffic:
        t.join(timeout=60)
    return [o for t in traffic for o in t.outcomes]


def kill_worker_under_traffic(server: Gunicorn, clients: int = 6, run_s: float = 2.0) -> list[str]:
    """SIGKILL one worker while ``clients`` send designs back to back; every outcome."""
    body = json.dumps(BIG_DESIGN).encode()
    traffic = [Traffic(server.port, body) for _ in range(clients)]
    for t in traffic:
        t.start()
    time.sleep(run_s)
    os.kill(server.worker_pids()[0], signal.SIGKILL)
    time.sleep(run_s)
    for t in traffic:
        t.stop()
    for t in traffic:
        t.join(timeout=60)
    return [o for t in traffic for o in t.outcomes]


def main() -> int:
    """Print the figures (2 workers, default settings)."""
    with Gunicorn(workers=2) as server:
        r = slow_clients_and_heavy_load(server)
        lat = sorted(t for _, t in r["health"].results)
        print(f"/healthz probes answered within 1 s: {r['health'].answered}/{len(r['health'].results)} "
              f"(median {statistics.median(lat) * 1000:.0f} ms, max {lat[-1] * 1000:.0f} ms); "
              f"/readyz: {r['ready'].answered}/{len(r['ready'].results)}")
        print("heavy requests: " + ", ".join(f"{label} {status}" for label, status, _ in r["heavy"]))
        print("drip clients' answers: " + "; ".join(", ".join(d.answers) or "-" for d in r["drips"]))
    with Gunicorn(workers=2) as server:
        outcomes = kill_worker_under_traffic(server)
        print(f"worker SIGKILL under 6 clients: {len(outcomes)} requests, lost {len(lost(outcomes))}, "
              f"statuses {sorted(set(outcomes))}")
    server = Gunicorn(workers=2).start()
    try:
        outcomes = stop_under_traffic(server)
        print(f"SIGTERM under 6 clients: {len(outcomes)} requests, lost {len(lost(outcomes))}, "
              f"refused {outcomes.count('refused')} (not accepted), statuses {sorted(set(outcomes))}")
    finally:
        server.stop()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
