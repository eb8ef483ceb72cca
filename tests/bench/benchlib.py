"""Helpers shared by the benchmarks: the load average line, and two commits' trees for a same-run comparison."""

from __future__ import annotations

import os
import statistics
import shutil
import subprocess
import time

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def load() -> str:
    """``"load average 0.12 0.40 0.75"`` (1, 5 and 15 minutes)."""
    return "load average " + " ".join(f"{x:.2f}" for x in os.getloadavg())


def extract_trees(before: str, after: str, tmp: str,
                  packages: tuple[str, ...] = ("service/circuit", "service/tolerance")) -> tuple[str, str]:
    """``git archive`` AFTER whole into tmp/after and again into tmp/before with ``packages`` (folders or files) of BEFORE.

    Returns
    -------
    (before_tree, after_tree) : tuple of str
    """
    trees = {}
    for name in ("after", "before"):
        path = os.path.join(tmp, name)
        os.makedirs(path)
        subprocess.run(f"git -C {ROOT} archive {after} service tests | tar -x -C {path}", shell=True, check=True)
        trees[name] = path
    for pkg in packages:
        path = os.path.join(trees["before"], pkg)
        if os.path.isdir(path):
            shutil.rmtree(path)
        elif os.path.exists(path):
            os.remove(path)
        subprocess.run(f"git -C {ROOT} archive {before} {pkg} | tar -x -C {trees['before']}", shell=True, check=True)
    return trees["before"], trees["after"]


def measure(fn, repeats: int, *, quick: bool = False, warm: bool = False) -> tuple[list[float], list[float]]:
    """Wall and CPU milliseconds of ``repeats`` calls of ``fn`` (a third of them, at least 5, when
    ``quick``; after one warming call when ``warm``)."""
    if quick:
        repeats = max(5, repeats // 3)
    if warm:
        fn()
    wall, cpu = [], []
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        c1, t1 = time.process_time(), time.perf_counter()
        wall.append((t1 - t0) * 1e3)
        cpu.append((c1 - c0) * 1e3)
    return wall, cpu


def _stats(ms: list[float]) -> str:
    q = statistics.quantiles(ms, n=4)
    return (f"median {statistics.median(ms):8.2f}  IQR {q[0]:7.2f}-{q[2]:7.2f}  "
            f"min {min(ms):7.2f}  max {max(ms):7.2f}")


def report(name: str, times: tuple[list[float], list[float]]) -> None:
    """Print the median, IQR, min and max of the wall and CPU times of :func:`measure`."""
    wall, cpu = times
    print(f"{name}  (n={len(wall)}, ms)")
    print(f"    wall {_stats(wall)}")
    print(f"    cpu  {_stats(cpu)}")
