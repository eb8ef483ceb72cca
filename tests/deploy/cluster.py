"""Replicas of the service (`rolloff serve`) and an HAProxy balancer on loopback, for the deployment tests.

Only 127.0.0.1 is bound or called; every process started here is stopped by its owner.
"""

from __future__ import annotations

import http.client
import json
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from tests.ports import free_port

ROOT = Path(__file__).resolve().parents[2]
HAPROXY_CFG = ROOT / "deploy" / "haproxy" / "rolloff.cfg"


def call(port: int, method: str, path: str, payload=None, timeout: float = 60.0) -> tuple[int, dict, bytes]:
    """One request to 127.0.0.1:port; (status, lower-case headers, body)."""
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=timeout)
    try:
        body = None if payload is None else json.dumps(payload).encode()
        conn.request(method, path, body=body, headers={"Content-Type": "application/json"} if body else {})
        resp = conn.getresponse()
        return resp.status, {k.lower(): v for k, v in resp.getheaders()}, resp.read()
    finally:
        conn.close()


class Replica:
    """One `rolloff serve` (gunicorn master + workers) in its own process group."""

    def __init__(self, port: int | None = None, workers: int = 2, env: dict[str, str] | None = None):
        self.port = port or free_port()
        self.env = {k: v for k, v in os.environ.items() if not k.startswith("ROLLOFF_")}
        self.env.update(ROLLOFF_HOST="127.0.0.1", ROLLOFF_PORT=str(self.port), ROLLOFF_WORKERS=str(workers),
                        ROLLOFF_LOG_LEVEL="warning",
                        PROMETHEUS_MULTIPROC_DIR=tempfile.mkdtemp(prefix="rolloff-test-metrics-"))
        self.env.update(env or {})
        self.log = tempfile.TemporaryFile()
        self.proc: subprocess.Popen | None = None

    def start(self, wait: bool = True, limit_s: float = 90) -> "Replica":
        self.proc = subprocess.Popen([sys.executable, "-m", "service", "serve"], env=self.env, cwd=str(ROOT),
                                     stdout=self.log, stderr=self.log, start_new_session=True)
        if wait:
            deadline = time.monotonic() + limit_s
            while time.monotonic() < deadline:
                if self.proc.poll() is not None:
                    raise RuntimeError(f"replica exited {self.proc.returncode}:\n{self.output()}")
                try:
                    if call(self.port, "GET", "/readyz", timeout=5)[0] == 200:
                        return self
                except OSError:
                    pass
                time.sleep(0.2)
            self.kill()
            raise RuntimeError(f"replica not ready in {limit_s} s:\n{self.output()}")
        return self

    def output(self) -> str:
        self.log.seek(0)
        return self.log.read().decode("utf-8", "replace")

    def terminate(self, limit_s: float = 60) -> int:
        """SIGTERM (graceful: in-flight requests finish) and wait for the exit status."""
        assert self.proc is not None
        os.kill(self.proc.pid, signal.SIGTERM)
        return self.proc.wait(timeout=limit_s)

    def kill(self) -> None:
        """SIGKILL to every process of the replica (as a container or node dies)."""
        if self.proc is not None:
            try:
                os.killpg(self.proc.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
            self.proc.wait(timeout=30)

    def pause(self, paused: bool) -> None:
        """SIGSTOP / SIGCONT every process of the replica (a hung replica)."""
        assert self.proc is not None
        os.killpg(self.proc.pid, signal.SIGSTOP if paused else signal.SIGCONT)

    def stop(self) -> None:
        if self.proc is None or self.proc.poll() is not None:
            return
        try:
            os.killpg(self.proc.pid, signal.SIGCONT)
            self.terminate(limit_s=40)
        except (subprocess.TimeoutExpired, ProcessLookupError):
            self.kill()


def haproxy_binary() -> str:
    exe = shutil.which("haproxy") or "/usr/sbin/haproxy"
    assert os.path.exists(exe), "HAProxy is not installed (Debian package haproxy; scripts/test installs it)"
    return exe


def render_haproxy_config(servers: dict[str, int]) -> str:
    """deploy/haproxy/rolloff.cfg with its `server` lines replaced by loopback replicas."""
    lines = HAPROXY_CFG.read_text().splitlines()
    out, placed = [], False
    for line in lines:
        if re.match(r"\s*server\s", line):
            if not placed:
                out += [f"    server {name} 127.0.0.1:{port} check" for name, port in servers.items()]
                placed = True
            continue
        out.append(line)
    assert placed
    return "\n".join(out) + "\n"


class Balancer:
    """HAProxy running deploy/haproxy/rolloff.cfg in the foreground, with its stats socket."""

    def __init__(self, servers: dict[str, int]):
        self.port = free_port()
        self.dir = Path(tempfile.mkdtemp(prefix="rolloff-haproxy-"))
        self.socket = self.dir / "stats.sock"
        self.config = self.dir / "haproxy.cfg"
        self.config.write_text(render_haproxy_config(servers))
        self.env = dict(os.environ, LB_BIND=f"127.0.0.1:{self.port}", STATS_SOCKET=str(self.socket))
        self.log = tempfile.TemporaryFile()
        self.proc: subprocess.Popen | None = None

    def start(self) -> "Balancer":
        check = subprocess.run([haproxy_binary(), "-c", "-f", str(self.config)], env=self.env,
                               capture_output=True, text=True)
        assert check.returncode == 0, check.stdout + check.stderr
        self.proc = subprocess.Popen([haproxy_binary(), "-db", "-f", str(self.config)], env=self.env,
                                     stdout=self.log, stderr=self.log, start_new_session=True)
        deadline = time.monotonic() + 20
        while not self.socket.exists():
            assert self.proc.poll() is None and time.monotonic() < deadline, self.output()
            time.sleep(0.05)
        return self

    def output(self) -> str:
        self.log.seek(0)
        return self.log.read().decode("utf-8", "replace")

    def stats(self) -> dict[str, dict[str, str]]:
        """`show stat` of the backend's servers: {server name: {column: value}}."""
        with socket.socket(socket.AF_UNIX) as s:
            s.connect(str(self.socket))
            s.sendall(b"show stat\n")
            data = b""
            while chunk := s.recv(65536):
                data += chunk
        rows = data.decode().strip().splitlines()
        header = rows[0].lstrip("# ").split(",")
        out = {}
        for row in rows[1:]:
            values = dict(zip(header, row.split(",")))
            if values.get("pxname") == "rolloff" and values.get("svname") not in ("FRONTEND", "BACKEND"):
                out[values["svname"]] = values
        return out

    def wait_status(self, server: str, prefix: str, limit_s: float = 30) -> None:
        deadline = time.monotonic() + limit_s
        while time.monotonic() < deadline:
            if self.stats()[server]["status"].startswith(prefix):
                return
            time.sleep(0.1)
        raise AssertionError(f"{server} not {prefix} within {limit_s} s: {self.stats()[server]}\n{self.output()}")

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        shutil.rmtree(self.dir, ignore_errors=True)
