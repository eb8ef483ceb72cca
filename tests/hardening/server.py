"""Start the service under a real gunicorn on a free loopback port (tests, fuzzing, load).

Only 127.0.0.1 is ever bound or called. Used by the gunicorn tests, by
``scripts/fuzz`` and by the load benchmark.
"""

from __future__ import annotations

import http.client
import os
import random
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from tests.ports import free_port as _free_port

ROOT = Path(__file__).resolve().parents[2]


def free_port() -> int:
    """A TCP port free on 127.0.0.1 at the time of the call.

    ``ROLLOFF_TEST_PORTS=first-last`` confines it to a range (a shared machine's allotment);
    otherwise the system picks one (tests/ports.py).
    """
    return _free_port()


def request(port: int, method: str, path: str, body: bytes | None = None,
            headers: dict[str, str] | None = None, timeout: float = 10.0) -> tuple[int, dict[str, str], bytes]:
    """One HTTP request to 127.0.0.1:``port``; returns (status, headers, body)."""
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=timeout)
    try:
        try:
            conn.request(method, path, body=body, headers=headers or {})
        except (BrokenPipeError, ConnectionResetError):
            # the server answered (e.g. 413) and closed before the whole body was sent: read its answer
            pass
        resp = conn.getresponse()
        return resp.status, {k.lower(): v for k, v in resp.getheaders()}, resp.read()
    finally:
        conn.close()


class Gunicorn:
    """A gunicorn master running ``app`` with the project's configuration.

    Parameters
    ----------
    workers : int
    app : str
        WSGI target, ``module:variable``.
    env : mapping, optional
        Extra environment (``ROLLOFF_*`` settings).
    """

    def __init__(self, workers: int = 2, app: str = "service.wsgi:app", env: dict[str, str] | None = None):
        self.port = free_port()
        self.metrics_dir = tempfile.mkdtemp(prefix="rolloff-test-metrics-")
        self.env = dict(os.environ)
        self.env.update({"ROLLOFF_HOST": "127.0.0.1", "ROLLOFF_PORT": str(self.port),
                         "ROLLOFF_WORKERS": str(workers), "PROMETHEUS_MULTIPROC_DIR": self.metrics_dir,
                         "ROLLOFF_LOG_LEVEL": "warning"})
        self.env["PYTHONPATH"] = str(ROOT) + os.pathsep + self.env.get("PYTHONPATH", "")
        self.env.update(env or {})
        self.app = app
        self.workers = workers
        self.proc: subprocess.Popen | None = None
        self.log = tempfile.TemporaryFile()

    def start(self, ready_timeout: float = 60.0) -> "Gunicorn":
        argv = [sys.executable, "-m", "gunicorn", "--config", "python:service.gunicorn_conf", self.app]
        self.proc = subprocess.Popen(argv, env=self.env, cwd=str(ROOT), stdout=self.log, stderr=self.log,
                                     start_new_session=True)
        deadline = time.monotonic() + ready_timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"gunicorn exited with {self.proc.returncode}:\n{self.output()}")
            try:
                if request(self.port, "GET", "/healthz", timeout=2)[0] == 200 \
                        and len(self.worker_pids()) == self.workers:
                    return self
            except OSError:
                pass
            time.sleep(0.2)
        self.stop()
        raise RuntimeError(f"gunicorn did not become healthy in {ready_timeout} s:\n{self.output()}")

    def output(self) -> str:
        self.log.seek(0)
        return self.log.read().decode("utf-8", "replace")[-20000:]

    def worker_pids(self) -> list[int]:
        """Pids of the master's live worker processes."""
        assert self.proc is not None
        path = Path(f"/proc/{self.proc.pid}/task/{self.proc.pid}/children")
        try:
            pids = [int(p) for p in path.read_text().split()]
        except OSError:
            return []
        live = []
        for pid in pids:
            try:
                state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
            except OSError:
                continue
            if state != "Z":
                live.append(pid)
        return live

    def signal(self, sig: int) -> None:
        assert self.proc is not None
        os.kill(self.proc.pid, sig)

    def stop(self, timeout: float = 30.0) -> int | None:
        if self.proc is None or self.proc.poll() is not None:
            return None if self.proc is None else self.proc.returncode
        self.signal(signal.SIGTERM)
        try:
            return self.proc.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            os.killpg(self.proc.pid, signal.SIGKILL)
            return self.proc.wait(timeout=10)

    def __enter__(self) -> "Gunicorn":
        return self.start()

    def __exit__(self, *exc) -> None:
        self.stop()
