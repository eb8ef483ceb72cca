"""Benchmark of the Monte Carlo percentiles: the selection of a git revision against this tree's, in one run.

Three frequency-major (``--columns`` x ``--trials``) float32 stores, as the
sweep keeps them (log10 power, relative phase, group delay): the saved stores
of a real run (``--stores PATH.npz``, arrays ``arr_0 .. arr_2``) or, by
default, stores shaped like them: each frequency normal with its own mean and
spread (log10 power 0 .. -32 with spreads 1e-5 .. 0.05, phase about 0 with
spreads 5e-4 .. 0.07, delay 1e-7 .. 1.5e-3 s with spreads 1e-9 .. 4e-5 s),
and every 50th frequency lopsided (lognormal).  Timed, alternating repeat by
repeat after a warm-up (and the compilation), with one BLAS thread, wall ms
for all three stores:

- before: ``row_percentiles`` of the statistics module of ``--before`` (a git
  revision, default ``main``, imported from its source) on each store;
- after: ``row_percentiles`` of this tree on each store (read in place);
- the same two on trial-major copies of the stores (``column_percentiles``:
  the columns copied a slab at a time).

Prints the median, IQR, min and max of each, the ratio of the medians and the
median (IQR) of the per-repeat ratios, and whether both gave the same bits.
The load average is printed with the figures: on a shared machine compare
only figures taken in one run.

Run:  python tests/bench/bench_percentiles.py [--repeat 31] [--trials 10000] [--columns 501] [--before main]
                                              [--stores PATH.npz]
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import statistics
import subprocess
import sys
import tempfile
import time

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from benchlib import ROOT, load  # noqa: E402

sys.path.insert(0, ROOT)
from service.tolerance import statistics as after  # noqa: E402


def stores(trials: int, columns: int, seed: int = 1) -> list[np.ndarray]:
    """Three (columns, trials) float32 C-contiguous stores shaped like the sweep's (see the module notes)."""
    rng = np.random.default_rng(seed)
    shapes = ((np.linspace(0.0, -32.0, columns), np.logspace(-5, -1.3, columns)),
              (np.zeros(columns), np.logspace(-3.3, -1.15, columns)),
              (np.logspace(-7, -2.8, columns), np.logspace(-9, -4.4, columns)))
    out = []
    for mean, spread in shapes:
        x = rng.standard_normal((columns, trials)) * spread[:, None] + mean[:, None]
        x[::50] = mean[::50, None] + spread[::50, None] * rng.lognormal(0.0, 1.0, (len(range(0, columns, 50)), trials))
        out.append(np.ascontiguousarray(x, dtype=np.float32))
    return out


def module_at(revision: str, tmp: str):
    """``service/tolerance/statistics.py`` of a git revision, imported as a stand-alone module."""
    source = subprocess.run(["git", "-C", ROOT, "show", f"{revision}:service/tolerance/statistics.py"],
                            check=True, capture_output=True, text=True).stdout
    path = os.path.join(tmp, "statistics_before.py")
    with open(path, "w") as fh:
        fh.write(source)
    spec = importlib.util.spec_from_file_location("statistics_before", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def line(name: str, ms: list[float]) -> str:
    q = statistics.quantiles(ms, n=4)
    return (f"{name:56s} median {statistics.median(ms):7.2f} ms  IQR {q[0]:7.2f}-{q[2]:7.2f}  "
            f"min {min(ms):7.2f}  max {max(ms):7.2f}  (n={len(ms)})")


def ratio(before: list[float], after: list[float]) -> str:
    per = [a / b for a, b in zip(before, after)]
    q = statistics.quantiles(per, n=4)
    return (f"{statistics.median(before) / statistics.median(after):.2f} (medians); per repeat median "
            f"{statistics.median(per):.2f}, IQR {q[0]:.2f}-{q[2]:.2f}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=31)
    ap.add_argument("--trials", type=int, default=10000)
    ap.add_argument("--columns", type=int, default=501)
    ap.add_argument("--before", default="main", help="git revision of the selection to compare against")
    ap.add_argument("--stores", help="saved stores (.npz, arr_0 .. arr_2, each (columns, trials))")
    args = ap.parse_args()

    if args.stores:
        with np.load(args.stores) as z:
            rows = [np.ascontiguousarray(z[k]) for k in ("arr_0", "arr_1", "arr_2")]
        source = f"saved stores {os.path.basename(args.stores)}"
    else:
        rows = stores(args.trials, args.columns)
        source = "synthetic stores"
    trial_major = [np.ascontiguousarray(r.T) for r in rows]
    with tempfile.TemporaryDirectory() as tmp:
        before = module_at(args.before, tmp)
    paths = {
        f"before: row_percentiles ({args.before})": lambda: [before.row_percentiles(r) for r in rows],
        "after: row_percentiles": lambda: [after.row_percentiles(r) for r in rows],
        f"before: column_percentiles, trial-major ({args.before})":
            lambda: [before.column_percentiles(t) for t in trial_major],
        "after: column_percentiles, trial-major": lambda: [after.column_percentiles(t) for t in trial_major],
    }
    results = {name: fn() for name, fn in paths.items()}        # warm-up (and compilation)
    same = all(np.array_equal(a, b) for res in results.values() for a, b in zip(res, results[next(iter(paths))]))
    same &= all(np.array_equal(after.sorted_percentiles(np.sort(r, axis=1)), p)
                for r, p in zip(rows, results["after: row_percentiles"]))
    times: dict[str, list[float]] = {k: [] for k in paths}
    for _ in range(args.repeat):
        for name, fn in paths.items():
            t0 = time.perf_counter()
            fn()
            times[name].append((time.perf_counter() - t0) * 1e3)

    shape = rows[0].shape
    print(f"{source}: three {shape} {rows[0].dtype}, numpy {np.__version__}, "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')}, {load()}")
    for name, ms in times.items():
        print(line(name, ms))
    b_rows, a_rows, b_cols, a_cols = (times[k] for k in paths)
    print(f"ratio before/after, frequency-major: {ratio(b_rows, a_rows)}")
    print(f"ratio before/after, trial-major:     {ratio(b_cols, a_cols)}")
    print(f"same bits (both paths, both layouts, and sorted_percentiles of np.sort): {same}")


if __name__ == "__main__":
    main()
