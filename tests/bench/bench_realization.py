"""Benchmark: realize an 8th-order elliptic lowpass (auto topology, E96 R, E12 C).

Times the whole in-process design -- topology choice, value search, achieved
figures from the circuit engine, op-amp requirements, stage peaks, BOM,
netlist, summary and the design document -- over repeated runs and prints the
median and spread.

    python tests/bench/bench_realization.py [runs]
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import numpy as np  # noqa: E402

from service.approximation import design_by_order  # noqa: E402
from service.realization import design_filter, document_from_design  # noqa: E402


def main(runs: int = 50) -> None:
    approx = design_by_order("lowpass", "elliptic", 8, 1000.0, passband_ripple_db=0.1,
                             stopband_attenuation_db=80.0)
    parts = {"resistors": {"series": "E96"}, "capacitors": {"series": "E12"}}

    def once():
        d = design_filter(approx, topology="auto", parts=parts)
        doc = document_from_design(d)
        assert doc["bom"] and doc["netlist"]
        return d

    d = once()  # warm-up (imports, caches of numpy/scipy)
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        once()
        times.append(time.perf_counter() - t0)
    ms = np.array(times) * 1e3
    q1, q3 = np.percentile(ms, [25, 75])
    print("8th-order elliptic lowpass, auto topology, E96 resistors, E12 capacitors")
    print(f"stages: {', '.join(f'{s.topology}/{s.section.kind.value}' for s in d.stages)}")
    print(f"runs: {runs}")
    print(f"median: {statistics.median(ms):.1f} ms   IQR: {q1:.1f}-{q3:.1f} ms   "
          f"min: {ms.min():.1f} ms   max: {ms.max():.1f} ms")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 50)
