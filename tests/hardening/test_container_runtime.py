"""The image's runtime facts: non-root, read-only root filesystem, every write under /tmp.

No container engine runs on the build machines, so the image command is run
here with the image's environment, /tmp replaced by a scratch folder, and the
test checks where the service wrote (matplotlib's cache, the metrics files).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import pytest
from dockerfile_parse import DockerfileParser

from tests.hardening.server import free_port

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def dockerfile():
    return DockerfileParser(path=str(ROOT / "Dockerfile"))


def test_runs_as_numeric_non_root_user(dockerfile):
    users = [i["value"] for i in dockerfile.structure if i["instruction"] == "USER"]
    assert users and users[-1].isdigit() and int(users[-1]) != 0


def test_every_write_location_is_under_tmp(dockerfile):
    env = dockerfile.envs
    assert env["MPLCONFIGDIR"].startswith("/tmp/")
    assert env["PROMETHEUS_MULTIPROC_DIR"].startswith("/tmp/")
    assert env["PYTHONDONTWRITEBYTECODE"] == "1"  # no __pycache__ next to the code
    from service import gunicorn_conf

    assert gunicorn_conf.worker_tmp_dir == "/tmp"
    assert gunicorn_conf.preload_app is True
    assert gunicorn_conf.control_socket_disable is True  # no socket under $HOME


def test_healthcheck_needs_no_extra_package(dockerfile):
    health = [i["value"] for i in dockerfile.structure if i["instruction"] == "HEALTHCHECK"][0]
    assert "/healthz" in health and "urllib.request" in health
    assert "curl" not in health and "wget" not in health


def test_image_command_writes_only_to_its_tmp(dockerfile):
    cmd = json.loads([i["value"] for i in dockerfile.structure if i["instruction"] == "CMD"][0])
    scratch = Path(tempfile.mkdtemp(prefix="rolloff-image-tmp-"))
    env = {k: v.replace("/tmp", str(scratch)) if isinstance(v, str) and v.startswith("/tmp") else v
           for k, v in dockerfile.envs.items()}
    port = free_port()
    env.update(ROLLOFF_HOST="127.0.0.1", ROLLOFF_PORT=str(port), ROLLOFF_WORKERS="2",
               PATH=os.path.dirname(sys.executable) + os.pathsep + os.environ.get("PATH", ""),
               HOME=str(scratch / "no-home"), PYTHONPATH=str(ROOT))
    workdir = Path(tempfile.mkdtemp(prefix="rolloff-image-cwd-"))
    proc = subprocess.Popen(cmd, env=env, cwd=str(workdir), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            start_new_session=True)
    try:
        deadline = time.monotonic() + 60
        up = False
        while time.monotonic() < deadline and not up:
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{port}/healthz", timeout=2) as r:
                    up = r.status == 200
            except OSError:
                assert proc.poll() is None, proc.stderr.read().decode()
                time.sleep(0.3)
        assert up
        body = json.dumps({"filter": {"response": "lowpass", "family": "butterworth", "order": 4,
                                      "cutoff_hz": 1000}, "format": "svg"}).encode()
        req = urllib.request.Request(f"http://127.0.0.1:{port}/v1/responses", data=body,
                                     headers={"Content-Type": "application/json"})
        with urllib.request.urlopen(req, timeout=60) as r:
            assert r.status == 200 and b"<svg" in r.read()
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/metrics", timeout=10) as r:
            assert b'endpoint="/v1/responses"' in r.read()
        metrics_dir = Path(env["PROMETHEUS_MULTIPROC_DIR"])
        assert any(p.suffix == ".db" for p in metrics_dir.iterdir())
        assert list(workdir.iterdir()) == []  # nothing written to the working directory
        assert not (scratch / "no-home").exists()  # nothing written to a home directory
        written = {p.relative_to(scratch).parts[0] for p in scratch.rglob("*")}
        allowed = {Path(env[k]).name for k in ("MPLCONFIGDIR", "PROMETHEUS_MULTIPROC_DIR", "NUMBA_CACHE_DIR")}
        assert written <= allowed, written                                  # numba: the compiled loops
    finally:
        os.killpg(proc.pid, signal.SIGTERM)
        proc.wait(timeout=30)
