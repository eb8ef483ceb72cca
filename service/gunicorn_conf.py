"""gunicorn configuration of the service, from the ROLLOFF_* settings.

The app is preloaded in the master (``preload_app``): numpy and scipy are
imported once and shared copy-on-write by the workers. SIGTERM drains
in-flight requests for ``graceful_timeout`` seconds before workers stop; a
worker that dies (even by SIGKILL) is replaced by the master.
"""

from service.config import Settings

_settings = Settings.from_env()

bind = f"{_settings.host}:{_settings.port}"
workers = _settings.workers
threads = _settings.threads
worker_class = "gthread" if _settings.threads > 1 else "sync"
timeout = _settings.timeout_s
graceful_timeout = _settings.graceful_timeout_s
max_requests = _settings.max_requests
max_requests_jitter = _settings.max_requests_jitter
preload_app = True
accesslog = None  # the app writes one JSON line per request itself
errorlog = "-"
loglevel = _settings.log_level
worker_tmp_dir = "/tmp"
limit_request_line = 8190
