"""Per-worker capacity of each endpoint, and the memory of the master and a worker.

One gunicorn worker (the project's configuration) on a loopback port; each demo
request (tests/deploy/demo.py) is sent sequentially REPEAT times after a warm-up.
Prints, per endpoint: median and spread (min-max) of the wall time, the worker's
CPU seconds per request (from /proc, immune to queueing but not to a loaded
core's slower clock) and the requests/s one worker sustains (1 / median wall).
Then the resident memory (RSS, and PSS, which shares the preloaded pages fairly)
of the master and the worker: idle, and the worker's peak after the heaviest
requests the default limits allow (tests/bench/bench_limits.py's candidates)
with --peak.

Run: python tests/bench/bench_capacity.py [--repeat 9] [--peak]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))

from tests.bench.benchlib import load  # noqa: E402
from tests.deploy import demo  # noqa: E402
from tests.hardening.server import Gunicorn, request  # noqa: E402

TICK = os.sysconf("SC_CLK_TCK")


def cpu_seconds(pid: int) -> float:
    fields = open(f"/proc/{pid}/stat").read().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / TICK


def memory(pid: int) -> dict[str, float]:
    """RSS, peak RSS (VmHWM) and PSS of a process, MiB."""
    out = {}
    for line in open(f"/proc/{pid}/status"):
        if line.startswith(("VmRSS:", "VmHWM:")):
            out[line.split(":")[0]] = int(line.split()[1]) / 1024
    for line in open(f"/proc/{pid}/smaps_rollup"):
        if line.startswith("Pss:"):
            out["Pss"] = int(line.split()[1]) / 1024
    return out


def call(port: int, method: str, path: str, payload) -> bytes:
    data = None if payload is None else json.dumps(payload).encode()
    status, _, body = request(port, method, path, body=data,
                              headers={"Content-Type": "application/json"} if data else {}, timeout=120)
    assert status == 200, (path, status, body[:300])
    return body


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--repeat", type=int, default=9)
    parser.add_argument("--peak", action="store_true", help="also run the heaviest requests the limits allow")
    args = parser.parse_args()
    print(load())
    with Gunicorn(workers=1) as server:
        worker = server.worker_pids()[0]
        idle_master, idle_worker = memory(server.proc.pid), memory(worker)
        design = json.loads(call(server.port, "POST", "/v1/designs", demo.DESIGN))
        print(f"{'endpoint':40s} {'median s':>9s} {'min-max s':>15s} {'CPU s/req':>9s} {'req/s/worker':>12s}")
        for name, method, path, payload in demo.SIMPLE + demo.with_design(design):
            call(server.port, method, path, payload)  # warm-up
            times = []
            cpu0 = cpu_seconds(worker)
            for _ in range(args.repeat):
                t0 = time.perf_counter()
                call(server.port, method, path, payload)
                times.append(time.perf_counter() - t0)
            cpu = (cpu_seconds(worker) - cpu0) / args.repeat
            med = statistics.median(times)
            print(f"{name:40s} {med:9.4f} {min(times):7.4f}-{max(times):7.4f} {cpu:9.4f} {1 / med:12.1f}")
        warm_worker = memory(worker)
        if args.peak:
            from service import create_app

            from tests.bench.bench_limits import candidates

            client = create_app({"TESTING": True}).test_client()
            limits = client.get("/v1/catalog").get_json()["limits"]
            try:
                heaviest = candidates(client, limits)
            except ImportError as exc:  # bench_limits follows the service's cost model; say so and go on
                print(f"peak run skipped: tests/bench/bench_limits.py does not run ({exc})")
                heaviest = []
            for name, method, path, payload in heaviest:
                t0 = time.perf_counter()
                status, _, _ = request(server.port, method, path, body=json.dumps(payload).encode() if payload else None,
                                       headers={"Content-Type": "application/json"}, timeout=300)
                print(f"peak run: {name}: {status} in {time.perf_counter() - t0:.1f} s")
        peak_worker = memory(worker)
        master = memory(server.proc.pid)
    print(f"master: RSS {idle_master['VmRSS']:.0f} MiB idle, {master['VmRSS']:.0f} MiB after; PSS {master['Pss']:.0f} MiB")
    print(f"worker: RSS {idle_worker['VmRSS']:.0f} MiB idle (PSS {idle_worker['Pss']:.0f}), "
          f"{warm_worker['VmRSS']:.0f} MiB after the endpoints (PSS {warm_worker['Pss']:.0f}), "
          f"peak RSS {peak_worker['VmHWM']:.0f} MiB{' after the limit requests' if args.peak else ''}")
    print(load())
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
