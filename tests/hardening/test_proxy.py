"""The shipped nginx configuration (deploy/proxy/rolloff.nginx.conf) in front of two real gunicorn instances.

A rolling restart (SIGTERM to one instance while clients send POSTs through
nginx) loses no request; slow clients are held by nginx, not by rolloff; and
nginx's own refusals are problem+json. Skipped where nginx is not installed
(Debian package ``nginx``); loopback only.
"""

from __future__ import annotations

import json
import re
import shutil
import signal
import socket
import subprocess
import tempfile
import time
from pathlib import Path

import pytest

from tests.hardening import resilience as R
from tests.hardening.server import ROOT, Gunicorn, free_port, request

NGINX = shutil.which("nginx") or ("/usr/sbin/nginx" if Path("/usr/sbin/nginx").exists() else None)
SNIPPET = ROOT / "deploy" / "proxy" / "rolloff.nginx.conf"

pytestmark = [pytest.mark.skipif(NGINX is None, reason="nginx is not installed"),
              pytest.mark.filterwarnings("ignore::ResourceWarning")]


class Nginx:
    """nginx with the shipped snippet, its upstream servers and listen port replaced, in a temp prefix."""

    def __init__(self, backends: list[int]):
        self.port = free_port()
        self.dir = Path(tempfile.mkdtemp(prefix="rolloff-nginx-"))
        text = SNIPPET.read_text()
        servers = "".join(f"    server 127.0.0.1:{p} max_fails=1 fail_timeout=5s;\n" for p in backends)
        text = re.sub(r"upstream rolloff \{\n(    server .*\n)+\}", "upstream rolloff {\n" + servers + "}", text)
        text = text.replace("listen 127.0.0.1:8080;", f"listen 127.0.0.1:{self.port};")
        (self.dir / "rolloff.conf").write_text(text)
        (self.dir / "nginx.conf").write_text(f"""
worker_processes 1;
pid {self.dir}/nginx.pid;
error_log {self.dir}/error.log warn;
user root root;
events {{ worker_connections 256; }}
http {{
    access_log {self.dir}/access.log;
    client_body_temp_path {self.dir}/body;
    proxy_temp_path {self.dir}/proxy;
    fastcgi_temp_path {self.dir}/fastcgi;
    uwsgi_temp_path {self.dir}/uwsgi;
    scgi_temp_path {self.dir}/scgi;
    include {self.dir}/rolloff.conf;
}}
""")
        self.proc: subprocess.Popen | None = None

    def __enter__(self) -> "Nginx":
        test = subprocess.run([NGINX, "-t", "-p", str(self.dir), "-c", str(self.dir / "nginx.conf")],
                              capture_output=True, text=True)
        assert test.returncode == 0, test.stderr
        self.proc = subprocess.Popen([NGINX, "-p", str(self.dir), "-c", str(self.dir / "nginx.conf"),
                                      "-g", "daemon off;"], stderr=subprocess.DEVNULL)
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline:
            try:
                socket.create_connection(("127.0.0.1", self.port), timeout=1).close()
                return self
            except OSError:
                time.sleep(0.1)
        raise RuntimeError("nginx did not start")

    def __exit__(self, *exc) -> None:
        if self.proc is not None:
            self.proc.send_signal(signal.SIGQUIT)
            try:
                self.proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                self.proc.kill()
        shutil.rmtree(self.dir, ignore_errors=True)


def test_rolling_restart_through_nginx_loses_no_request():
    a = Gunicorn(workers=2, env={"ROLLOFF_GRACEFUL_TIMEOUT_S": "30"}).start()
    b = Gunicorn(workers=2).start()
    try:
        with Nginx([a.port, b.port]) as proxy:
            body = json.dumps(R.BIG_DESIGN).encode()
            traffic = [R.Traffic(proxy.port, body) for _ in range(6)]
            for t in traffic:
                t.start()
            time.sleep(2.0)
            a.signal(signal.SIGTERM)
            assert a.proc.wait(timeout=60) == 0
            time.sleep(2.0)
            for t in traffic:
                t.stop()
            for t in traffic:
                t.join(timeout=60)
        outcomes = [o for t in traffic for o in t.outcomes]
        assert len(outcomes) >= 12
        assert set(outcomes) == {"200"}, sorted((o, outcomes.count(o)) for o in set(outcomes))
    finally:
        a.stop()
        b.stop()


def test_slow_clients_wait_in_nginx_and_its_refusals_are_problems():
    with Gunicorn(workers=2) as server, Nginx([server.port]) as proxy:
        drips = [R.DripClient(proxy.port) for _ in range(8)]  # more than rolloff would like to hold
        for d in drips:
            d.start()
        probes = R.Probes(server.port, "/healthz").start()
        time.sleep(3)
        status, _, body = request(proxy.port, "POST", "/v1/designs", json.dumps(R.BIG_DESIGN).encode(), R.JSON,
                                  timeout=60)
        assert status == 200
        status, headers, body = request(proxy.port, "POST", "/v1/values/nearest", b"x" * (2 * 2**20), R.JSON,
                                        timeout=30)
        assert status == 413 and headers["content-type"] == "application/problem+json"
        assert json.loads(body)["limit"] == "max_body_bytes"
        probes.stop()
        for d in drips:
            d.stop()
        assert probes.answered == len(probes.results) > 0
