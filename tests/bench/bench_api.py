"""HTTP round trips through the Flask test client (in-process, no network).

Targets: a 10th-order elliptic bandpass from a requirement, POST /v1/approximations,
median <= 10 ms; POST /v1/approximations/compare over all families <= 50 ms;
POST /v1/designs of an 8th-order elliptic lowpass (auto topology, E96/E12) <= 50 ms.

Run: python tests/bench/bench_api.py [--repeat N]
(with one BLAS thread, as the service's gunicorn workers run, unless OPENBLAS_NUM_THREADS is set)
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # before numpy is imported

import argparse  # noqa: E402
import statistics  # noqa: E402
import time  # noqa: E402

from service import create_app  # noqa: E402

BANDPASS = {"response": "bandpass", "family": "elliptic", "passband_hz": ["35kHz", "45kHz"],
            "stopband_hz": ["30kHz", "52kHz"], "passband_ripple_db": 0.5, "stopband_attenuation_db": 60}
COMPARE = {"response": "lowpass", "passband_hz": "10kHz", "stopband_hz": "25.6kHz", "passband_ripple_db": 0.1,
           "stopband_attenuation_db": 80}
DESIGN = {"response": "lowpass", "family": "elliptic", "order": 8, "cutoff_hz": "10kHz", "passband_ripple_db": 0.1,
          "stopband_attenuation_db": 80, "topology": "auto",
          "parts": {"resistors": {"series": "E96"}, "capacitors": {"series": "E12"}}}


def _time(client, url, body, repeat):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        r = client.post(url, json=body)
        times.append(time.perf_counter() - t0)
        assert r.status_code == 200, r.get_data(as_text=True)
    return times


def _report(name, times, target_ms):
    ms = sorted(t * 1e3 for t in times)
    q = statistics.quantiles(ms, n=4)
    print(f"{name:58s} median {statistics.median(ms):8.2f} ms  IQR {q[0]:.2f}-{q[2]:.2f}  "
          f"min {ms[0]:.2f}  max {ms[-1]:.2f}  (target <= {target_ms} ms, n={len(ms)})")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--repeat", type=int, default=50)
    args = parser.parse_args()
    client = create_app({"log_level": "warning"}).test_client()
    body = client.post("/v1/approximations", json=BANDPASS).get_json()
    print(f"bandpass requirement -> prototype order {body['order']}, degree {body['degree']}")
    for url, req in (("/v1/approximations", BANDPASS), ("/v1/approximations/compare", COMPARE),
                     ("/v1/designs", DESIGN)):
        _time(client, url, req, 3)  # warm caches and imports
    _report("POST /v1/approximations (elliptic bandpass, requirement)",
            _time(client, "/v1/approximations", BANDPASS, args.repeat), 10)
    _report("POST /v1/approximations/compare (all families)",
            _time(client, "/v1/approximations/compare", COMPARE, args.repeat), 50)
    _report("POST /v1/designs (8th-order elliptic lowpass, auto, E96/E12)",
            _time(client, "/v1/designs", DESIGN, max(5, args.repeat // 5)), 50)


if __name__ == "__main__":
    main()
