"""Benchmark of the response layer: python tests/bench/bench_response.py [--quick]

Prints median, interquartile range and min/max of repeated runs, both as wall
time (``time.perf_counter``) and as CPU time of this process
(``time.process_time``, less disturbed by other work on the machine), with the
load average before and after, of:

- the 10,000-point frequency response (magnitude, phase, group delay) of an
  8th-order lowpass built as four Sallen-Key stages with the circuit engine;
- the whole ``analyze`` of that circuit (adds metrics, step/impulse);
- the SVG figure of that result (after a first, warming call);
- the 10,000-row table rendered as CSV text;
- ``compare_families`` for three requirements (every family, in-process),
  among them the accelerometer anti-alias requirement of the demo scenario
  (flat within 0.1 dB to 10 kHz, 80 dB down at 25.6 kHz);
- the parts of one compare row: the whole-band verification and the step metrics of the
  elliptic design of that requirement (by analyze's state-space method, and
  by the comparison's own method where the code has one);
- the SVG figure of a comparison.

Small-matrix BLAS calls dominate the time response; under load, multithreaded
OpenBLAS is much slower on such matrices, so the figures are printed for the
thread setting of the environment (set OPENBLAS_NUM_THREADS=1 as the service does
per worker, if it does).
"""

from __future__ import annotations

import os
import sys

sys.path.insert(0, os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..")))

import numpy as np  # noqa: E402

from service.response import CircuitSystem, FrequencyGrid, analyze, compare_families, table_to_csv  # noqa: E402
from service.response import zpk as _zpk  # noqa: E402
from tests.bench.benchlib import measure as _measure, report  # noqa: E402
from tests.response.circuits import butterworth_qs, sallen_key_lowpass  # noqa: E402

QUICK = "--quick" in sys.argv


def measure(fn, repeats: int) -> tuple[list[float], list[float]]:
    return _measure(fn, repeats, quick=QUICK)


def _criteria(response, passband_hz, stopband_hz, ripple_db, attenuation_db):
    """What "meets" means for a requirement by band edges (ideal op-amps), as the workflow derives it."""
    from service.workflows import Requirement

    return Requirement(response=response, passband_hz=passband_hz, stopband_hz=stopband_hz,
                       passband_ripple_db=ripple_db, stopband_attenuation_db=attenuation_db).criteria(
                           finite_opamps=False)


def main() -> None:
    print(f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', '(unset)')}  "
          f"cores={os.cpu_count()}  load average at start {os.getloadavg()[0]:.2f} {os.getloadavg()[1]:.2f}")
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
    report("SVG figure of that result (after the first)", measure(result.svg, 15))
    table = result.table()
    report("10,000-row table as CSV text", measure(lambda: table_to_csv(table), 30))

    cases = [
        ("compare_families, 7 families (lowpass 10k/25.6k, 0.1/80 dB)", ("lowpass", 1e4, 2.56e4, 0.1, 80.0)),
        ("compare_families, 7 families (lowpass 1k/2k, 0.5/50 dB)", ("lowpass", 1000.0, 2000.0, 0.5, 50.0)),
        ("compare_families, 7 families (bandpass 35-45k / 25,60k)", ("bandpass", [35e3, 45e3], [25e3, 60e3],
                                                                      1.0, 30.0)),
    ]
    for name, args in cases:
        criteria = _criteria(*args)
        compare_families(*args, criteria=criteria)
        report(name, measure(lambda args=args, c=criteria: compare_families(*args, criteria=c), 20))

    # the parts of one row: verification and step metrics of the elliptic design
    from service.approximation import design_by_requirement
    from service.circuit.roots import RootSet
    from service.response.verification import verify
    from service.response.metrics import ResponseMetrics, step_metrics
    from service.response.timeresp import automatic_span, simulate
    from service.response.grids import TimeGrid
    from service.response.comparison import COMPARISON_TIME_POINTS

    req = ("lowpass", 1e4, 2.56e4, 0.1, 80.0)
    approx = design_by_requirement(req[0], "elliptic", *req[1:])
    z, p, k = (np.asarray(approx.zeros, dtype=complex), np.asarray(approx.poles, dtype=complex),
               float(np.real(approx.gain)))
    criteria = _criteria(*req)
    roots = RootSet.from_zpk(z, p, k)
    report(f"  whole-band verification of the elliptic row (order {approx.order})",
           measure(lambda: verify(roots, criteria), 30))

    def step_row():
        stop, dt = automatic_span(p)
        t = TimeGrid().times(stop, dt, automatic_points=COMPARISON_TIME_POINTS)
        sim = simulate(z, p, k, t)
        sim.final_value = float(np.real(_zpk.dc_gain(z, p, k)))
        step_metrics(sim, ResponseMetrics())

    report("  step metrics of the elliptic row (analyze's exact method)", measure(step_row, 30))
    from service.response import comparison as _cmp

    if hasattr(_cmp, "_step_response"):
        report("  step metrics of the elliptic row (the comparison's method)",
               measure(lambda: step_metrics(_cmp._step_response(z, p, k), ResponseMetrics()), 30))

    comp = compare_families(*req, criteria=criteria)
    comp.svg()
    report("SVG figure of that comparison (after the first)", measure(comp.svg, 10))
    print(f"load average at end {os.getloadavg()[0]:.2f} {os.getloadavg()[1]:.2f}")


if __name__ == "__main__":
    main()
