"""A time limit for the computation of one request, checked cheaply inside long loops.

The caller (the HTTP layer, a benchmark, a test) opens a :func:`deadline`
around a computation; the computation calls :func:`check` once per chunk of
its long loops (trial chunks, frequency chunks, refinement passes). Past the
limit, :func:`check` raises :class:`DeadlineExceeded`, a computation error the
caller maps to its own answer (the service answers ``503`` with
``Retry-After``); the arrays of the abandoned computation are freed as the
exception unwinds.

The limit lives in a :class:`contextvars.ContextVar`, so each thread (or task)
has its own, and code that runs without one (a plain Python caller, the
tests of the engines) is never interrupted. Nothing here knows HTTP, and the
cost of a check is one context-variable read and one ``time.monotonic()``
call (about 0.1 us): one per chunk, never one per frequency point or trial.

A check ends a computation only at a chunk boundary: a single numpy call is
not interrupted, so the chunking of the loops (bounded by the memory limit)
also bounds how late the check can come.
"""

from __future__ import annotations

import time
from contextlib import contextmanager
from contextvars import ContextVar
from typing import Iterator

from service.errors import RolloffError

#: Absolute ``time.monotonic()`` value past which :func:`check` raises; None: no limit.
_LIMIT: ContextVar[tuple[float, float] | None] = ContextVar("rolloff_deadline", default=None)


class DeadlineExceeded(RolloffError, TimeoutError):
    """The computation ran past the time limit of its request.

    Parameters
    ----------
    seconds : float
        The limit that was set (s).
    where : str
        The loop that noticed (``"circuit.ac"``, ``"tolerance.montecarlo"`` ...).
    """

    def __init__(self, seconds: float, where: str):
        super().__init__(f"the computation did not finish within its time limit of {seconds:g} s "
                         f"(stopped in {where})")
        self.seconds = seconds
        self.where = where


@contextmanager
def deadline(seconds: float | None) -> Iterator[None]:
    """Limit the computations run inside the ``with`` block to ``seconds`` from now.

    Parameters
    ----------
    seconds : float or None
        Wall-clock seconds (> 0); None lifts any limit inside the block. A
        nested call can only shorten the limit in force, never extend it.
    """
    token = _LIMIT.set(_combine(_LIMIT.get(), seconds))
    try:
        yield
    finally:
        _LIMIT.reset(token)


def start(seconds: float | None):
    """Set the limit without a ``with`` block; returns the token for :func:`stop`.

    For frameworks whose request start and end are separate hooks.
    """
    return _LIMIT.set(_combine(_LIMIT.get(), seconds))


def stop(token) -> None:
    """Restore the limit in force before the matching :func:`start`."""
    _LIMIT.reset(token)


def _combine(current: tuple[float, float] | None, seconds: float | None) -> tuple[float, float] | None:
    if seconds is None:
        return None
    if not seconds > 0:
        raise ValueError(f"a deadline must be a positive number of seconds, got {seconds!r}")
    mine = (time.monotonic() + float(seconds), float(seconds))
    if current is not None and current[0] <= mine[0]:
        return current
    return mine


def remaining() -> float | None:
    """Seconds left before the limit (may be negative), or None without a limit."""
    limit = _LIMIT.get()
    return None if limit is None else limit[0] - time.monotonic()


def check(where: str) -> None:
    """Raise :class:`DeadlineExceeded` when the limit in force has passed.

    Parameters
    ----------
    where : str
        Short name of the calling loop, for the message and the server log.
    """
    limit = _LIMIT.get()
    if limit is not None and time.monotonic() > limit[0]:
        raise DeadlineExceeded(limit[1], where)


__all__ = ["DeadlineExceeded", "deadline", "start", "stop", "remaining", "check"]
