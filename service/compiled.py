"""Compiled loops: the one place that configures numba for the service.

Three inner loops of the Monte Carlo analysis are compiled with numba (LLVM,
before their first call): the exact order-statistic selection of the
percentile stores (:mod:`service.tolerance.selection`), the element-wise
steps of the polar evaluation (:mod:`service.circuit.polarkernels`) and the
scan for each trial's half-power crossing (:mod:`service.tolerance.figures`).
Each replaces a chain of numpy passes over memory by one loop over a row held
in cache; each was measured against its numpy form before adoption (see
DEVELOPERS.md, "Compiled loops") and gives the same bits.

Why numba: its wheels carry their own LLVM, so a fresh Debian with its
system Python installs it without a compiler or Python headers (a C
extension would need both), and the kernels stay readable Python.

Rules for a kernel (:func:`kernel`):

* ``nogil`` and no ``parallel``: a worker computes on one core; the workers
  are the parallelism (as with one BLAS thread).
* No ``fastmath``: every operation is the IEEE one numpy does, in the same
  order, with no fused multiply-add contraction -- a kernel gives the bits
  of the numpy expression it replaces, which the tests check.
* ``error_model="numpy"``: a division by zero gives inf/NaN, as in numpy.

Compiled code is cached on disk (numba's ``cache=True``) where a writable
place exists: ``NUMBA_CACHE_DIR`` when set, else beside the sources (a
checkout, a virtual environment).  Without one (a read-only image whose
``NUMBA_CACHE_DIR`` is unset) the kernels are compiled in memory once per
process.  :func:`warm` compiles (or loads) every kernel for the types the
service calls it with; the WSGI entry point calls it in gunicorn's master
before the workers fork, so no request waits for the compiler.
"""

from __future__ import annotations

import os
import tempfile
import time
from typing import Callable

import numba
import numba.core.config


def _cache_writable() -> bool:
    """Whether numba can keep compiled code on disk: its cache folder (``NUMBA_CACHE_DIR``, as numba read it;
    made if missing) or else the package's own folder is writable (numba's own test: a temporary file in it)."""
    place = numba.core.config.CACHE_DIR or os.path.dirname(os.path.abspath(__file__))
    try:
        os.makedirs(place, exist_ok=True)
        with tempfile.TemporaryFile(dir=place):
            return True
    except OSError:
        return False


#: Whether compiled kernels are cached on disk (else compiled once per process).
CACHE = _cache_writable()

_WARMERS: list[Callable[[], None]] = []


def kernel(fn: Callable) -> Callable:
    """Compile ``fn`` with the service's settings (see the module notes)."""
    return numba.njit(cache=CACHE, nogil=True, boundscheck=False, error_model="numpy", fastmath=False)(fn)


def warms(fn: Callable[[], None]) -> Callable[[], None]:
    """Register ``fn`` (no arguments) as a warm-up: it calls its module's kernels once with every argument type
    the service uses, on small arrays."""
    _WARMERS.append(fn)
    return fn


def warm() -> float:
    """Compile or load every kernel for the types the service uses; returns the seconds it took."""
    import service.circuit.polarkernels  # noqa: F401  (registers its warm-up)
    import service.tolerance.figures  # noqa: F401
    import service.tolerance.selection  # noqa: F401
    t0 = time.perf_counter()
    for fn in _WARMERS:
        fn()
    return time.perf_counter() - t0


__all__ = ["kernel", "warms", "warm", "CACHE"]
