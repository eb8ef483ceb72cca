"""gunicorn configuration of the service, from the ROLLOFF_* settings.

The app is preloaded in the master (``preload_app``): numpy and scipy are
imported once and shared copy-on-write by the workers. SIGTERM drains
in-flight and queued requests for ``graceful_timeout`` seconds before workers
stop; a worker that dies (even by SIGKILL) is replaced by the master.

Workers are :class:`service.gunicorn_worker.RolloffWorker` (gthread with read
deadlines, problem+json for gunicorn's own errors and a backlog drain on
stop) with ``ROLLOFF_THREADS`` threads each. A thread holds one connection
from its headers to its response; the app lets ``ROLLOFF_COMPUTE_SLOTS`` of
them compute at once (service/api/admission.py), so a thread is always free
for /healthz and /readyz while slow clients send and every slot computes.
The worker ``timeout`` is the gthread heartbeat of the worker's main loop,
which keeps beating while threads compute: long requests are bounded by the
request deadline (``ROLLOFF_REQUEST_DEADLINE_S``), not by it.

Metrics: with ``PROMETHEUS_MULTIPROC_DIR`` set, every process keeps its
metric values in files of that folder. The folder is created and emptied of a
previous run's files here, when the master reads this configuration (before
the app is preloaded), and ``child_exit`` does prometheus_client's
bookkeeping for a worker that has exited.
"""

import glob
import os
import sys

from service.config import load_or_exit
from service.malloc import keep_freed_memory, limit_arenas

# An invalid ROLLOFF_* value stops the master here: one line on stderr, exit status 2, no traceback.
_settings = load_or_exit()

bind = f"{_settings.host}:{_settings.port}"
workers = _settings.workers
threads = _settings.threads
worker_class = "service.gunicorn_worker.RolloffWorker"
timeout = _settings.timeout_s
graceful_timeout = _settings.graceful_timeout_s
max_requests = _settings.max_requests
max_requests_jitter = _settings.max_requests_jitter
preload_app = True
accesslog = None  # the app writes one JSON line per request itself
errorlog = "-"
loglevel = _settings.log_level
worker_tmp_dir = "/tmp"
# No runtime control socket (gunicorn >= 25.1 would create $HOME/.gunicorn/gunicorn.ctl): the image's
# root filesystem is read-only, and nothing should change the worker count of a running container.
control_socket_disable = True
limit_request_line = 8190
# One BLAS/OpenMP thread per worker: the workers are the parallelism. OpenBLAS's own thread pool in
# forked workers on a 2-core machine made a 201-point response ~6x slower (median 166 ms against 25 ms,
# measured here). gunicorn sets these in the master before it preloads the app (so before numpy loads).
raw_env = ["OPENBLAS_NUM_THREADS=1", "OMP_NUM_THREADS=1", "MKL_NUM_THREADS=1"]
# Memory: one malloc arena per computing thread (service/malloc.py), set before the app is preloaded;
# without the cap a worker's resident memory grew by one heavy request's arrays per thread used.
MALLOC_ARENAS = _settings.compute_slots
limit_arenas(MALLOC_ARENAS)
# and freed blocks up to 32 MiB kept for reuse, with up to 256 MiB of the heap's free top (service/malloc.py): the
# Monte Carlo's chunk arrays were mapped and unmapped chunk after chunk, and its stores faulted in on every request.
keep_freed_memory()


def prepare_metrics_dir(path: str) -> None:
    """Create the multi-process metrics folder and remove a previous run's ``*.db`` files.

    A folder that cannot be made or cleaned (a full or read-only /tmp) is
    reported and left as it is: metrics degrade (service/api/metrics.py), the
    service starts.
    """
    if not path:
        return
    try:
        os.makedirs(path, exist_ok=True)
        for stale in glob.glob(os.path.join(path, "*.db")):
            os.remove(stale)
    except OSError as exc:
        sys.stderr.write(f"rolloff: metrics folder {path!r} not usable ({exc.strerror}); metrics are degraded\n")


prepare_metrics_dir(_settings.metrics_dir)


def child_exit(server, worker):
    """A worker exited (normally, recycled or killed): mark its metric files dead."""
    if _settings.metrics_dir:
        from prometheus_client import multiprocess

        multiprocess.mark_process_dead(worker.pid, _settings.metrics_dir)
