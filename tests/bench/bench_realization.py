"""Benchmark: realize an 8th-order elliptic lowpass (auto topology, E96 R, E12 C).

Times the whole in-process design -- topology choice, joint value search, achieved
figures from the circuit engine, op-amp requirements (with and without
predistortion), stage peaks, BOM, netlist, summary and the design document --
over repeated runs and prints the median and spread (wall and CPU time).

"warm" repeats the same design (the automatic topology choice of a section is
cached, as it is between requests for the same sections); "cold" clears that
cache before every run.  ``--opamp GBW`` designs for a single-pole op-amp
(predistortion and the macromodel-scored search).

    python tests/bench/bench_realization.py [--runs 30] [--opamp 10e6]
    python tests/bench/bench_realization.py --compare BEFORE [--after HEAD] [--rounds 6] [--runs 15]

``--compare BEFORE`` times two commits in one run: both are extracted with
``git archive`` (the AFTER tree whole, the BEFORE tree the same except
``service/realization`` taken from BEFORE) and fresh processes of each
alternate, round by round; it prints each side's CPU medians and the per-round
ratios after/before.  The load average is printed with the figures (the
machine is shared: compare ratios taken in one run, not figures across runs).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from benchlib import extract_trees, load  # noqa: E402  (tests/bench/benchlib.py)

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
TREE = sys.argv[sys.argv.index("--tree") + 1] if "--tree" in sys.argv else ROOT
sys.path.insert(0, TREE)


def measure(runs: int, opamp: float | None, cold: bool) -> dict:
    from service.approximation import design_by_order
    from service.realization import design_filter
    try:
        from service.workflows import outcome_of

        def document_from_design(d):
            return outcome_of(d).as_dict()
    except ImportError:          # a tree from before the workflow layer
        from service.realization import document_from_design

    try:
        from service.realization.topologies.auto import _choose
    except ImportError:          # a tree without the cached choice
        _choose = None
    approx = design_by_order("lowpass", "elliptic", 8, 1000.0, passband_ripple_db=0.1,
                             stopband_attenuation_db=80.0)
    parts = {"resistors": {"series": "E96"}, "capacitors": {"series": "E12"}}
    kwargs = {} if opamp is None else {"opamp": {"gbw_hz": opamp}}

    def once():
        d = design_filter(approx, topology="auto", parts=parts, **kwargs)
        doc = document_from_design(d)
        assert doc["bom"] and doc["netlist"]
        return d

    d = once()  # warm-up (imports, caches of numpy/scipy)
    wall, cpu = [], []
    for _ in range(runs):
        if cold and _choose is not None:
            _choose.cache_clear()
        t0, c0 = time.perf_counter(), time.process_time()
        once()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return {"wall": wall, "cpu": cpu, "stages": [f"{s.topology}/{s.section.kind.value}" for s in d.stages],
            "opamps": sum(len(s.opamps) for s in d.stages)}


def line(name: str, t) -> str:
    ms = np.array(t) * 1e3
    q1, q3 = np.percentile(ms, [25, 75])
    return (f"{name:9s} median: {statistics.median(ms):6.1f} ms   IQR: {q1:.1f}-{q3:.1f} ms   "
            f"min: {ms.min():.1f} ms   max: {ms.max():.1f} ms")


def child(tree: str, runs: int, opamp: float | None, cold: bool) -> dict:
    cmd = [sys.executable, os.path.abspath(__file__), "--tree", tree, "--json", "--runs", str(runs)]
    if opamp is not None:
        cmd += ["--opamp", str(opamp)]
    if cold:
        cmd += ["--cold"]
    out = subprocess.run(cmd, capture_output=True, text=True, check=True, cwd=tree).stdout
    return json.loads(out.strip().splitlines()[-1])


def compare(before: str, after: str, rounds: int, runs: int, opamp: float | None) -> None:
    with tempfile.TemporaryDirectory(prefix="bench-realization-") as tmp:
        tb, ta = extract_trees(before, after, tmp, packages=("service/realization",))
        for cold in (False, True):
            med = {"before": [], "after": []}
            for _ in range(rounds):
                for name, tree in (("before", tb), ("after", ta)):
                    med[name].append(statistics.median(child(tree, runs, opamp, cold)["cpu"]))
            ratios = np.array(med["after"]) / np.array(med["before"])
            q1, q3 = np.percentile(ratios, [25, 75])
            label = "cold" if cold else "warm"
            print(f"{label}: cpu median before {1e3 * statistics.median(med['before']):.1f} ms, "
                  f"after {1e3 * statistics.median(med['after']):.1f} ms; ratio after/before median "
                  f"{statistics.median(ratios):.2f} (IQR {q1:.2f}-{q3:.2f}, min {ratios.min():.2f}, "
                  f"max {ratios.max():.2f}, {rounds} rounds of {runs} runs)")
    print(load())


def main() -> None:
    p = argparse.ArgumentParser()
    p.add_argument("--runs", type=int, default=30)
    p.add_argument("--opamp", type=float, default=None)
    p.add_argument("--cold", action="store_true")
    p.add_argument("--json", action="store_true")
    p.add_argument("--tree", default=ROOT)
    p.add_argument("--compare", default=None)
    p.add_argument("--after", default="HEAD")
    p.add_argument("--rounds", type=int, default=6)
    args = p.parse_args()
    if args.compare:
        compare(args.compare, args.after, args.rounds, args.runs, args.opamp)
        return
    if args.json:
        print(json.dumps(measure(args.runs, args.opamp, args.cold)))
        return
    print("8th-order elliptic lowpass, auto topology, E96 resistors, E12 capacitors"
          + ("" if args.opamp is None else f", single-pole op-amp {args.opamp:g} Hz"))
    for cold in (False, True):
        r = measure(args.runs, args.opamp, cold)
        print(f"{'cold' if cold else 'warm'} runs: {args.runs}   stages: {', '.join(r['stages'])}   "
              f"op-amps: {r['opamps']}")
        print(line("  wall", r["wall"]))
        print(line("  cpu", r["cpu"]))
    print(load())


if __name__ == "__main__":
    main()
