"""Admission of a request to computation: whole body first, then a compute slot, within a deadline.

Every request with a body has it read in full (:func:`service.api.body.read_body`:
size limit, read deadline) before anything else happens, so a client that
drips its body holds one thread of a worker and no compute slot. Requests to
computing endpoints then take one of the worker's ``compute_slots`` (a
semaphore per process; threads beyond it wait, at most ``compute_queue`` of
them, the others get 503 at once), and run under the request deadline
(:mod:`service.deadline`), counted from the end of the body, queueing
included: a computation that overruns is stopped at its next chunk with a 503.

Exempt from slots and deadline, so that they answer while every slot
computes: ``/healthz``, ``/readyz``, ``/metrics``, the catalog, the OpenAPI
document and the documentation pages.
"""

from __future__ import annotations

import threading

from flask import Flask, g, request

from service import deadline
from service.api.body import read_body
from service.api.problems import ProblemException, retry_after_s
from service.config import Settings

#: Paths answered without a compute slot or deadline (cheap, and what an orchestrator probes).
EXEMPT_PATHS = frozenset({"/healthz", "/readyz", "/metrics", "/v1/catalog", "/v1/openapi.json"})
EXEMPT_PREFIXES = ("/docs",)
_BODY_METHODS = frozenset({"POST", "PUT", "PATCH", "DELETE"})


def is_exempt(path: str) -> bool:
    """Whether ``path`` is answered without a compute slot."""
    return path in EXEMPT_PATHS or path.startswith(EXEMPT_PREFIXES)


class ComputeSlots:
    """The compute slots of one process and the queue in front of them.

    Parameters
    ----------
    slots : int
        Requests computed at once (>= 1).
    queue : int
        Requests allowed to wait for a slot (>= 0); more are refused.
    """

    def __init__(self, slots: int, queue: int):
        self._sem = threading.BoundedSemaphore(max(1, int(slots)))
        self._lock = threading.Lock()
        self._waiting = 0
        self.queue = max(0, int(queue))

    @property
    def waiting(self) -> int:
        """Requests waiting for a slot now."""
        return self._waiting

    def acquire(self, timeout_s: float | None) -> str | None:
        """Take a slot, waiting at most ``timeout_s``; None on success, else why not (``"queue"``, ``"timeout"``)."""
        if self._sem.acquire(blocking=False):
            return None
        with self._lock:
            if self._waiting >= self.queue:
                return "queue"
            self._waiting += 1
        try:
            ok = self._sem.acquire(timeout=max(0.0, timeout_s) if timeout_s is not None else None)
        finally:
            with self._lock:
                self._waiting -= 1
        return None if ok else "timeout"

    def release(self) -> None:
        self._sem.release()


def _busy(why: str, settings: Settings) -> ProblemException:
    if why == "queue":
        detail = (f"Every compute slot of this worker is taken and {settings.compute_queue} requests already "
                  "wait for one (ROLLOFF_COMPUTE_SLOTS, ROLLOFF_COMPUTE_QUEUE); retry later.")
    else:
        detail = (f"No compute slot became free within the request time limit of {settings.request_deadline_s:g} s "
                  "(ROLLOFF_REQUEST_DEADLINE_S); retry later.")
    return ProblemException(503, detail, slug="busy", title="Service Busy",
                            headers={"Retry-After": str(retry_after_s())})


def install(app: Flask, settings: Settings) -> ComputeSlots:
    """Register the body-read, slot and deadline hooks on ``app``.

    Returns
    -------
    ComputeSlots
        Also stored as ``app.extensions["rolloff_slots"]``.
    """
    slots = ComputeSlots(settings.compute_slots, settings.compute_queue)
    app.extensions["rolloff_slots"] = slots

    @app.before_request
    def _admit() -> None:
        environ = request.environ
        if request.method in _BODY_METHODS or environ.get("CONTENT_LENGTH") \
                or environ.get("HTTP_TRANSFER_ENCODING"):
            read_body(environ, max_bytes=settings.max_body_bytes, timeout_s=settings.body_timeout_s)
        if is_exempt(request.path) or request.method == "OPTIONS":
            return
        g._rolloff_deadline = deadline.start(settings.request_deadline_s)
        why = slots.acquire(deadline.remaining())
        if why is not None:
            raise _busy(why, settings)
        g._rolloff_slot = True

    @app.teardown_request
    def _leave(exc) -> None:
        if g.pop("_rolloff_slot", False):
            slots.release()
        token = g.pop("_rolloff_deadline", None)
        if token is not None:
            deadline.stop(token)

    return slots
