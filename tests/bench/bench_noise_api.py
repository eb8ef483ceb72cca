"""Noise, headroom and supplies over HTTP: python tests/bench/bench_noise_api.py [--repeat N]

Starts the service under gunicorn (one worker, 127.0.0.1, a free port within ROLLOFF_TEST_PORTS when set) and
times round trips from this process (``time.perf_counter``), of:

- ``POST /v1/responses`` of the issue's design (8th-order Butterworth lowpass, four Sallen-Key stages, a 10 MHz
  op-amp with 10 nV/rtHz, 1 pA/rtHz and 1/f corners) on 1,000 frequencies: without noise, with ``noise``
  (densities on the 1,000 points, integrated over 10 Hz-100 kHz), and with ``noise`` and ``headroom``;
- ``POST /v1/designs`` of that design, without and with a 5 V single-rail ``supply``.

Prints median, interquartile range and min/max (ms), the load average before and after (the machine may be
shared: compare the ratios taken in one run), and the ratios to the plain request.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import time

sys.path.insert(0, os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..")))

from tests.bench.benchlib import load  # noqa: E402
from tests.hardening.server import Gunicorn, request  # noqa: E402

OPAMP = {"gbw_hz": "10MHz", "en_nv_rthz": 10, "in_pa_rthz": 1, "en_corner_hz": 100, "in_corner_hz": 200,
         "output_swing_v": 10, "part_id": "PM7-U-OPA-GP"}
DESIGN = {"response": "lowpass", "family": "butterworth", "order": 8, "cutoff_hz": "1kHz", "topology": "sallen_key",
          "opamp": OPAMP}
GRID = {"start_hz": 10, "stop_hz": "100kHz", "points": 1000}


def _post(port: int, path: str, body: dict) -> dict:
    status, _, data = request(port, "POST", path, json.dumps(body).encode(),
                              {"Content-Type": "application/json"}, timeout=60)
    if status != 200:
        raise RuntimeError(f"{path}: {status} {data[:500]!r}")
    return json.loads(data)


def _time(port: int, path: str, body: dict, repeat: int) -> list[float]:
    raw = json.dumps(body).encode()
    _post(port, path, body)   # warm
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        status, _, _ = request(port, "POST", path, raw, {"Content-Type": "application/json"}, timeout=60)
        out.append((time.perf_counter() - t0) * 1e3)
        assert status == 200
    return out


def _stats(name: str, ms: list[float]) -> float:
    ms = sorted(ms)
    q = statistics.quantiles(ms, n=4)
    med = statistics.median(ms)
    print(f"{name:64s} median {med:8.1f} ms  IQR {q[0]:.1f}-{q[2]:.1f}  min {ms[0]:.1f}  max {ms[-1]:.1f}  "
          f"(n={len(ms)})")
    return med


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--repeat", type=int, default=30)
    args = parser.parse_args()
    print(f"{load()} at start")
    with Gunicorn(workers=1) as server:
        port = server.port
        doc = _post(port, "/v1/designs", DESIGN)
        plain = {"design": doc, "frequencies": GRID}
        noise = dict(plain, noise={"band_hz": [10, 100e3]})
        both = dict(noise, headroom={"input_peak_v": 1.0})
        base = _stats("POST /v1/responses, 4 stages, 1,000 frequencies", _time(port, "/v1/responses", plain,
                                                                                args.repeat))
        n = _stats("  + noise (10 Hz-100 kHz)", _time(port, "/v1/responses", noise, args.repeat))
        b = _stats("  + noise + headroom", _time(port, "/v1/responses", both, args.repeat))
        print(f"    ratios to the plain response: noise {n / base:.2f}, noise + headroom {b / base:.2f}")
        d0 = _stats("POST /v1/designs, 8th-order, noise figures", _time(port, "/v1/designs", DESIGN,
                                                                         max(5, args.repeat // 3)))
        d1 = _stats("  + supply 5 V single rail", _time(port, "/v1/designs", dict(DESIGN, supply={"v_pos": 5}),
                                                         max(5, args.repeat // 3)))
        print(f"    ratio: {d1 / d0:.2f}")
    print(f"{load()} at end")


if __name__ == "__main__":
    main()
