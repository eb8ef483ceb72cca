"""A bound on the C allocator's per-thread memory pools of a worker process, and where it keeps freed memory.

glibc's ``malloc`` gives threads their own arenas (up to eight per core by
default) and keeps memory freed in an arena for that arena's later use. A
gthread worker runs each request on any of its ``ROLLOFF_THREADS`` threads, so
the large numpy arrays of successive heavy requests (a 10,000-trial Monte
Carlo's stores are about 60 MB) end up freed in different arenas and the
worker's resident memory grows towards one request's peak per arena (measured
here: a worker's peak RSS rose from 197 to 310 MiB over 16 identical
tolerance requests; with one arena it stayed at 202 MiB, with two it rose to
246 MiB). Only ``ROLLOFF_COMPUTE_SLOTS`` threads compute at once, so that many
arenas are enough: the other threads (reading bodies, answering health
checks) make small allocations, and share them.

The cap is glibc's ``mallopt(M_ARENA_MAX, n)`` (``mallopt(3)``, GNU C Library
manual, "Malloc Tunable Parameters"), set in the gunicorn master before the
app is preloaded and inherited by the forked workers. Elsewhere (another C
library) nothing is changed.

The same master fixes the mmap and trim thresholds (:func:`keep_freed_memory`).
By default glibc serves a block above 128 kB (a threshold it raises as blocks
are freed, and trims the heap's top above twice that) with its own ``mmap``
and returns it on ``free``: numpy's working arrays of a few hundred kB, made
and freed chunk after chunk in a Monte Carlo sweep, then cost a page fault per
4 kB page every time -- measured here at 2-5x the arithmetic they hold. With
fixed thresholds (blocks up to 32 MiB from the heap, the heap's top given back
above 256 MiB) such blocks are reused, and a worker keeps at most 256 MiB of
freed memory beyond its live data.

The trim threshold lies above the Monte Carlo's store budget (160 MiB,
``service.tolerance.montecarlo.STORE_BUDGET_BYTES``) and a chunk's working
arrays: the stores of one request, freed at its end, stay in the heap for the
next one.  With the heap's top given back above 64 MiB, the reference
10,000-trial tolerance run (three stores of 20 MB) faulted about 5,000 pages
in again on every run, 13-17 ms of system time in a run of about 200 ms
(measured here); above 128 MiB, fewer than ten.  A worker's resident memory
then stays at its peak between requests instead of falling back: the peak,
bounded by the request limits, is what a container must be sized for anyway.
"""

from __future__ import annotations

import ctypes

#: ``M_ARENA_MAX``, ``M_MMAP_THRESHOLD`` and ``M_TRIM_THRESHOLD`` of glibc's ``<malloc.h>``.
M_ARENA_MAX = -8
M_MMAP_THRESHOLD = -3
M_TRIM_THRESHOLD = -1
#: Largest block served from the heap (glibc accepts at most 32 MiB on 64-bit machines).
MMAP_THRESHOLD_BYTES = 32 * 2**20
#: Free memory at the heap's top above which it is given back to the system.
TRIM_THRESHOLD_BYTES = 256 * 2**20


def _mallopt():
    """glibc's ``mallopt`` with its signature, or None (another C library)."""
    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):          # not glibc: no mallopt to call
        return None
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    return mallopt


def limit_arenas(count: int) -> bool:
    """Cap the allocator's arenas at ``count`` (>= 1); True when the C library took the setting.

    Parameters
    ----------
    count : int
        Largest number of malloc arenas of this process (and of the processes it forks afterwards).
    """
    if count < 1:
        raise ValueError(f"count must be >= 1, got {count}")
    mallopt = _mallopt()
    return mallopt is not None and mallopt(M_ARENA_MAX, int(count)) == 1


def keep_freed_memory(mmap_threshold: int = MMAP_THRESHOLD_BYTES, trim_threshold: int = TRIM_THRESHOLD_BYTES) -> bool:
    """Serve blocks up to ``mmap_threshold`` bytes from the heap and trim it above ``trim_threshold`` bytes.

    True when the C library took both settings (glibc); see the module notes.
    """
    mallopt = _mallopt()
    if mallopt is None:
        return False
    return mallopt(M_MMAP_THRESHOLD, int(mmap_threshold)) == 1 and mallopt(M_TRIM_THRESHOLD, int(trim_threshold)) == 1


__all__ = ["limit_arenas", "keep_freed_memory", "M_ARENA_MAX", "MMAP_THRESHOLD_BYTES", "TRIM_THRESHOLD_BYTES"]
