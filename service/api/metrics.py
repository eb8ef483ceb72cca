"""Prometheus metrics: ``GET /metrics`` in the Prometheus text exposition format.

Series:

``rolloff_http_requests_total{method, endpoint, status}``
    Requests answered. ``endpoint`` is the URL rule (``/v1/values/nearest``),
    never the raw path, so the label set stays bounded; requests that match
    no rule (404, 405) are counted under ``endpoint="<unmatched>"``.
``rolloff_http_request_duration_seconds{method, endpoint, status}``
    Histogram of the time from the first request hook to the response.
``rolloff_monte_carlo_trials_total``
    Monte Carlo trials computed (the tolerance view calls :func:`count_trials`).

Under gunicorn with several workers, ``PROMETHEUS_MULTIPROC_DIR`` (set by
``rolloff serve`` and by the container image) makes prometheus_client keep
each process's values in a memory-mapped file of that folder; any worker
answering ``/metrics`` then sums the files of all workers, live and dead, so
counters never step back when a worker is recycled. The gunicorn config
(``child_exit``) does the bookkeeping of dead workers. Without the variable
(tests, a single process) the values live in a registry private to the app.

``/metrics`` needs no API key and is not in the OpenAPI document (it is an
operations endpoint): bind the service to an internal interface or firewall
``/metrics`` from the outside.

A full metrics folder degrades the metrics, never the service.
prometheus_client grows its memory-mapped files by truncating them (a
sparse file): on a full file system the first write to a new page would be a
SIGBUS, killing the worker in a loop. The files are therefore given real
blocks first (``posix_fallocate``), which fails cleanly with ENOSPC; on any
error writing a metric the process stops recording, logs it once, and
``/metrics`` reports ``rolloff_metrics_degraded 1`` beside whatever the
files still hold.

References
----------
.. [1] Prometheus, "Exposition formats" (text format 0.0.4) and the
       prometheus_client documentation, "Multiprocess mode (e.g. Gunicorn)".
"""

from __future__ import annotations

import logging
import operator
import os
import time

from flask import Flask, Response, current_app, g, has_app_context, request
from prometheus_client import (CONTENT_TYPE_LATEST, CollectorRegistry, Counter, Histogram, disable_created_metrics,
                               generate_latest)
from prometheus_client import mmap_dict, multiprocess, values

from service.config import Settings

UNMATCHED = "<unmatched>"

log = logging.getLogger("rolloff.metrics")


def _allocate(fd: int, size: int) -> None:
    """Give ``fd`` real blocks up to ``size`` bytes (ENOSPC now rather than SIGBUS later)."""
    try:
        os.posix_fallocate(fd, 0, size)
    except OSError as exc:
        if exc.errno not in (95, 22):  # EOPNOTSUPP, EINVAL: a file system without fallocate
            raise
        current = os.fstat(fd).st_size
        if current < size:
            os.pwrite(fd, b"\0" * (size - current), current)


class AllocatedMmapedDict(mmap_dict.MmapedDict):
    """prometheus_client's metric file with its blocks allocated before they are mapped and written."""

    def __init__(self, filename, read_mode=False):
        if not read_mode:
            fd = os.open(filename, os.O_RDWR | os.O_CREAT, 0o644)
            try:
                if os.fstat(fd).st_size == 0:
                    try:
                        _allocate(fd, mmap_dict._INITIAL_MMAP_SIZE)
                    except OSError:
                        os.unlink(filename)  # an empty file would break every reader of the folder
                        raise
            finally:
                os.close(fd)
        super().__init__(filename, read_mode)

    def _init_value(self, key):
        encoded = key.encode("utf-8")
        needed = self._used + 4 + len(encoded) + (8 - (len(encoded) + 4) % 8) + 16
        capacity = self._capacity
        while needed > capacity:
            capacity *= 2
        if capacity != self._capacity:
            _allocate(self._f.fileno(), capacity)
        super()._init_value(key)


# Every metric file the process opens from now on (values.MultiProcessValue looks the class up at use).
values.MmapedDict = AllocatedMmapedDict

#: Latency buckets (s): from a cached catalog lookup to a large Monte Carlo run.
BUCKETS_S = (0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0)


class ServiceMetrics:
    """The metric objects of one app.

    Parameters
    ----------
    metrics_dir : str
        The multi-process folder (``PROMETHEUS_MULTIPROC_DIR``), or ``""`` for
        single-process mode.
    """

    def __init__(self, metrics_dir: str = ""):
        self.metrics_dir = metrics_dir
        # prometheus_client picks its value store from PROMETHEUS_MULTIPROC_DIR when it is
        # imported (the same variable as the setting): sum the folder only when it did.
        self.multiprocess = bool(metrics_dir) and getattr(values.ValueClass, "_multiprocess", False)
        self.registry = CollectorRegistry(auto_describe=True)
        self.requests = Counter("rolloff_http_requests", "HTTP requests answered.",
                                ("method", "endpoint", "status"), registry=self.registry)
        self.latency = Histogram("rolloff_http_request_duration_seconds", "HTTP request latency (seconds).",
                                 ("method", "endpoint", "status"), buckets=BUCKETS_S, registry=self.registry)
        self.trials = Counter("rolloff_monte_carlo_trials", "Monte Carlo trials computed.",
                              registry=self.registry)
        self.degraded: str | None = None

    def record(self, action) -> None:
        """Run one metric update; on a storage error stop recording (once logged), never raise."""
        if self.degraded is not None:
            return
        try:
            action()
        except (OSError, ValueError, RuntimeError) as exc:
            self.degraded = f"{exc.__class__.__name__}: {exc}"
            log.error("metrics degraded: recording stopped in process %d (%s); the service goes on",
                      os.getpid(), self.degraded)

    def observe(self, method: str, endpoint: str, status: int, seconds: float) -> None:
        """Count one answered request and its latency."""
        labels = (method, endpoint, str(status))

        def update():
            self.requests.labels(*labels).inc()
            self.latency.labels(*labels).observe(seconds)

        self.record(update)

    def exposition(self) -> bytes:
        """The text exposition of every series (summed over workers in multi-process mode), and
        ``rolloff_metrics_degraded`` (1 when this process stopped recording)."""
        try:
            if self.multiprocess:
                registry = CollectorRegistry()
                multiprocess.MultiProcessCollector(registry, path=self.metrics_dir)
                text = generate_latest(registry)
            else:
                text = generate_latest(self.registry)
        except Exception as exc:  # an unreadable metric file (truncated, half-written): report, do not fail
            text = b""
            self.degraded = self.degraded or f"{exc.__class__.__name__}: {exc}"
        flag = b"1" if self.degraded is not None else b"0"
        return text + (b"# HELP rolloff_metrics_degraded 1 when this process could not record or read metrics "
                       b"(e.g. a full metrics folder).\n# TYPE rolloff_metrics_degraded gauge\n"
                       b"rolloff_metrics_degraded " + flag + b"\n")


def count_trials(n: int) -> None:
    """Add ``n`` Monte Carlo trials to ``rolloff_monte_carlo_trials_total``.

    Safe to call anywhere: outside an application context, or in an app
    without metrics, it does nothing.

    Parameters
    ----------
    n : int
        Trials computed (a non-negative integer; numpy integers are accepted).

    Raises
    ------
    ValueError
        When ``n`` is negative.
    TypeError
        When ``n`` is not an integer.
    """
    n = operator.index(n)
    if n < 0:
        raise ValueError(f"count_trials: n must be >= 0, got {n}")
    if not has_app_context():
        return
    metrics = current_app.extensions.get("rolloff_metrics")
    if metrics is not None and n:
        metrics.record(lambda: metrics.trials.inc(n))


def _unrecorded(metrics_dir: str, exc: BaseException) -> ServiceMetrics:
    """A :class:`ServiceMetrics` that records nothing (its metric objects could not be made)."""
    metrics = ServiceMetrics.__new__(ServiceMetrics)
    metrics.metrics_dir = metrics_dir
    metrics.multiprocess = False
    metrics.registry = CollectorRegistry(auto_describe=True)
    metrics.degraded = f"{exc.__class__.__name__}: {exc}"
    return metrics


def install(app: Flask, settings: Settings) -> ServiceMetrics:
    """Register the timing hooks and the ``GET /metrics`` route on ``app``.

    Parameters
    ----------
    app : flask.Flask
    settings : service.config.Settings
        ``metrics_dir`` is used; the folder is created when missing.

    Returns
    -------
    ServiceMetrics
        Also stored as ``app.extensions["rolloff_metrics"]``.
    """
    disable_created_metrics()  # no *_created series: they double the exposition for no use here
    if settings.metrics_dir:
        try:
            os.makedirs(settings.metrics_dir, exist_ok=True)
        except OSError as exc:
            log.error("metrics folder %r not usable (%s)", settings.metrics_dir, exc)
    try:
        metrics = ServiceMetrics(settings.metrics_dir)
    except (OSError, ValueError, RuntimeError) as exc:  # the metric files cannot even be created
        log.error("metrics degraded from the start (%s)", exc)
        metrics = _unrecorded(settings.metrics_dir, exc)
    app.extensions["rolloff_metrics"] = metrics

    @app.before_request
    def _metrics_start() -> None:
        g._metrics_started = time.perf_counter()

    @app.after_request
    def _metrics_observe(response: Response) -> Response:
        started = getattr(g, "_metrics_started", None)
        elapsed = time.perf_counter() - started if started is not None else 0.0
        rule = request.url_rule
        metrics.observe(request.method, rule.rule if rule is not None else UNMATCHED,
                        response.status_code, elapsed)
        return response

    def metrics_view() -> Response:
        return Response(metrics.exposition(), mimetype=None, content_type=CONTENT_TYPE_LATEST)

    app.add_url_rule("/metrics", "metrics", metrics_view, methods=["GET"])
    return metrics
