"""Benchmark of the circuit engine against ngspice on the STACK-NOTES reference circuit.

Eighth-order Butterworth lowpass (1 kHz) as four unity-gain Sallen-Key
stages, 501 log-spaced frequencies from 10 Hz to 100 kHz, Gaussian part
values with sigma = 1 % (R) and sigma = 5 % (C) -- the percentages are the
standard deviation, not a 3-sigma tolerance.

Run:  python tests/bench/bench_circuit.py [--trials 10000] [--spice-trials 1000] [--repeat 7]
      python tests/bench/bench_circuit.py --compare BEFORE [--after HEAD] [--rounds 8] [--repeat 5]

Prints, per op-amp model (ideal, 10 MHz macromodel): the engine's wall and
CPU time (``time.process_time``) for all trials (median, IQR, min, max over
repeats, after one warm-up call), peak traced memory, ngspice's wall time
for --spice-trials trials of a ``.control`` script that alters every part
and reruns ``ac`` per trial (scaled linearly to the engine's trial count),
the speed ratio, and the largest difference between the two on the same part
values.  The load average is printed with the figures.

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
# a --compare child imports the engine from the tree it is given
TREE = sys.argv[sys.argv.index("--tree") + 1] if "--tree" in sys.argv else ROOT
sys.path.insert(0, TREE)

from service.circuit import ElementKind, ac_response, to_spice  # noqa: E402
from tests.circuit.builders import MACRO, butterworth8_sallen_key  # noqa: E402

F = np.logspace(1, 5, 501)   # = ngspice "ac dec 125 10 100k"


def stats(xs, unit: str = " s") -> str:
    xs = np.asarray(xs)
    q1, med, q3 = np.percentile(xs, [25, 50, 75])
    return (f"median {med:.4f}{unit}  IQR {q3 - q1:.4f}{unit}  min {xs.min():.4f}{unit}  max {xs.max():.4f}{unit}  "
            f"(n={xs.size})")


def time_engine(ckt, repeat: int, method: str = "auto"):
    """Wall and CPU times (s) of ``repeat`` calls after a warm-up, the traced peak (bytes) and the last result."""
    ac_response(ckt.trial(0), F)      # warm-up: lazy imports of scipy.sparse / scipy.optimize
    wall, cpu = [], []
    h = None
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        h = ac_response(ckt, F, method=method)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    tracemalloc.start()
    ac_response(ckt, F, method=method)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return wall, cpu, peak, h


def ngspice_monte_carlo(ckt, trials: int, repeat: int):
    """Time ngspice on the first ``trials`` trials (subprocess wall time only); return times and results."""
    from tests.ngspice import NGSPICE, _HEAD, _ac_command, _complex_columns, _insert_control
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
            proc = subprocess.run([NGSPICE, "-b", path], cwd=tmp, capture_output=True, text=True)
            times.append(time.perf_counter() - t0)
            if not os.path.exists(res):   # ngspice -b exits 1 when the netlist has no .print; the file is what counts
                raise RuntimeError(f"ngspice wrote no result:\n{proc.stdout[-2000:]}\n{proc.stderr[-2000:]}")
        raw = np.loadtxt(res, comments=None, usecols=(0, 1, 2),
                         converters=None, skiprows=0, dtype=str)
    rows = raw[raw[:, 0] != "frequency"].astype(float)
    tables = rows.reshape(trials, F.size, 3)
    h = np.stack([_complex_columns(t, ("out",))["out"] for t in tables])
    np.testing.assert_allclose(tables[0][:, 0], F, rtol=1e-12)
    return times, h


MODELS = {"ideal": None, "macro": MACRO}


def child(model: str, trials: int, repeat: int) -> None:
    """One side of --compare: time the engine in this process (tree ``TREE``), print JSON."""
    ckt = butterworth8_sallen_key(MODELS[model], trials=trials, seed=2024)
    wall, cpu, peak, _ = time_engine(ckt, repeat)
    print(json.dumps({"wall": wall, "cpu": cpu, "peak": peak}))


def compare(before: str, after: str, rounds: int, repeat: int, trials: int, cmd: list[str]) -> None:
    """Alternate fresh processes of the two trees; print each side's times and the before/after ratios."""
    print(f"compare {before} (before) with {after} (after), {rounds} rounds x {repeat} timed calls, "
          f"{trials} trials x {F.size} frequencies; {load()}")
    with tempfile.TemporaryDirectory(prefix="bench-compare-") as tmp:
        tb, ta = extract_trees(before, after, tmp)
        for blas in ("default", "1"):
            env = dict(os.environ)
            env.pop("OPENBLAS_NUM_THREADS", None)
            if blas == "1":
                env["OPENBLAS_NUM_THREADS"] = "1"
            for model in MODELS:
                res = {"before": {"wall": [], "cpu": [], "peak": []}, "after": {"wall": [], "cpu": [], "peak": []}}
                ratio = {"wall": [], "cpu": []}
                for r in range(rounds):
                    med = {}
                    order = (("before", tb), ("after", ta)) if r % 2 == 0 else (("after", ta), ("before", tb))
                    for side, tree in order:
                        out = subprocess.run(cmd + ["--child", model, "--tree", tree, "--trials", str(trials),
                                                    "--repeat", str(repeat)],
                                             capture_output=True, text=True, env=env, check=True, cwd=tree)
                        d = json.loads(out.stdout.strip().splitlines()[-1])
                        for k in ("wall", "cpu"):
                            res[side][k] += d[k]
                        res[side]["peak"].append(d["peak"])
                        med[side] = {k: float(np.median(d[k])) for k in ("wall", "cpu")}
                    for k in ratio:
                        ratio[k].append(med["before"][k] / med["after"][k])
                print(f"\n== {model} op-amps, OPENBLAS_NUM_THREADS={'(unset)' if blas == 'default' else blas}  "
                      f"({load()})")
                for side in ("before", "after"):
                    print(f"  {side:6s} wall {stats(res[side]['wall'])}")
                    print(f"  {side:6s} CPU  {stats(res[side]['cpu'])}   peak traced "
                          f"{max(res[side]['peak']) / 2**20:.0f} MiB")
                for k in ratio:
                    print(f"  ratio before/after, {k:4s} (per round): {stats(ratio[k], 'x')}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=10_000)
    ap.add_argument("--spice-trials", type=int, default=1_000)
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--spice-repeat", type=int, default=3)
    ap.add_argument("--full-trials", type=int, default=500, help="trials for the full-MNA cross-check")
    ap.add_argument("--compare", metavar="BEFORE", help="commit to time against --after, in one run")
    ap.add_argument("--after", default="HEAD")
    ap.add_argument("--rounds", type=int, default=8)
    ap.add_argument("--child", choices=sorted(MODELS), help=argparse.SUPPRESS)
    ap.add_argument("--tree", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        child(args.child, args.trials, args.repeat)
        return
    if args.compare:
        compare(args.compare, args.after, args.rounds, args.repeat, args.trials,
                [sys.executable, os.path.abspath(__file__)])
        return
    print(f"numpy {np.__version__}, {os.cpu_count()} CPUs, {args.trials} trials x {F.size} frequencies")
    for label, model in (("ideal op-amps", None), ("macromodel op-amps (GBW 10 MHz, A0 1e5)", MACRO)):
        ckt = butterworth8_sallen_key(model, trials=args.trials, seed=2024)
        times, cpu, peak, h = time_engine(ckt, args.repeat)
        med = float(np.median(times))
        print(f"\n== {label}  ({load()})")
        print(f"engine  {args.trials} trials: wall {stats(times)}")
        print(f"engine  {args.trials} trials: CPU  {stats(cpu)}")
        print(f"engine  peak traced memory {peak / 2**20:.1f} MiB (result array {h.nbytes / 2**20:.1f} MiB included); "
              f"process max RSS so far {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MiB")
        sp_times, h_sp = ngspice_monte_carlo(ckt, args.spice_trials, args.spice_repeat)
        scale = args.trials / args.spice_trials
        sp_med = float(np.median(sp_times)) * scale
        print(f"ngspice {args.spice_trials} trials: {stats(sp_times)}")
        print(f"ngspice scaled to {args.trials} trials (x{scale:g}): {sp_med:.3f} s")
        print(f"speed ratio ngspice/engine: {sp_med / med:.1f}x")
        r = h_sp / h[: args.spice_trials]
        print(f"agreement with ngspice on the same parts: max |dB| {np.max(np.abs(20 * np.log10(np.abs(r)))):.2e}, "
              f"max |deg| {np.max(np.abs(np.angle(r, deg=True))):.2e}")
        sub = ckt.with_values({el.name: el.value[: args.full_trials] for el in ckt.elements
                               if isinstance(el.value, np.ndarray)})
        hf = ac_response(sub, F, method="full")
        r = hf / h[: args.full_trials]
        print(f"staged vs full MNA solve ({args.full_trials} trials): max |dB| "
              f"{np.max(np.abs(20 * np.log10(np.abs(r)))):.2e}, max |deg| {np.max(np.abs(np.angle(r, deg=True))):.2e}")
    print(f"\nprocess max RSS at the end (includes the ngspice result parsing and full-MNA check) "
          f"{resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MiB")


if __name__ == "__main__":
    main()
