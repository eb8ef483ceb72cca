"""Benchmark: realize an 8th-order elliptic lowpass (auto topology, E96 R, E12 C).

Times the whole in-process design -- topology choice, value search, achieved
figures from the circuit engine, op-amp requirements, stage peaks, BOM,
netlist, summary and the design document -- over repeated runs and prints the
median and spread.

    python tests/bench/bench_realization.py [runs]
"""

from __future__ import annotations

import os
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
    wall, cpu = [], []
    for _ in range(runs):
        t0, c0 = time.perf_counter(), time.process_time()
        once()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    print("8th-order elliptic lowpass, auto topology, E96 resistors, E12 capacitors")
    print(f"stages: {', '.join(f'{s.topology}/{s.section.kind.value}' for s in d.stages)}")
    print(f"runs: {runs}   load average (1 min): {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    for name, t in (("wall", wall), ("cpu", cpu)):
        ms = np.array(t) * 1e3
        q1, q3 = np.percentile(ms, [25, 75])
        print(f"{name:4s} median: {statistics.median(ms):.1f} ms   IQR: {q1:.1f}-{q3:.1f} ms   "
              f"min: {ms.min():.1f} ms   max: {ms.max():.1f} ms")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 50)
