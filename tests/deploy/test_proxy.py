"""The pod's buffering proxy (deploy/kubernetes/proxy/nginx.conf) run with Debian's nginx on loopback.

Only the listen address, the upstream port and the /tmp paths are rewritten. The point of the
proxy: a client that drips its request body holds an nginx connection, not a gunicorn worker.
The control half of that test sends the same drip straight to a one-worker sync gunicorn and
shows the worker is then unavailable.
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import tempfile
import threading
import time
from pathlib import Path

import pytest

from tests.deploy.cluster import ROOT, Replica, call
from tests.ports import free_port

CONF = ROOT / "deploy" / "kubernetes" / "proxy" / "nginx.conf"


def nginx_binary() -> str:
    exe = shutil.which("nginx") or "/usr/sbin/nginx"
    assert os.path.exists(exe), "nginx is not installed (Debian package nginx-light; scripts/test installs it)"
    return exe


class Proxy:
    def __init__(self, upstream_port: int):
        self.port = free_port()
        self.dir = Path(tempfile.mkdtemp(prefix="rolloff-nginx-"))
        os.chmod(self.dir, 0o755)
        text = CONF.read_text()
        assert "listen 8080;" in text and "server 127.0.0.1:8000;" in text
        text = (text.replace("listen 8080;", f"listen 127.0.0.1:{self.port};")
                .replace("server 127.0.0.1:8000;", f"server 127.0.0.1:{upstream_port};")
                .replace("/tmp/", f"{self.dir}/"))
        self.conf = self.dir / "nginx.conf"
        self.conf.write_text(text)
        self.proc = None

    def check(self) -> subprocess.CompletedProcess:
        return subprocess.run([nginx_binary(), "-t", "-e", "stderr", "-p", str(self.dir), "-c", str(self.conf)],
                              capture_output=True, text=True)

    def start(self) -> "Proxy":
        self.proc = subprocess.Popen([nginx_binary(), "-e", "stderr", "-p", str(self.dir), "-c", str(self.conf),
                                      "-g", "daemon off;"], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                                     start_new_session=True)
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline:
            try:
                if call(self.port, "GET", "/proxy-healthz", timeout=2)[0] == 200:
                    return self
            except OSError:
                assert self.proc.poll() is None, self.proc.stderr.read().decode()
                time.sleep(0.1)
        raise RuntimeError("nginx did not start")

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            self.proc.wait(timeout=10)
        shutil.rmtree(self.dir, ignore_errors=True)


@pytest.fixture
def one_sync_worker():
    # one sync worker whatever the project's defaults (GUNICORN_CMD_ARGS overrides the config file)
    replica = Replica(workers=1, env={"GUNICORN_CMD_ARGS": "--worker-class sync --workers 1 --threads 1"}).start()
    yield replica
    replica.stop()


@pytest.fixture
def proxy(one_sync_worker):
    p = Proxy(one_sync_worker.port)
    yield p
    p.stop()


class Drip:
    """A client that sends a POST header then its body one byte every `pause` seconds (bounded)."""

    def __init__(self, port: int, length: int = 40, pause: float = 0.25):
        self.sock = socket.create_connection(("127.0.0.1", port), timeout=30)
        self.sock.sendall(f"POST /v1/values/nearest HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
                          f"Content-Length: {length}\r\n\r\n".encode())
        self.length, self.pause = length, pause
        self.thread = threading.Thread(target=self._drip, daemon=True)
        self.thread.start()

    def _drip(self) -> None:
        try:
            for _ in range(self.length):
                self.sock.sendall(b" ")
                time.sleep(self.pause)
        except OSError:
            pass

    def close(self) -> None:
        self.sock.close()
        self.thread.join(30)


def test_the_configuration_is_valid_for_nginx(proxy):
    result = proxy.check()
    assert result.returncode == 0, result.stderr


def test_a_dripping_client_holds_the_proxy_not_the_worker(proxy, one_sync_worker):
    proxy.start()
    drip = Drip(proxy.port)
    try:
        time.sleep(1)  # the drip is under way (10 s in all)
        assert drip.thread.is_alive()
        status, _, body = call(proxy.port, "GET", "/healthz", timeout=5)
        assert status == 200, body
        status, _, _ = call(proxy.port, "GET", "/v1/values/nearest?value=4.87k&series=E24", timeout=5)
        assert status == 200
        assert drip.thread.is_alive()
    finally:
        drip.close()
    # control: the same drip straight to the worker leaves it unable to answer anyone else
    direct = Drip(one_sync_worker.port)
    try:
        time.sleep(1)
        with pytest.raises(TimeoutError):
            call(one_sync_worker.port, "GET", "/healthz", timeout=3)
    finally:
        direct.close()


def test_proxy_answers_its_own_refusals_as_problems(proxy, one_sync_worker):
    proxy.start()
    status, headers, body = call(proxy.port, "POST", "/v1/designs", {"pad": "x" * (1_100_000)})
    assert status == 413 and headers["content-type"] == "application/problem+json"
    assert json.loads(body)["status"] == 413
    assert call(proxy.port, "GET", "/metrics")[0] == 404  # scraped on port 8000 only
    assert call(one_sync_worker.port, "GET", "/metrics")[0] == 200
    one_sync_worker.stop()
    status, headers, body = call(proxy.port, "GET", "/v1/catalog")
    assert status == 503 and headers["content-type"] == "application/problem+json"
    assert headers["retry-after"] == "1" and json.loads(body)["status"] == 503
