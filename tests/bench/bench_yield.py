"""Benchmark of a design to a yield target: the README showcase (PM-7 accelerometer anti-alias filter).

Elliptic lowpass, flat within 0.1 dB to 10 kHz, 80 dB down from 25.6 kHz, E96
resistors in three priced grades, E12 C0G capacitors 100 pF - 100 nF in three
priced grades, a 20 MHz op-amp, yield target 0.95 over 1,000 boards per
Monte Carlo check at -20 to 70 degC (the request of README.md).  Also an
8th-order elliptic lowpass designed without a yield target through the same
view (POST /v1/designs, in-process test client).

Run:  python tests/bench/bench_yield.py [--repeat 5] [--trials 1000] [--plain-repeat 15]

Prints the median, IQR, min and max wall time of ``design_to_yield`` over the
repeats (after a warm-up), and the same split by phase: the design loop
(``design``), the first-order model and centring, the grade search, the
Monte Carlo confirmations (the verifier), so that what is the verifier's and
what is the yield search's can be told apart.  Then the plain design's
median.  The load average is printed with the figures: on a shared machine
compare only figures taken in one run.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from collections import defaultdict

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from benchlib import load  # noqa: E402

SHOWCASE = {
    "response": "lowpass", "family": "elliptic", "passband_hz": "10kHz", "stopband_hz": "25.6kHz",
    "passband_ripple_db": 0.1, "stopband_attenuation_db": 80,
    "parts": {"resistors": {"series": "E96", "grades": [{"tolerance": 0.01, "cost": 1},
                                                        {"tolerance": 0.001, "cost": 2.5},
                                                        {"tolerance": 0.0005, "cost": 4}]},
              "capacitors": {"series": "E12", "range": ["100p", "100n"], "dielectric": "C0G",
                             "grades": [{"tolerance": 0.02, "cost": 1}, {"tolerance": 0.01, "cost": 1.6},
                                        {"tolerance": 0.005, "cost": 3}]}},
    "opamp": {"gbw_hz": "20MHz", "slew_v_per_us": 5, "part_id": "PM7-U-OPA-GP"},
    "yield": {"target": 0.95, "trials": 1000, "seed": 1, "temperature": {"min_c": -20, "max_c": 70},
              "tempco_ppm_per_c": {"resistor": 10}},
}
PLAIN = {"response": "lowpass", "family": "elliptic", "order": 8, "cutoff_hz": "1kHz", "passband_ripple_db": 0.1,
         "stopband_attenuation_db": 80}
PHASES = {"design": "design loop", "_model": "model", "center": "centring", "_centred": "centring",
          "_assign": "grade search", "verified_yield": "confirmation (verifier)"}


def stats(xs) -> str:
    xs = sorted(xs)
    q = statistics.quantiles(xs, n=4) if len(xs) > 1 else [xs[0]] * 3
    return f"median {statistics.median(xs):.3f} s, IQR {q[2] - q[0]:.3f} s, min {xs[0]:.3f} s, max {xs[-1]:.3f} s"


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--trials", type=int, default=1000)
    ap.add_argument("--plain-repeat", type=int, default=15)
    args = ap.parse_args()

    from service.api.app import create_app
    from service.api.schemas.designs import DesignRequestSchema
    from service.config import Settings
    from service.workflows import yielding

    settings = Settings()
    body = dict(SHOWCASE, **{"yield": dict(SHOWCASE["yield"], trials=args.trials)})
    request = DesignRequestSchema().load(body)["request"]

    spent: dict[str, float] = defaultdict(float)
    for name, phase in PHASES.items():
        fn = getattr(yielding, name)

        def timed(*a, _fn=fn, _phase=phase, **k):
            t = time.perf_counter()
            try:
                return _fn(*a, **k)
            finally:
                spent[_phase] += time.perf_counter() - t
        setattr(yielding, name, timed)

    out = yielding.design_to_yield(request, settings)          # warm-up
    y = out.report
    print(f"README showcase, yield target {y.target} over {y.check.trials} boards ({load()})")
    print(f"  reached {y.reached}: {y.check.passed}/{y.check.trials} = {y.check.fraction:.3f}, Wilson "
          f"{y.check.ci95[0]:.3f}-{y.check.ci95[1]:.3f}; cost {out.cost.total:g} (all cheapest "
          f"{out.cost.all_cheapest:g}, all tightest {out.cost.all_tightest:g}); {len(y.rounds)} designs, "
          f"{sum(len(r.confirmations) for r in y.rounds)} confirmations")
    walls, phases = [], defaultdict(list)
    for _ in range(args.repeat):
        spent.clear()
        t = time.perf_counter()
        yielding.design_to_yield(request, settings)
        walls.append(time.perf_counter() - t)
        for k, v in spent.items():
            phases[k].append(v)
    print(f"  whole: {stats(walls)}")
    for k in dict.fromkeys(PHASES.values()):
        if phases[k]:
            print(f"  {k}: {stats(phases[k])}")
    rest = [w - sum(phases[k][i] for k in phases) for i, w in enumerate(walls)]
    print(f"  the rest (grading, reports): {stats(rest)}")

    client = create_app().test_client()
    client.post("/v1/designs", json=PLAIN)
    plain = []
    for _ in range(args.plain_repeat):
        t = time.perf_counter()
        r = client.post("/v1/designs", json=PLAIN)
        plain.append(time.perf_counter() - t)
        assert r.status_code == 200, r.get_json()
    print(f"8th-order elliptic lowpass by order, no yield target, POST /v1/designs in-process: {stats(plain)} "
          f"({load()})")


if __name__ == "__main__":
    main()
