"""Benchmark of the SVG figures: python tests/bench/bench_figures.py [--repeat 15]

What one ``format=svg`` figure costs on top of the computation it draws, to
keep ``service.workflows.costs.FIGURE_UNITS`` honest. Three figures, each
drawn once to warm up (matplotlib's import and font cache) and then
``--repeat`` times:

- the response figure of the PM-7 accelerometer anti-alias design (elliptic
  lowpass, flat within 0.1 dB to 10 kHz, 80 dB down at 25.6 kHz; a design
  document analysed at circuit level, 501 points, verified against its
  requirement);
- the response figure of the PM-7 pressure input's 50/60 Hz bandstop
  (transfer function, 801 points, two passbands and a stopband);
- the tolerance figure of the anti-alias design (500 trials, yield).

Run it from another tree (``git archive``) for a before/after comparison.

Prints wall and CPU time (``time.process_time``, less disturbed by other work
on the machine) as median, interquartile range, min and max in ms, the SVG
size, the load average, and the work units one figure is worth at
``costs.UNITS_PER_SECOND`` (the CPU median and the 90th percentile of the three
drawings) beside the constant in use.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

sys.path.insert(0, os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..")))

from tests.bench.benchlib import load  # noqa: E402

ANTI_ALIAS = {"response": "lowpass", "family": "elliptic", "passband_hz": "10kHz", "stopband_hz": "25.6kHz",
              "passband_ripple_db": 0.1, "stopband_attenuation_db": 80}
NOTCH = {"response": "bandstop", "family": "chebyshev2", "passband_hz": ["20Hz", "150Hz"],
         "stopband_hz": ["49Hz", "61Hz"], "passband_ripple_db": 1, "stopband_attenuation_db": 40}


def _results():
    """(name, zero-argument callable drawing one SVG) for each figure, computed once through the workflows."""
    from service.api.app import create_app

    app = create_app({"TESTING": True})
    client = app.test_client()
    doc = client.post("/v1/designs", json=dict(ANTI_ALIAS, parts={"resistors": {"series": "E96",
                                                                               "tolerance": 0.01}})).get_json()
    settings = app.config["ROLLOFF_SETTINGS"]
    from service.workflows import DesignDocument, Requirement, ResponseRequest, ToleranceRequest, respond, tolerance
    from service.response import FrequencyGrid

    document = DesignDocument.from_json({k: v for k, v in doc.items() if k in (
        "response", "family", "order", "stages", "requirement", "settings")})
    mask = Requirement.from_json(ANTI_ALIAS)
    design = respond(ResponseRequest(document, mask=mask, figure=True), settings)
    notch_req = Requirement.from_json(NOTCH)
    notch = respond(ResponseRequest(notch_req, frequencies=FrequencyGrid(5.0, 500.0, 801, "log"), mask=notch_req,
                                    figure=True), settings)
    mc = tolerance(ToleranceRequest(document, trials=500, seed=1, reply="svg"), settings)
    drawings = [("response figure, anti-alias design (3 stages, 501 points)", design.svg),
                ("response figure, 50/60 Hz bandstop (801 points)", notch.svg),
                ("tolerance figure, anti-alias design (500 trials)", mc.svg)]
    try:
        from service.workflows.figures import with_figure, with_tolerance_figure
    except ImportError:                    # a tree from before the figures' inputs (for a before/after run)
        return drawings
    from service.workflows.verdicts import design_criteria

    plans = document.plans()
    criteria = design_criteria(document.requirement, plans)
    bare = respond(ResponseRequest(document, mask=mask), settings).result     # its ResponseResult
    from service.realization import cascade_circuit
    from service.response import CircuitSystem

    display = CircuitSystem(cascade_circuit(plans))
    return drawings + [
            ("  its inputs: title + passband detail (400 points of the circuit)",
             lambda: with_figure(bare, document, display)),
            ("  its inputs: title + the nominal design verified",
             lambda: with_tolerance_figure(mc, document, plans, criteria))]


def _stats(ms: list[float]) -> str:
    q = statistics.quantiles(ms, n=4)
    return f"median {statistics.median(ms):7.1f}  IQR {q[0]:7.1f}-{q[2]:7.1f}  min {min(ms):7.1f}  max {max(ms):7.1f}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=15)
    args = parser.parse_args()
    from service.workflows import costs

    print(f"cores={os.cpu_count()}  {load()}")
    cpu_all = []
    for name, draw in _results():
        out = draw()
        size = len(out) if isinstance(out, bytes) else 0
        wall, cpu = [], []
        for _ in range(args.repeat):
            t0, c0 = time.perf_counter(), time.process_time()
            draw()
            c1, t1 = time.process_time(), time.perf_counter()
            wall.append((t1 - t0) * 1e3)
            cpu.append((c1 - c0) * 1e3)
        if size:
            cpu_all += cpu
        print(f"{name}  (n={args.repeat}, ms" + (f", SVG {size / 1024:.0f} KiB)" if size else ")"))
        print(f"    wall {_stats(wall)}")
        print(f"    cpu  {_stats(cpu)}")
    med = statistics.median(cpu_all) / 1e3
    p90 = statistics.quantiles(cpu_all, n=10)[-1] / 1e3
    print(f"one figure: CPU median {med * 1e3:.0f} ms = {med * costs.UNITS_PER_SECOND:,.0f} units, "
          f"90th percentile {p90 * 1e3:.0f} ms = {p90 * costs.UNITS_PER_SECOND:,.0f} units "
          f"(FIGURE_UNITS = {costs.FIGURE_UNITS:,})")
    print(f"end: {load()}")


if __name__ == "__main__":
    main()
