"""Service settings, read in one place from ``ROLLOFF_*`` environment variables.

Every setting has a documented default that works for a local run. The table
:data:`SETTINGS` is the single source for the README's configuration table,
for ``GET /v1/catalog``'s limits and for the error messages that name the
variable a caller hit. Nothing else in the project reads ``os.environ``.
"""

from __future__ import annotations

import difflib
import os
import sys
from dataclasses import dataclass, field, fields, replace
from typing import Any, Callable, Mapping, TextIO

PREFIX = "ROLLOFF_"
TEST_PREFIX = "ROLLOFF_TEST_"


class ConfigError(ValueError):
    """A configuration variable is set to a value its setting does not allow.

    Parameters
    ----------
    variable : str
        The environment variable (``"ROLLOFF_WORKERS"``).
    value : str
        The text it was set to.
    allowed : str
        What the setting accepts (``"a whole number from 1 up"``).
    """

    def __init__(self, variable: str, value: str, allowed: str):
        self.variable = variable
        self.value = value
        self.allowed = allowed
        super().__init__(f"{variable}={value!r} is not valid: expected {allowed}")


def _allows(description: str) -> Callable[[Callable[[str], Any]], Callable[[str], Any]]:
    """Attach the text naming what a parser accepts (shown when a value is refused)."""

    def mark(parse: Callable[[str], Any]) -> Callable[[str], Any]:
        parse.allowed = description  # type: ignore[attr-defined]
        return parse

    return mark


def _whole_number(text: str) -> int:
    text = text.strip()
    if not text or not text.lstrip("+-").isdigit():  # int() would also take "1_000" and " 1 "
        raise ValueError(text)
    return int(text)


@_allows("true or false (also 1/0, yes/no, on/off)")
def _bool(text: str) -> bool:
    value = text.strip().lower()
    if value in ("1", "true", "yes", "on"):
        return True
    if value in ("0", "false", "no", "off", ""):
        return False
    raise ValueError(f"expected a boolean (true/false), got {text!r}")


@_allows("a comma-separated list")
def _csv(text: str) -> tuple[str, ...]:
    return tuple(item.strip() for item in text.split(",") if item.strip())


@_allows("a whole number from 1 up")
def _positive_int(text: str) -> int:
    value = _whole_number(text)
    if value < 1:
        raise ValueError(f"expected a positive integer, got {text!r}")
    return value


@_allows("a whole number from 0 up")
def _count(text: str) -> int:
    value = _whole_number(text)
    if value < 0:
        raise ValueError(f"expected a whole number from 0 up, got {text!r}")
    return value


@_allows("a TCP port, a whole number from 1 to 65535")
def _port(text: str) -> int:
    value = _whole_number(text)
    if not 1 <= value <= 65535:
        raise ValueError(f"expected a port from 1 to 65535, got {text!r}")
    return value


@_allows("a host name or IP address")
def _host(text: str) -> str:
    value = text.strip()
    if not value or any(c.isspace() for c in value):
        raise ValueError(f"expected a host name or address, got {text!r}")
    return value


LOG_LEVELS = ("debug", "info", "warning", "error", "critical")


@_allows("one of " + ", ".join(LOG_LEVELS))
def _log_level(text: str) -> str:
    value = text.strip().lower()
    if value not in LOG_LEVELS:
        raise ValueError(f"expected one of {', '.join(LOG_LEVELS)}, got {text!r}")
    return value


@_allows("a file path (or empty)")
def _path(text: str) -> str:
    return text.strip()


@dataclass(frozen=True)
class Setting:
    """One configurable value: its attribute name, variable, parser, default and meaning.

    ``allowed`` names what the variable accepts, for the message that refuses a
    value; when omitted it is taken from the parser (``parse.allowed``).
    """

    name: str
    env: str
    parse: Callable[[str], Any]
    default: Any
    doc: str
    limit: bool = False  # listed under ``limits`` in the catalog
    allowed: str | None = None

    def read(self, raw: str) -> Any:
        """Parse ``raw``; raise :class:`ConfigError` naming the variable, the value and what is allowed."""
        try:
            return self.parse(raw)
        except (ValueError, TypeError):
            allowed = self.allowed or getattr(self.parse, "allowed", None) or "a valid value"
            raise ConfigError(self.env, raw, allowed) from None


MIB = 1024 * 1024

SETTINGS: tuple[Setting, ...] = (
    Setting("host", "ROLLOFF_HOST", _host, "127.0.0.1", "Address `rolloff serve` binds to."),
    Setting("port", "ROLLOFF_PORT", _port, 8000, "Port `rolloff serve` binds to."),
    Setting("workers", "ROLLOFF_WORKERS", _positive_int, 2, "gunicorn worker processes."),
    Setting("threads", "ROLLOFF_THREADS", _positive_int, 16, "Threads per gunicorn worker (gthread): requests a worker holds at once, computing, queued or reading."),
    Setting("timeout_s", "ROLLOFF_TIMEOUT_S", _positive_int, 30,
            "gunicorn worker timeout: a worker silent this long is killed and replaced."),
    Setting("graceful_timeout_s", "ROLLOFF_GRACEFUL_TIMEOUT_S", _positive_int, 20,
            "On SIGTERM, time in-flight requests get to finish before workers are stopped."),
    Setting("max_requests", "ROLLOFF_MAX_REQUESTS", _count, 5000,
            "Requests after which a worker is recycled (0: never)."),
    Setting("max_requests_jitter", "ROLLOFF_MAX_REQUESTS_JITTER", _count, 500,
            "Random spread added to max_requests so workers do not recycle together."),
    Setting("log_level", "ROLLOFF_LOG_LEVEL", _log_level, "info", "Log level of the service logs on stderr."),
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
    Setting("api_keys_file", "ROLLOFF_API_KEYS_FILE", _path, "",
            "File with one API key per line (blank lines and # comments ignored)."),
    Setting("cors_origins", "ROLLOFF_CORS_ORIGINS", _csv, (),
            "Comma-separated origins allowed to call /v1 from a browser (none by default)."),
    Setting("metrics_dir", "PROMETHEUS_MULTIPROC_DIR", _path, "",
            "Folder for multi-process metrics under gunicorn (set by `rolloff serve`)."),
    Setting("request_deadline_s", "ROLLOFF_REQUEST_DEADLINE_S", _positive_int, 10, "Time limit of one request from the end of its body to the end of its computation (queueing included); past it: 503 with Retry-After.", limit=True),
    Setting("body_timeout_s", "ROLLOFF_BODY_TIMEOUT_S", _positive_int, 8, "Time a client gets to send a request's headers, and then its body; slower clients get 408.", limit=True),
    Setting("compute_slots", "ROLLOFF_COMPUTE_SLOTS", _positive_int, 1, "Requests one worker process computes at once; health, readiness, metrics and the catalog never wait for a slot."),
    Setting("compute_queue", "ROLLOFF_COMPUTE_QUEUE", _count, 8, "Requests one worker process lets wait for a compute slot; more get 503 with Retry-After at once."),
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
        ConfigError
            (a ``ValueError``) when a variable is set to something its setting
            does not accept; it names the variable, the value and what is allowed.
        """
        environ = os.environ if environ is None else environ
        values = {}
        for s in SETTINGS:
            raw = environ.get(s.env)
            if raw is None:
                continue
            values[s.name] = s.read(raw)
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


def unknown_variables(environ: Mapping[str, str] | None = None) -> list[str]:
    """``ROLLOFF_*`` variables set in ``environ`` that name no setting, sorted.

    ``ROLLOFF_TEST_*`` variables belong to the test suite (e.g. ``ROLLOFF_TEST_PORTS``) and are
    not settings of the service: they are not listed.
    """
    environ = os.environ if environ is None else environ
    known = {s.env for s in SETTINGS}
    return sorted(name for name in environ
                  if name.startswith(PREFIX) and not name.startswith(TEST_PREFIX) and name not in known)


def unknown_variables_warning(environ: Mapping[str, str] | None = None) -> str | None:
    """One line naming every unknown ``ROLLOFF_*`` variable (with the closest setting), or None."""
    unknown = unknown_variables(environ)
    if not unknown:
        return None
    known = [s.env for s in SETTINGS if s.env.startswith(PREFIX)]
    named = []
    for name in unknown:
        close = difflib.get_close_matches(name, known, n=1, cutoff=0.8)
        named.append(f"{name} (did you mean {close[0]}?)" if close else name)
    return f"rolloff: warning: unknown settings ignored: {', '.join(named)}"


def load_or_exit(environ: Mapping[str, str] | None = None, *, warn: bool = True,
                 stream: TextIO | None = None) -> Settings:
    """The settings of a starting process; on an invalid value, one line on stderr and exit status 2.

    Used where a process starts (``rolloff serve``, the gunicorn master reading
    ``service/gunicorn_conf.py``, the WSGI module), so that a misconfigured
    replica stops at once with a message an operator can act on and no traceback.

    Parameters
    ----------
    environ : mapping, optional
        Default ``os.environ``.
    warn : bool
        Also write one warning line listing unknown ``ROLLOFF_*`` variables.
    stream : text stream, optional
        Where the lines go (default ``sys.stderr``).

    Raises
    ------
    SystemExit
        With status 2 when a setting is invalid.
    """
    stream = sys.stderr if stream is None else stream
    try:
        settings = Settings.from_env(environ)
    except ConfigError as exc:
        print(f"rolloff: invalid configuration: {exc}", file=stream, flush=True)
        raise SystemExit(2) from None
    if warn:
        line = unknown_variables_warning(environ)
        if line:
            print(line, file=stream, flush=True)
    return settings
