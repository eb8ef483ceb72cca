"""Load test: 16 concurrent clients against gunicorn (2 workers) on loopback.

Usage::

    python tests/bench/bench_load.py [--clients 16] [--duration 30] [--kill-worker]

Starts the service under gunicorn with the project's configuration on a free
127.0.0.1 port, then runs two phases of the same load (``--clients`` threads,
each sending requests back to back over a new connection, for ``--duration``
seconds): a realistic mix (approximations, designs, responses, small tolerance
runs), then ``/healthz`` alone, whose throughput is the ceiling of the HTTP
stack. Reports per endpoint: requests, throughput, p50, p99, IQR, errors, and
the ratio of the mix's throughput to /healthz's. With ``--kill-worker`` one
worker is SIGKILLed halfway through the mix; the report counts the requests
lost and checks the service answers afterwards.

Targets: 0 errors; design requests p99 <= 250 ms; at least 100 design
requests per second. The client threads share the machine's 2 cores with the
server, so the figures are a lower bound of the service's own capacity.
Loopback only; bounded in time (and in requests by ``--max-requests``).
"""

from __future__ import annotations

import argparse
import json
import os
import signal
import statistics
import sys
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.hardening.server import Gunicorn, request  # noqa: E402

JSON = {"Content-Type": "application/json"}
DESIGN = {"response": "lowpass", "family": "butterworth", "order": 4, "cutoff_hz": "10kHz"}
PM7_AA = {"response": "lowpass", "family": "elliptic", "passband_hz": "10kHz", "stopband_hz": "25.6kHz",
          "passband_ripple_db": 0.1, "stopband_attenuation_db": 80}


def _mix(document: dict) -> list[tuple[str, str, str, bytes | None, dict]]:
    """(label, method, path, body, headers), weighted by repetition: designs dominate the mix."""
    enc = lambda obj: json.dumps(obj).encode()  # noqa: E731
    design = ("designs", "POST", "/v1/designs", enc(DESIGN), JSON)
    design_req = ("designs", "POST", "/v1/designs", enc(PM7_AA), JSON)
    approx = ("approximations", "POST", "/v1/approximations", enc(PM7_AA), JSON)
    approx_get = ("approximations", "GET",
                  "/v1/approximations?response=lowpass&family=butterworth&order=4&cutoff_hz=1k", None, {})
    resp = ("responses", "POST", "/v1/responses",
            enc({"design": document, "frequencies": {"start_hz": 10, "stop_hz": 1e5, "points": 201}}), JSON)
    tol = ("tolerance", "POST", "/v1/tolerance", enc({"design": document, "trials": 100, "seed": 7}), JSON)
    nearest = ("values", "GET", "/v1/values/nearest?value=4.87k&series=E96", None, {})
    return [design, design, design_req, approx, approx_get, resp, resp, nearest, design, tol]


def _run(port: int, plan, clients: int, duration: float, max_requests: int, on_half=None):
    results: list[tuple[str, float, str]] = []  # (label, seconds, outcome)
    lock = threading.Lock()
    stop_at = time.monotonic() + duration
    half = threading.Event()

    def client(k: int):
        i = k
        while time.monotonic() < stop_at:
            label, method, path, body, headers = plan[i % len(plan)]
            i += 1
            started = time.perf_counter()
            try:
                status = request(port, method, path, body, headers, timeout=30)[0]
                outcome = "ok" if status == 200 else f"status {status}"
            except OSError as exc:
                outcome = f"lost ({exc.__class__.__name__})"
            elapsed = time.perf_counter() - started
            with lock:
                results.append((label, elapsed, outcome))
                if len(results) >= max_requests:
                    return

    threads = [threading.Thread(target=client, args=(k,), daemon=True) for k in range(clients)]
    t0 = time.monotonic()
    for t in threads:
        t.start()
    if on_half is not None:
        time.sleep(duration / 2)
        on_half()
    for t in threads:
        t.join(timeout=duration + 60)
    wall = time.monotonic() - t0
    return results, wall


def _report(results, wall: float) -> dict[str, dict]:
    by: dict[str, list] = {}
    for label, seconds, outcome in results:
        by.setdefault(label, []).append((seconds, outcome))
    rows = {}
    for label, items in sorted(by.items()):
        ms = sorted(s * 1000 for s, _ in items)
        q = statistics.quantiles(ms, n=100, method="inclusive") if len(ms) >= 2 else [ms[0]] * 99
        errors = sum(1 for _, o in items if o != "ok")
        rows[label] = {"n": len(ms), "rps": len(ms) / wall, "p50": statistics.median(ms), "p25": q[24],
                       "p75": q[74], "p99": q[98], "max": ms[-1], "errors": errors}
        print(f"  {label:15s} {len(ms):6d} req  {len(ms) / wall:7.1f} req/s  p50 {statistics.median(ms):7.1f} ms  "
              f"IQR {q[24]:6.1f}-{q[74]:6.1f}  p99 {q[98]:7.1f}  max {ms[-1]:7.1f}  errors {errors}")
    total = len(results)
    print(f"  {'all':15s} {total:6d} req  {total / wall:7.1f} req/s over {wall:.1f} s")
    return rows


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--clients", type=int, default=16)
    ap.add_argument("--duration", type=float, default=30.0)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--max-requests", type=int, default=200_000)
    ap.add_argument("--kill-worker", action="store_true")
    ap.add_argument("--mix", choices=("realistic", "designs"), default="realistic",
                    help="designs: only POST /v1/designs (4th-order Butterworth and the PM-7 elliptic requirement)")
    args = ap.parse_args()

    with Gunicorn(workers=args.workers) as server:
        status, _, body = request(server.port, "POST", "/v1/designs", json.dumps(DESIGN).encode(), JSON, timeout=30)
        assert status == 200, body[:300]
        plan = _mix(json.loads(body))
        if args.mix == "designs":
            plan = [p for p in plan if p[0] == "designs"]
        for label, method, path, b, h in plan:  # every request of the mix is a good one
            st = request(server.port, method, path, b, h, timeout=30)[0]
            assert st == 200, (label, st)
        _run(server.port, plan, args.workers * 2, 3.0, 10_000)  # warm every worker (lazy imports, caches)
        print(f"load average before the run: {' '.join(f'{x:.2f}' for x in os.getloadavg())} "
              f"on {os.cpu_count()} cores (other processes share the machine)")

        killed = {}

        def kill():
            victim = server.worker_pids()[0]
            os.kill(victim, signal.SIGKILL)
            killed["pid"] = victim
            print(f"  SIGKILL worker {victim} at {args.duration / 2:.0f} s")

        print(f"mix ({args.mix}): {args.clients} clients, {args.duration:.0f} s, gunicorn {args.workers} sync workers, loopback")
        results, wall = _run(server.port, plan, args.clients, args.duration, args.max_requests,
                             on_half=kill if args.kill_worker else None)
        rows = _report(results, wall)
        mix_rps = len(results) / wall
        lost = [o for _, _, o in results if o.startswith("lost")]
        other = [o for _, _, o in results if o != "ok" and not o.startswith("lost")]
        if args.kill_worker:
            answered = request(server.port, "GET", "/v1/catalog", timeout=30)[0]
            live = server.worker_pids()
            print(f"  after the kill: {len(lost)} requests lost, {len(other)} other errors; "
                  f"/v1/catalog -> {answered}; workers now {live} (killed {killed.get('pid')})")

        print(f"/healthz alone: {args.clients} clients, {args.duration:.0f} s")
        plan_h = [("healthz", "GET", "/healthz", None, {})]
        results_h, wall_h = _run(server.port, plan_h, args.clients, args.duration, args.max_requests)
        _report(results_h, wall_h)
        h_rps = len(results_h) / wall_h
        print(f"throughput ratio mix / healthz: {mix_rps / h_rps:.3f} ({mix_rps:.1f} / {h_rps:.1f} req/s)")

        d = rows.get("designs", {})
        errors = sum(r["errors"] for r in rows.values())
        print("targets: errors 0 -> {}; designs p99 <= 250 ms -> {:.1f} ms {}; designs >= 100 req/s -> {:.1f} {}".format(
            errors, d.get("p99", float("nan")), "met" if d.get("p99", 1e9) <= 250 else "NOT met",
            d.get("rps", 0.0), "met" if d.get("rps", 0) >= 100 else "NOT met"))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
