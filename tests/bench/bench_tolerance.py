"""Benchmark of ``run_tolerance`` against an ngspice Monte Carlo on the reference design.

Eighth-order Butterworth lowpass (1 kHz) as four unity-gain Sallen-Key stages
(E96 1 % R, E12 5 % C, Gaussian, tolerance = 3 sigma), 501 log-spaced
frequencies 10 Hz ... 100 kHz, lowpass mask (1 dB to 800 Hz, 40 dB from 2 kHz).

Run:  python tests/bench/bench_tolerance.py [--trials 10000] [--spice-trials 500] [--repeat 7] [--big 100000]
      python tests/bench/bench_tolerance.py --compare BEFORE [--after HEAD] [--rounds 8] [--repeat 5]

Prints: wall and CPU time (``time.process_time``) of the whole
``run_tolerance`` (percentiles, metrics, sensitivity, worst case and yield)
over repeats (median, IQR, min, max, after a warm-up), peak traced memory
(tracemalloc) and peak RSS of a fresh process (resource.getrusage
ru_maxrss), the same for ``--big`` trials, and ngspice's wall time for
``--spice-trials`` trials of a ``.control`` loop that alters every part and
reruns ``ac`` (scaled linearly to ``--trials``), with the ratio.  The load
average is printed with the figures.

``--compare BEFORE`` times two commits in one run: both are extracted with
``git archive`` (the AFTER tree whole, the BEFORE tree the same except
``service/circuit`` and ``service/tolerance`` taken from BEFORE), and fresh
processes of each alternate, round by round, with the default BLAS threads
and with ``OPENBLAS_NUM_THREADS=1``.  It prints each side's wall and CPU
times and the per-round ratios before/after (median, IQR, min, max).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc

import numpy as np

from benchlib import extract_trees, load  # noqa: E402  (tests/bench/benchlib.py)

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
# a --compare child imports the service from the tree it is given
TREE = sys.argv[sys.argv.index("--tree") + 1] if "--tree" in sys.argv else ROOT
sys.path.insert(0, TREE)

F = np.logspace(1, 5, 501)


def setup():
    from service.approximation import design_by_order
    from service.realization import design_filter, document_from_design
    from service.response import Mask
    doc = document_from_design(design_filter(design_by_order("lowpass", "butterworth", 8, 1000.0),
                                             topology="sallen_key"))
    return doc, Mask.from_requirement("lowpass", 800.0, 2000.0, 1.0, 40.0)


def stats(xs, unit="s") -> str:
    xs = np.asarray(xs)
    q1, med, q3 = np.percentile(xs, [25, 50, 75])
    return f"median {med:.3f} {unit}  IQR {q3 - q1:.3f}  min {xs.min():.3f}  max {xs.max():.3f}  (n={xs.size})"


def timed_runs(doc, mask, trials: int, repeat: int) -> tuple[list[float], list[float]]:
    """Wall and CPU times (s) of ``repeat`` whole runs (after the caller's warm-up)."""
    from service.tolerance import run_tolerance
    wall, cpu = [], []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        run_tolerance(doc, trials=trials, frequencies_hz=F, mask=mask)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return wall, cpu


def compare_child(trials: int, repeat: int) -> None:
    """One side of --compare (tree ``TREE``): warm-up, timed runs, traced peak; print JSON."""
    from service.tolerance import run_tolerance
    doc, mask = setup()
    run_tolerance(doc, trials=200, frequencies_hz=F, mask=mask)
    wall, cpu = timed_runs(doc, mask, trials, repeat)
    tracemalloc.start()
    run_tolerance(doc, trials=trials, frequencies_hz=F, mask=mask)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    print(json.dumps({"wall": wall, "cpu": cpu, "peak": peak}))


def compare(before: str, after: str, rounds: int, repeat: int, trials: int) -> None:
    """Alternate fresh processes of the two trees; print each side's times and the before/after ratios."""
    print(f"compare {before} (before) with {after} (after), {rounds} rounds x {repeat} timed runs, "
          f"{trials} trials x {F.size} frequencies; {load()}")
    cmd = [sys.executable, os.path.abspath(__file__)]
    with tempfile.TemporaryDirectory(prefix="bench-compare-") as tmp:
        tb, ta = extract_trees(before, after, tmp)
        for blas in ("default", "1"):
            env = dict(os.environ)
            env.pop("OPENBLAS_NUM_THREADS", None)
            if blas == "1":
                env["OPENBLAS_NUM_THREADS"] = "1"
            res = {"before": {"wall": [], "cpu": [], "peak": []}, "after": {"wall": [], "cpu": [], "peak": []}}
            ratio = {"wall": [], "cpu": []}
            for r in range(rounds):
                med = {}
                order = (("before", tb), ("after", ta)) if r % 2 == 0 else (("after", ta), ("before", tb))
                for side, tree in order:
                    out = subprocess.run(cmd + ["--compare-child", "--tree", tree, "--trials", str(trials),
                                                "--repeat", str(repeat)],
                                         capture_output=True, text=True, env=env, check=True, cwd=tree)
                    d = json.loads(out.stdout.strip().splitlines()[-1])
                    for k in ("wall", "cpu"):
                        res[side][k] += d[k]
                    res[side]["peak"].append(d["peak"])
                    med[side] = {k: float(np.median(d[k])) for k in ("wall", "cpu")}
                for k in ratio:
                    ratio[k].append(med["before"][k] / med["after"][k])
            print(f"\n== OPENBLAS_NUM_THREADS={'(unset)' if blas == 'default' else blas}  ({load()})")
            for side in ("before", "after"):
                print(f"  {side:6s} wall {stats(res[side]['wall'])}")
                print(f"  {side:6s} CPU  {stats(res[side]['cpu'])}   peak traced "
                      f"{max(res[side]['peak']) / 2**20:.0f} MiB")
            for k in ratio:
                print(f"  ratio before/after, {k:4s} (per round): {stats(ratio[k], 'x')}")


def child(trials: int) -> None:
    """Fresh process: one warm-up, one timed run; print JSON with wall time and ru_maxrss."""
    from service.tolerance import run_tolerance
    doc, mask = setup()
    run_tolerance(doc, trials=100, frequencies_hz=F, mask=mask)
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    t0, c0 = time.perf_counter(), time.process_time()
    run_tolerance(doc, trials=trials, frequencies_hz=F, mask=mask)
    dt, dc = time.perf_counter() - t0, time.process_time() - c0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(json.dumps({"wall_s": dt, "cpu_s": dc, "maxrss_mib": peak / 1024, "before_mib": base / 1024}))


def fresh(trials: int, env_extra: dict | None = None) -> dict:
    env = dict(os.environ, **(env_extra or {}))
    out = subprocess.run([sys.executable, os.path.abspath(__file__), "--child", str(trials)], capture_output=True,
                         text=True, env=env, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def ngspice_time(doc, trials: int, repeat: int) -> list[float]:
    from service.realization import design_to_circuit
    from service.circuit import ElementKind, to_spice
    from service.tolerance import run_tolerance
    from tests.ngspice import NGSPICE, _HEAD, _ac_command, _insert_control
    r = run_tolerance(doc, trials=trials, frequencies_hz=F, include_trials=min(trials, 1000))
    vals = {ref: np.array([t["values"][ref] for t in r.trials]) for ref in r.trials[0]["values"]}
    ckt = design_to_circuit(doc).with_values(vals)
    varied = [el for el in ckt.elements if el.kind in (ElementKind.RESISTOR, ElementKind.CAPACITOR)]
    net = to_spice(ckt, ac=("dec", 125, 10.0, 100e3), trial=0)
    ac = _ac_command(net)
    control = list(_HEAD)
    for i in range(trials):
        control += [f"alter {el.name} = {float(el.value[i]):.17g}" for el in varied]
        control += [ac, "wrdata result.txt v(out)", "destroy all"]
    text = _insert_control(net, control)
    times = []
    with tempfile.TemporaryDirectory(prefix="bench-ngspice-") as tmp:
        path = os.path.join(tmp, "mc.cir")
        with open(path, "w") as fh:
            fh.write(text)
        for _ in range(repeat):
            res = os.path.join(tmp, "result.txt")
            if os.path.exists(res):
                os.remove(res)
            t0 = time.perf_counter()
            subprocess.run([NGSPICE, "-b", path], cwd=tmp, capture_output=True)
            times.append(time.perf_counter() - t0)
            with open(res) as fh:   # the run must have written every trial
                if sum(1 for line in fh if line.lstrip().startswith("frequency")) != trials:
                    raise RuntimeError("ngspice did not write every trial")
    return times


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--trials", type=int, default=10000)
    ap.add_argument("--spice-trials", type=int, default=500)
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--big", type=int, default=100000)
    ap.add_argument("--child", type=int, default=0)
    ap.add_argument("--compare", metavar="BEFORE", help="commit to time against --after, in one run")
    ap.add_argument("--after", default="HEAD")
    ap.add_argument("--rounds", type=int, default=8)
    ap.add_argument("--compare-child", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--tree", help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.child:
        child(a.child)
        return
    if a.compare_child:
        compare_child(a.trials, a.repeat)
        return
    if a.compare:
        compare(a.compare, a.after, a.rounds, a.repeat, a.trials)
        return
    from service.tolerance import run_tolerance
    doc, mask = setup()
    print(f"reference design, {a.trials} trials x {F.size} frequencies, OPENBLAS_NUM_THREADS="
          f"{os.environ.get('OPENBLAS_NUM_THREADS', '(unset)')}, {load()}")
    run_tolerance(doc, trials=200, frequencies_hz=F, mask=mask)
    times, cpu = timed_runs(doc, mask, a.trials, a.repeat)
    print("run_tolerance in-process: wall", stats(times))
    print("run_tolerance in-process: CPU ", stats(cpu), f"({load()})")
    tracemalloc.start()
    run_tolerance(doc, trials=a.trials, frequencies_hz=F, mask=mask)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    print(f"  peak traced memory {peak / 2**20:.1f} MiB")
    for label, env in (("default BLAS threads", None), ("OPENBLAS_NUM_THREADS=1", {"OPENBLAS_NUM_THREADS": "1"})):
        rs = [fresh(a.trials, env) for _ in range(3)]
        print(f"  fresh process ({label}): wall {stats([r['wall_s'] for r in rs])}; CPU {stats([r['cpu_s'] for r in rs])}; "
              f"ru_maxrss {max(r['maxrss_mib'] for r in rs):.0f} MiB (after import+warm-up "
              f"{min(r['before_mib'] for r in rs):.0f} MiB)")
    if a.big:
        rs = [fresh(a.big, {"OPENBLAS_NUM_THREADS": "1"}) for _ in range(2)]
        print(f"{a.big} trials, fresh process: wall {stats([r['wall_s'] for r in rs])}; "
              f"ru_maxrss {max(r['maxrss_mib'] for r in rs):.0f} MiB")
        tracemalloc.start()
        run_tolerance(doc, trials=a.big, frequencies_hz=F, mask=mask)
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
        print(f"  peak traced memory {peak / 2**20:.1f} MiB")
    st = ngspice_time(doc, a.spice_trials, max(3, a.repeat // 2))
    scale = a.trials / a.spice_trials
    print(f"ngspice .control/alter loop, {a.spice_trials} trials: {stats(st)}; scaled to {a.trials}: "
          f"{np.median(st) * scale:.2f} s")
    print(f"speed ratio (ngspice scaled / run_tolerance median): {np.median(st) * scale / np.median(times):.1f}x")


if __name__ == "__main__":
    main()
