"""Benchmark: requirement -> sections for elliptic bandpass designs, in-process.

Run: python tests/bench/bench_approximation.py
Prints median, interquartile range and min/max of repeated runs (milliseconds).
"cold" runs change the attenuation slightly every call so no prototype cache is hit;
"warm" runs repeat one request (the prototype and order caches hit).
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from service.approximation import design_by_requirement  # noqa: E402

CASES = {
    # PM-7 ultrasonic band (demo scenario)
    "elliptic bandpass, PM-7 leak band": ("bandpass", "elliptic", (35e3, 45e3), (25e3, 60e3), 0.5, 30.0),
    # prototype order 5 -> degree 10
    "elliptic bandpass, degree 10": ("bandpass", "elliptic", (35e3, 45e3), (30e3, 52e3), 0.5, 60.0),
    # prototype order 10 -> degree 20
    "elliptic bandpass, order 10 (degree 20)": ("bandpass", "elliptic", (35e3, 45e3), (34e3, 46.3e3), 0.1, 80.0),
}


def _stats(samples_ms):
    s = sorted(samples_ms)
    q = statistics.quantiles(s, n=4)
    return f"median {statistics.median(s):.3f} ms  IQR {q[0]:.3f}-{q[2]:.3f} ms  min {s[0]:.3f}  max {s[-1]:.3f}"


def main(repeats: int = 500) -> None:
    for name, args in CASES.items():
        a = design_by_requirement(*args)
        print(f"{name}: order {a.order}, degree {a.degree}, {len(a.sections)} sections")
        for mode in ("cold", "warm"):
            samples = []
            for i in range(repeats):
                att = args[5] + (i + 1) * 1e-6 if mode == "cold" else args[5]
                t0 = time.perf_counter()
                design_by_requirement(*args[:5], att)
                samples.append((time.perf_counter() - t0) * 1e3)
            print(f"  {mode:4s} ({repeats} runs): {_stats(samples)}")


if __name__ == "__main__":
    main()
