"""A bound on the C allocator's per-thread memory pools of a worker process.

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
"""

from __future__ import annotations

import ctypes

#: ``M_ARENA_MAX`` of glibc's ``<malloc.h>``.
M_ARENA_MAX = -8


def limit_arenas(count: int) -> bool:
    """Cap the allocator's arenas at ``count`` (>= 1); True when the C library took the setting.

    Parameters
    ----------
    count : int
        Largest number of malloc arenas of this process (and of the processes it forks afterwards).
    """
    if count < 1:
        raise ValueError(f"count must be >= 1, got {count}")
    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):          # not glibc: no mallopt to call
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    return mallopt(M_ARENA_MAX, int(count)) == 1


__all__ = ["limit_arenas", "M_ARENA_MAX"]
