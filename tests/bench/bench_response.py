"""Benchmark of the response layer: python tests/bench/bench_response.py

Prints median, interquartile range and min/max (ms) of repeated runs of:

- the 10,000-point frequency response (magnitude, phase, group delay) of an
  8th-order lowpass built as four Sallen-Key stages with the circuit engine;
- the whole ``analyze`` of that circuit (adds metrics, step/impulse);
- the SVG figure of that result (after a first, warming call);
- the 10,000-row table rendered as CSV text;
- ``compare_families`` for one requirement (every family, in-process).

Small-matrix BLAS calls dominate the time response; under load, multithreaded
OpenBLAS is much slower on such matrices, so the figures are printed for the
thread setting of the environment (set OPENBLAS_NUM_THREADS=1 as the service does
per worker, if it does).
"""

from __future__ import annotations

import os
import statistics
import sys
import time

sys.path.insert(0, os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..")))

import numpy as np  # noqa: E402

from service.response import CircuitSystem, FrequencyGrid, analyze, compare_families, table_to_csv  # noqa: E402
from service.response import zpk as _zpk  # noqa: E402
from tests.response.circuits import butterworth_qs, sallen_key_lowpass  # noqa: E402


def measure(fn, repeats: int) -> list[float]:
    out = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        out.append((time.perf_counter() - t0) * 1e3)
    return out


def report(name: str, ms: list[float]) -> None:
    q = statistics.quantiles(ms, n=4)
    print(f"{name:<52} median {statistics.median(ms):8.2f} ms   IQR {q[0]:7.2f}-{q[2]:7.2f}   "
          f"min {min(ms):7.2f}  max {max(ms):7.2f}  (n={len(ms)})")


def main() -> None:
    print(f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', '(unset)')}")
    circuit = sallen_key_lowpass(1000.0, butterworth_qs(8))
    sysm = CircuitSystem(circuit)
    grid = FrequencyGrid(1.0, 1e6, 10_000)
    f = grid.frequencies()

    def freq_response():
        h = sysm.evaluate(f)
        _zpk.magnitude_db(h)
        sysm.phase(f, h)
        CircuitSystem(circuit).group_delay(f)  # fresh system: includes the exact zpk of the circuit

    freq_response()
    report("10k-point frequency response, 8th-order circuit", measure(freq_response, 30))
    report("analyze() of it (+ metrics, step, impulse)",
           measure(lambda: analyze(CircuitSystem(circuit), grid, response_type="lowpass"), 20))
    result = analyze(sysm, grid, response_type="lowpass")
    result.svg()
    report("SVG figure (after the first)", measure(result.svg, 10))
    table = result.table()
    report("10,000-row table as CSV text", measure(lambda: table_to_csv(table), 30))
    args = ("lowpass", 1000.0, 2000.0, 0.5, 50.0)
    compare_families(*args)
    report("compare_families, all 7 families (lowpass 1k/2k, 0.5/50 dB)", measure(lambda: compare_families(*args), 20))
    args = ("bandpass", [35e3, 45e3], [25e3, 60e3], 1.0, 30.0)
    compare_families(*args)
    report("compare_families, all 7 families (bandpass)", measure(lambda: compare_families(*args), 20))


if __name__ == "__main__":
    main()
