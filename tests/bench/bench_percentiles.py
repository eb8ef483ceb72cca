"""Benchmark of the Monte Carlo percentiles: the row path before against the column path, in one run.

A store of ``--trials`` x ``--columns`` float32 values shaped like the sweep's
figures: each column normal with its own mean (-80 .. 0) and spread (0.01 ..
3), and every 50th column lopsided (lognormal, sigma 1).  Timed, alternating
repeat by repeat after a warm-up, with one BLAS thread:

- before: ``row_percentiles`` of the statistics module of ``--before`` (a git
  revision, default ``main``) on ``store.T`` copied to a frequency-major array
  (what the sweep's transposed stores cost), and the same selection alone on
  an array transposed once beforehand;
- after: ``column_percentiles(store)``, and ``row_percentiles`` on the
  frequency-major array (the same selection, read in place).

Prints the median, IQR, min and max of each (wall ms), the ratio of the
medians and the median of the per-repeat ratios, and whether both paths gave
the same bits.  The load average is printed with the figures: on a
shared machine compare only figures taken in one run.

Run:  python tests/bench/bench_percentiles.py [--repeat 31] [--trials 10000] [--columns 501] [--before main]
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


def store(trials: int, columns: int, seed: int = 1) -> np.ndarray:
    """(trials, columns) float32, C-contiguous, as the sweep fills it (``store[t0:t1, :] = chunk``)."""
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((trials, columns)) * np.logspace(-2, 0.5, columns) + np.linspace(-80, 0, columns)
    x[:, ::50] = rng.lognormal(0.0, 1.0, (trials, len(range(0, columns, 50))))
    return np.ascontiguousarray(x, dtype=np.float32)


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
    return (f"{name:44s} median {statistics.median(ms):7.2f} ms  IQR {q[0]:7.2f}-{q[2]:7.2f}  "
            f"min {min(ms):7.2f}  max {max(ms):7.2f}  (n={len(ms)})")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeat", type=int, default=31)
    ap.add_argument("--trials", type=int, default=10000)
    ap.add_argument("--columns", type=int, default=501)
    ap.add_argument("--before", default="main", help="git revision of the row path")
    args = ap.parse_args()

    x = store(args.trials, args.columns)
    with tempfile.TemporaryDirectory() as tmp:
        before = module_at(args.before, tmp)
    rows = np.ascontiguousarray(x.T)
    paths = {
        f"before: store.T copy + row_percentiles ({args.before})":
            lambda: before.row_percentiles(np.ascontiguousarray(x.T)),
        f"before: row_percentiles alone ({args.before})": lambda: before.row_percentiles(rows),
        "after: column_percentiles(store)": lambda: after.column_percentiles(x),
        "after: row_percentiles alone": lambda: after.row_percentiles(rows),
    }
    same = np.array_equal(before.row_percentiles(rows), after.column_percentiles(x))
    times: dict[str, list[float]] = {k: [] for k in paths}
    for fn in paths.values():                             # warm-up
        fn()
    for _ in range(args.repeat):
        for name, fn in paths.items():
            t0 = time.perf_counter()
            fn()
            times[name].append((time.perf_counter() - t0) * 1e3)

    print(f"store ({args.trials}, {args.columns}) float32, numpy {np.__version__}, "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')}, {load()}")
    for name, ms in times.items():
        print(line(name, ms))
    first, alone, new, new_rows = (times[k] for k in paths)
    print(f"ratio before/after (medians): {statistics.median(first) / statistics.median(new):.2f} "
          f"store.T copy + rows against column_percentiles (median of per-repeat ratios "
          f"{statistics.median(a / b for a, b in zip(first, new)):.2f}); "
          f"{statistics.median(alone) / statistics.median(new_rows):.2f} row_percentiles against row_percentiles")
    print(f"same bits: {same}")


if __name__ == "__main__":
    main()
