"""A live service (gunicorn, loopback) and headless Chromium for the page and docs tests.

Chromium is Debian's (``/usr/bin/chromium``), driven by Playwright without
``playwright install``: nothing is downloaded at test time. Screenshots go to
``tests/web/artifacts/`` (kept by CI, ignored by git).
"""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

CHROMIUM = os.environ.get("ROLLOFF_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
ARTIFACTS = Path(__file__).resolve().parent / "artifacts"
ROOT = Path(__file__).resolve().parents[2]
#: Ports the test servers may take (loopback only).
PORTS = range(int(os.environ.get("ROLLOFF_TEST_PORT_FIRST", "18450")), int(os.environ.get("ROLLOFF_TEST_PORT_LAST", "18499")) + 1)


def free_port() -> int:
    if os.environ.get("ROLLOFF_TEST_PORTS", "").strip():     # the range every other test server keeps to
        from tests.ports import free_port as ranged

        return ranged()
    for port in PORTS:
        with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
            try:
                s.bind(("127.0.0.1", port))
            except OSError:
                continue
            return port
    raise RuntimeError(f"no free port in {PORTS.start}-{PORTS.stop - 1} on 127.0.0.1")


class Service:
    """A gunicorn-served rolloff on 127.0.0.1 (two workers, as deployed)."""

    def __init__(self, **env: str):
        self.port = free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        environment = {k: v for k, v in os.environ.items() if not k.startswith("ROLLOFF_")}
        environment.update(env)
        self.log = open(ARTIFACTS / f"service-{self.port}.log", "w")
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "service", "serve", "--host", "127.0.0.1", "--port", str(self.port),
             "--workers", "2"], cwd=ROOT, env=environment, stdout=self.log, stderr=subprocess.STDOUT)
        deadline = time.monotonic() + 60
        while True:
            try:
                with urllib.request.urlopen(self.url + "/healthz", timeout=2) as r:
                    if r.status == 200:
                        break
            except (urllib.error.URLError, ConnectionError, OSError):
                pass
            if self.proc.poll() is not None or time.monotonic() > deadline:
                self.stop()
                raise RuntimeError(f"the service did not start; see {self.log.name}")
            time.sleep(0.2)

    def post(self, path: str, body, *, key: str | None = None) -> tuple[int, str, str]:
        """POST JSON; (status, content type, text)."""
        req = urllib.request.Request(self.url + path, data=json.dumps(body).encode(), method="POST",
                                     headers={"Content-Type": "application/json"})
        if key:
            req.add_header("Authorization", f"Bearer {key}")
        try:
            with urllib.request.urlopen(req, timeout=60) as r:
                return r.status, r.headers.get("Content-Type", ""), r.read().decode()
        except urllib.error.HTTPError as e:
            return e.code, e.headers.get("Content-Type", ""), e.read().decode()

    def get(self, path: str, *, key: str | None = None) -> tuple[int, str, str]:
        req = urllib.request.Request(self.url + path)
        if key:
            req.add_header("Authorization", f"Bearer {key}")
        try:
            with urllib.request.urlopen(req, timeout=60) as r:
                return r.status, r.headers.get("Content-Type", ""), r.read().decode()
        except urllib.error.HTTPError as e:
            return e.code, e.headers.get("Content-Type", ""), e.read().decode()

    def stop(self) -> None:
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        self.log.close()


@pytest.fixture(scope="session")
def service():
    ARTIFACTS.mkdir(exist_ok=True)
    svc = Service()
    yield svc
    svc.stop()


@pytest.fixture(scope="session")
def browser():
    from playwright.sync_api import sync_playwright

    if not os.access(CHROMIUM, os.X_OK):
        raise RuntimeError(f"headless Chromium not found at {CHROMIUM}: install Debian's chromium (scripts/test does)")
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture
def page(browser, request):
    """A fresh tab (own session storage) at 1280 x 800 that records page errors; screenshot kept on failure."""
    context = browser.new_context(viewport={"width": 1280, "height": 800}, accept_downloads=True)
    pg = context.new_page()
    pg.errors = []
    pg.on("pageerror", lambda e: pg.errors.append(str(e)))
    pg.on("console", lambda m: pg.errors.append(m.text) if m.type == "error" else None)
    yield pg
    if request.node.rep_call.failed if hasattr(request.node, "rep_call") else False:
        pg.screenshot(path=str(ARTIFACTS / f"failed-{request.node.name}.png"), full_page=True)
    context.close()


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    outcome = yield
    rep = outcome.get_result()
    setattr(item, "rep_" + rep.when, rep)


def shot(pg, name: str, *, full_page: bool = True) -> Path:
    """Save a screenshot under tests/web/artifacts/."""
    ARTIFACTS.mkdir(exist_ok=True)
    path = ARTIFACTS / f"{name}.png"
    pg.screenshot(path=str(path), full_page=full_page)
    return path
