"""The slowest requests the default limits allow, endpoint by endpoint.

Usage::

    python tests/bench/bench_limits.py [--repeat 3] [--only designs]

Each candidate pushes one endpoint to the edge of the default limits
(ROLLOFF_MAX_ORDER, _MAX_FREQUENCY_POINTS, _MAX_TIME_POINTS, _MAX_TRIALS,
_MAX_WORK, _MAX_STOCK_ENTRIES, the 1 MiB body) and is sent through the Flask
test client in this process (no network). Printed: status, median and
min/max wall time and CPU time of ``--repeat`` runs (one run when the first
takes over 5 s), and a flag on every request over about 2 s of CPU, with the
limit that would bound it.
"""

from __future__ import annotations

import argparse
import json
import os
import signal
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
# as in a gunicorn worker (service/gunicorn_conf.py): one BLAS thread, so CPU time is the request's own
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from service import create_app  # noqa: E402

CPU_BUDGET_S = 2.0


def _stock(n: int) -> list[dict]:
    """n stock parts: E96 resistors and E12 capacitors over several decades (invented stock)."""
    out = []
    mant_r = [1.0, 1.1, 1.21, 1.33, 1.47, 1.62, 1.78, 1.96, 2.15, 2.37, 2.61, 2.87, 3.16, 3.48, 3.83, 4.22,
              4.64, 5.11, 5.62, 6.19, 6.81, 7.5, 8.25, 9.09]
    mant_c = [1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2]
    i = 0
    while len(out) < n:
        dec = i // len(mant_r)
        out.append({"kind": "resistor", "value": round(mant_r[i % len(mant_r)] * 10 ** (2 + dec % 5), 6),
                    "tolerance": 0.01, "part_id": f"R-{i}"})
        if len(out) < n:
            out.append({"kind": "capacitor", "value": mant_c[i % len(mant_c)] * 10 ** (-11 + (i // 12) % 5),
                        "tolerance": 0.05, "dielectric": "C0G", "part_id": f"C-{i}"})
        i += 1
    return out


def candidates(client, limits: dict) -> list[tuple[str, str, str, dict | None]]:
    max_order = limits["max_order"]["value"]
    max_points = limits["max_frequency_points"]["value"]
    max_time = limits["max_time_points"]["value"]
    max_trials = limits["max_trials"]["value"]
    max_work = limits["max_work"]["value"]
    max_stock = limits["max_stock_entries"]["value"]
    band = {"response": "bandpass", "family": "elliptic", "order": max_order, "cutoff_hz": [35e3, 45e3],
            "passband_ripple_db": 0.1, "stopband_attenuation_db": 100}
    out = [
        ("approximations: elliptic bandpass at max order", "POST", "/v1/approximations", band),
        ("approximations: legendre bandstop at max order", "POST", "/v1/approximations",
         {"response": "bandstop", "family": "legendre", "order": min(max_order, 16), "cutoff_hz": [1.0, 1000.0]}),
        ("compare: every family, demanding band requirement", "POST", "/v1/approximations/compare",
         {"response": "bandpass", "passband_hz": [35e3, 45e3], "stopband_hz": [34e3, 46.5e3],
          "passband_ripple_db": 0.01, "stopband_attenuation_db": 120}),
        ("designs: elliptic bandpass at max order", "POST", "/v1/designs", band),
        ("designs: max order with the largest stock list", "POST", "/v1/designs",
         dict(band, parts={"stock": _stock(max_stock)})),
    ]
    r = client.post("/v1/designs", json=band)
    doc = r.get_json() if r.status_code == 200 else None
    small = client.post("/v1/designs", json={"response": "lowpass", "family": "butterworth", "order": 2,
                                             "cutoff_hz": 1000}).get_json()
    from service.api.dispatch import METRIC_GRID_POINTS, PER_TRIAL_POINT_WEIGHT, stage_cost_weight

    def weight(document):  # the work units per trial and point the service charges (service/api/dispatch.py)
        return stage_cost_weight(document) + PER_TRIAL_POINT_WEIGHT

    if doc is not None:
        stages = len(doc["stages"])
        w = weight(doc)
        out += [
            ("designs/evaluate: the max-order document", "POST", "/v1/designs/evaluate", doc),
            ("responses: max-order design, max frequency and time points", "POST", "/v1/responses",
             {"design": doc, "frequencies": {"start_hz": 1e3, "stop_hz": 1e6, "points": max_points},
              "time": {"stop_s": 0.01, "points": max_time}}),
            (f"tolerance: max-order design ({stages} stages), trials x points at the work budget", "POST",
             "/v1/tolerance", {"design": doc, "trials": max_trials, "seed": 1,
                               "frequencies": {"start_hz": 1e4, "stop_hz": 1e5,
                                               "points": max(2, max_work // (max_trials * w))}}),
            ("tolerance: max-order design, 1000 trials, max points within the budget", "POST", "/v1/tolerance",
             {"design": doc, "trials": 1000, "seed": 1,
              "frequencies": {"start_hz": 1e4, "stop_hz": 1e5,
                              "points": min(max_points, max_work // (1000 * w))}}),
            ("tolerance: max-order design, points 2, the most trials within the budget", "POST", "/v1/tolerance",
             {"design": doc, "trials": min(max_trials, max_work // (METRIC_GRID_POINTS * w)), "seed": 1,
              "frequencies": {"start_hz": 1e4, "stop_hz": 1e5, "points": 2}}),
        ]
    out += [
        ("tolerance: 1-stage design, max trials, points at the work budget", "POST", "/v1/tolerance",
         {"design": small, "trials": max_trials, "seed": 1,
          "frequencies": {"start_hz": 10, "stop_hz": 1e5,
                          "points": min(max_points, max_work // (max_trials * weight(small)))}}),
        ("tolerance: 1-stage design, trials at the budget, max points", "POST", "/v1/tolerance",
         {"design": small, "trials": min(max_trials, max_work // (max_points * weight(small))), "seed": 1,
          "frequencies": {"start_hz": 10, "stop_hz": 1e5, "points": max_points}}),
    ]
    return out


class _Timeout(BaseException):  # not an Exception: the app must not turn it into a 500
    pass


def _alarm(signum, frame):
    raise _Timeout()


def _time(client, method: str, path: str, body, timeout_s: int) -> tuple[int, float, float, str]:
    """(status, wall s, CPU s, note); a request still running after ``timeout_s`` is abandoned."""
    data = json.dumps(body) if body is not None else None
    w0, c0 = time.perf_counter(), time.process_time()
    signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(timeout_s)
    try:
        r = client.open(path, method=method, data=data, content_type="application/json")
    except _Timeout:
        return 0, time.perf_counter() - w0, time.process_time() - c0, f"abandoned after {timeout_s} s"
    finally:
        signal.alarm(0)
    wall, cpu = time.perf_counter() - w0, time.process_time() - c0
    note = ""
    if r.status_code != 200:
        try:
            note = (r.get_json() or {}).get("detail", "")[:120]
        except Exception:  # not JSON
            note = r.get_data(as_text=True)[:120]
    return r.status_code, wall, cpu, note


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--only", default="", help="run only candidates whose name contains this")
    ap.add_argument("--timeout", type=int, default=60, help="abandon a request after this many seconds")
    args = ap.parse_args()
    app = create_app({"TESTING": True, "log_level": "warning"})
    client = app.test_client()
    limits = client.get("/v1/catalog").get_json()["limits"]
    print("limits: " + ", ".join(f"{k}={v['value']}" for k, v in limits.items()))
    over = []
    for name, method, path, body in candidates(client, limits):
        if args.only and args.only not in name:
            continue
        runs = []
        for k in range(args.repeat):
            runs.append(_time(client, method, path, body, args.timeout))
            if k == 0 and runs[0][1] > 5.0:
                break
        status = runs[0][0]
        walls = [r[1] for r in runs]
        cpus = [r[2] for r in runs]
        med_cpu = statistics.median(cpus)
        flag = "  <-- over ~2 s CPU" if med_cpu > CPU_BUDGET_S else ""
        if runs[0][0] == 0:
            flag += " (a lower bound: the request was abandoned)"
        print(f"{name}\n    {method} {path} -> {status} {runs[0][3]}\n    wall median {statistics.median(walls):.3f} s "
              f"(min {min(walls):.3f}, max {max(walls):.3f}), CPU median {med_cpu:.3f} s, n={len(runs)}{flag}")
        if med_cpu > CPU_BUDGET_S:
            over.append((name, med_cpu))
    if over:
        print("\nover the ~2 s CPU mark:")
        for name, cpu in over:
            print(f"  {cpu:6.2f} s  {name}")
    else:
        print("\nno request the default limits allow takes over ~2 s of CPU")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
