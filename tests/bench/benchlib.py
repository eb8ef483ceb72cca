"""Helpers shared by the benchmarks: the load average line, and two commits' trees for a same-run comparison."""

from __future__ import annotations

import os
import shutil
import subprocess

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
