"""Requests/s through HAProxy (deploy/haproxy/rolloff.cfg) to one replica and to two, and the ratio.

wrk (Debian package) drives POST /v1/designs (the demo design, CPU-bound) and GET /v1/values/nearest
(light) for DURATION seconds with CONNECTIONS connections, through the balancer, against one and
then two replicas of WORKERS workers each. On a machine with fewer cores than the replicas' workers
the ratio shows the cores, not the service, are the limit.

Run: python tests/bench/bench_pair.py [--duration 10] [--connections 4] [--workers 2]
"""

from __future__ import annotations

import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))

from tests.bench.benchlib import load  # noqa: E402
from tests.deploy import demo  # noqa: E402
from tests.deploy.cluster import Balancer, Replica  # noqa: E402


def wrk(port: int, path: str, body: dict | None, duration: int, connections: int) -> tuple[float, str]:
    script = ""
    if body is not None:
        script = (f"wrk.method = 'POST'\nwrk.body = [[{json.dumps(body)}]]\n"
                  "wrk.headers['Content-Type'] = 'application/json'\n")
    with tempfile.NamedTemporaryFile("w", suffix=".lua", delete=False) as fh:
        fh.write(script + "done = function(summary, latency, requests)\n"
                 "  io.write(string.format('non2xx %d\\n', summary.errors.status))\nend\n")
    out = subprocess.run([shutil.which("wrk") or "/usr/bin/wrk", "-t1", f"-c{connections}", f"-d{duration}s",
                          "-s", fh.name, f"http://127.0.0.1:{port}{path}"], capture_output=True, text=True).stdout
    os.unlink(fh.name)
    rate = float(re.search(r"Requests/sec:\s+([0-9.]+)", out).group(1))
    errors = re.search(r"non2xx (\d+)", out).group(1)
    return rate, errors


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--duration", type=int, default=10)
    ap.add_argument("--connections", type=int, default=4)
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()
    print(load())
    targets = [("POST /v1/designs", "/v1/designs", demo.DESIGN),
               ("GET /v1/values/nearest", "/v1/values/nearest?value=4.87k&series=E24", None)]
    replicas = [Replica(workers=args.workers).start(), Replica(workers=args.workers).start()]
    try:
        results = {}
        for count in (1, 2):
            lb = Balancer({f"r{i}": r.port for i, r in enumerate(replicas[:count])}).start()
            try:
                for i in range(count):
                    lb.wait_status(f"r{i}", "UP")
                for name, path, body in targets:
                    rate, errors = wrk(lb.port, path, body, args.duration, args.connections)
                    results[(name, count)] = rate
                    print(f"{name:26s} {count} replica(s) x {args.workers} workers: {rate:8.1f} req/s "
                          f"(non-2xx {errors})", flush=True)
            finally:
                lb.stop()
        for name, _, _ in targets:
            print(f"{name:26s} two/one = {results[(name, 2)] / results[(name, 1)]:.2f}")
    finally:
        for r in replicas:
            r.stop()
    print(load(), f"cores: {os.cpu_count()}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
