"""Service settings, read in one place from ``ROLLOFF_*`` environment variables.

Every setting has a documented default that works for a local run. The table
:data:`SETTINGS` is the single source for the README's configuration table,
for ``GET /v1/catalog``'s limits and for the error messages that name the
variable a caller hit. Nothing else in the project reads ``os.environ``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field, fields, replace
from typing import Any, Callable, Mapping


@dataclass(frozen=True)
class Setting:
    """One configurable value: its attribute name, variable, parser, default and meaning."""

    name: str
    env: str
    parse: Callable[[str], Any]
    default: Any
    doc: str
    limit: bool = False  # listed under ``limits`` in the catalog


def _bool(text: str) -> bool:
    value = text.strip().lower()
    if value in ("1", "true", "yes", "on"):
        return True
    if value in ("0", "false", "no", "off", ""):
        return False
    raise ValueError(f"expected a boolean (true/false), got {text!r}")


def _csv(text: str) -> tuple[str, ...]:
    return tuple(item.strip() for item in text.split(",") if item.strip())


def _positive_int(text: str) -> int:
    value = int(text)
    if value < 1:
        raise ValueError(f"expected a positive integer, got {text!r}")
    return value


MIB = 1024 * 1024

SETTINGS: tuple[Setting, ...] = (
    Setting("host", "ROLLOFF_HOST", str, "127.0.0.1", "Address `rolloff serve` binds to."),
    Setting("port", "ROLLOFF_PORT", _positive_int, 8000, "Port `rolloff serve` binds to."),
    Setting("workers", "ROLLOFF_WORKERS", _positive_int, 2, "gunicorn worker processes."),
    Setting("threads", "ROLLOFF_THREADS", _positive_int, 16, "Threads per gunicorn worker (gthread): requests a worker holds at once, computing, queued or reading."),
    Setting("timeout_s", "ROLLOFF_TIMEOUT_S", _positive_int, 30,
            "gunicorn worker timeout: a worker silent this long is killed and replaced."),
    Setting("graceful_timeout_s", "ROLLOFF_GRACEFUL_TIMEOUT_S", _positive_int, 20,
            "On SIGTERM, time in-flight requests get to finish before workers are stopped."),
    Setting("max_requests", "ROLLOFF_MAX_REQUESTS", int, 5000,
            "Requests after which a worker is recycled (0: never)."),
    Setting("max_requests_jitter", "ROLLOFF_MAX_REQUESTS_JITTER", int, 500,
            "Random spread added to max_requests so workers do not recycle together."),
    Setting("log_level", "ROLLOFF_LOG_LEVEL", str, "info", "Log level of the service logs on stderr."),
    Setting("max_body_bytes", "ROLLOFF_MAX_BODY_BYTES", _positive_int, MIB,
            "Largest request body accepted (bytes); larger bodies get 413.", limit=True),
    Setting("max_json_depth", "ROLLOFF_MAX_JSON_DEPTH", _positive_int, 32,
            "Deepest nesting of arrays/objects accepted in a JSON body.", limit=True),
    Setting("max_order", "ROLLOFF_MAX_ORDER", _positive_int, 20,
            "Highest prototype order of an approximation.", limit=True),
    Setting("max_frequency_points", "ROLLOFF_MAX_FREQUENCY_POINTS", _positive_int, 10_000,
            "Most frequency points of one response or tolerance grid.", limit=True),
    Setting("max_time_points", "ROLLOFF_MAX_TIME_POINTS", _positive_int, 10_000,
            "Most time points of a step/impulse response.", limit=True),
    Setting("max_trials", "ROLLOFF_MAX_TRIALS", _positive_int, 100_000,
            "Most Monte Carlo trials of one tolerance request.", limit=True),
    Setting("max_work", "ROLLOFF_MAX_WORK", _positive_int, 32_000_000,
            "Budget of one tolerance request: trials x frequency points (at least 400) x (2 + the sum over stages of (op-amps "
            "in the stage)^2); about 2 s of CPU at the default.", limit=True),
    Setting("max_stock_entries", "ROLLOFF_MAX_STOCK_ENTRIES", _positive_int, 2_000,
            "Most entries of a caller's stock list.", limit=True),
    Setting("memory_limit_bytes", "ROLLOFF_MEMORY_LIMIT_BYTES", _positive_int, 512 * MIB,
            "Peak working memory the circuit engine may use for one batched analysis.", limit=True),
    Setting("api_keys", "ROLLOFF_API_KEYS", _csv, (),
            "Comma-separated API keys; when set (or a keys file is), /v1 needs `Authorization: Bearer <key>`."),
    Setting("api_keys_file", "ROLLOFF_API_KEYS_FILE", str, "",
            "File with one API key per line (blank lines and # comments ignored)."),
    Setting("cors_origins", "ROLLOFF_CORS_ORIGINS", _csv, (),
            "Comma-separated origins allowed to call /v1 from a browser (none by default)."),
    Setting("metrics_dir", "PROMETHEUS_MULTIPROC_DIR", str, "",
            "Folder for multi-process metrics under gunicorn (set by `rolloff serve`)."),
    Setting("request_deadline_s", "ROLLOFF_REQUEST_DEADLINE_S", _positive_int, 10, "Time limit of one request from the end of its body to the end of its computation (queueing included); past it: 503 with Retry-After.", limit=True),
    Setting("body_timeout_s", "ROLLOFF_BODY_TIMEOUT_S", _positive_int, 8, "Time a client gets to send a request's headers, and then its body; slower clients get 408.", limit=True),
    Setting("compute_slots", "ROLLOFF_COMPUTE_SLOTS", _positive_int, 1, "Requests one worker process computes at once; health, readiness, metrics and the catalog never wait for a slot."),
    Setting("compute_queue", "ROLLOFF_COMPUTE_QUEUE", int, 8, "Requests one worker process lets wait for a compute slot; more get 503 with Retry-After at once."),
)


@dataclass(frozen=True)
class Settings:
    """The service's configuration. Build with :meth:`from_env`; override fields in tests."""

    host: str = "127.0.0.1"
    port: int = 8000
    workers: int = 2
    threads: int = 16
    timeout_s: int = 30
    graceful_timeout_s: int = 20
    max_requests: int = 5000
    max_requests_jitter: int = 500
    log_level: str = "info"
    max_body_bytes: int = MIB
    max_json_depth: int = 32
    max_order: int = 20
    max_frequency_points: int = 10_000
    max_time_points: int = 10_000
    max_trials: int = 100_000
    max_work: int = 32_000_000
    max_stock_entries: int = 2_000
    memory_limit_bytes: int = 512 * MIB
    api_keys: tuple[str, ...] = field(default=(), repr=False)
    api_keys_file: str = ""
    cors_origins: tuple[str, ...] = ()
    metrics_dir: str = ""
    request_deadline_s: float = 10
    body_timeout_s: float = 8
    compute_slots: int = 1
    compute_queue: int = 8

    @classmethod
    def from_env(cls, environ: Mapping[str, str] | None = None) -> "Settings":
        """Read every :data:`SETTINGS` entry from ``environ`` (default ``os.environ``).

        Raises
        ------
        ValueError
            When a variable is set to something its parser rejects; the message
            names the variable.
        """
        environ = os.environ if environ is None else environ
        values = {}
        for s in SETTINGS:
            raw = environ.get(s.env)
            if raw is None:
                continue
            try:
                values[s.name] = s.parse(raw)
            except ValueError as exc:
                raise ValueError(f"{s.env}: {exc}") from None
        return cls(**values)

    def override(self, **changes: Any) -> "Settings":
        """A copy with some fields changed (unknown names raise TypeError)."""
        known = {f.name for f in fields(self)}
        unknown = set(changes) - known
        if unknown:
            raise TypeError(f"unknown settings: {', '.join(sorted(unknown))}")
        return replace(self, **changes)

    def limits(self) -> dict[str, dict[str, Any]]:
        """The configured limits: ``{name: {value, setting, description}}``."""
        return {
            s.name: {"value": getattr(self, s.name), "setting": s.env, "description": s.doc}
            for s in SETTINGS if s.limit
        }


def setting_env(name: str) -> str:
    """The environment variable of a setting attribute (``"max_order"`` -> ``"ROLLOFF_MAX_ORDER"``)."""
    for s in SETTINGS:
        if s.name == name:
            return s.env
    raise KeyError(name)
