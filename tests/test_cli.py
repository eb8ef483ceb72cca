"""The rolloff command (service/cli.py)."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest


def _run(*args):
    return subprocess.run([sys.executable, "-m", "service", *args], capture_output=True, text=True, timeout=120)


def test_openapi_check_passes_on_the_committed_document():
    result = _run("openapi", "--check")
    assert result.returncode == 0, result.stderr


def test_usage_errors_exit_nonzero():
    assert _run("openapi").returncode == 2          # --write or --check is required
    assert _run("no-such-command").returncode == 2
    assert "serve" in _run("--help").stdout


def test_version():
    from importlib.metadata import version

    result = _run("--version")
    assert result.returncode == 0
    assert result.stdout == f"rolloff {version('rolloff')}\n"


def _env(**extra):
    env = {k: v for k, v in os.environ.items() if not k.startswith("ROLLOFF_")}
    env.update(extra)
    return env


def _one_line_no_traceback(stderr: str, *needles: str) -> None:
    lines = stderr.splitlines()
    assert len(lines) == 1, stderr
    assert "Traceback" not in stderr
    for needle in needles:
        assert needle in lines[0], lines[0]


def test_serve_with_an_invalid_setting_exits_2_with_one_line():
    result = subprocess.run([sys.executable, "-m", "service", "serve"], env=_env(ROLLOFF_WORKERS="abc"),
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 2
    _one_line_no_traceback(result.stderr, "ROLLOFF_WORKERS", "'abc'", "a whole number from 1 up")


@pytest.mark.parametrize("argv", [
    ["--config", "python:service.gunicorn_conf", "service.wsgi:app"],   # what `rolloff serve` and the image run
    ["--preload", "--bind", "127.0.0.1:1", "service.wsgi:app"],        # the WSGI module under a plain gunicorn
], ids=["project-config", "plain-gunicorn"])
def test_gunicorn_master_with_an_invalid_setting_exits_2_with_one_line(argv):
    result = subprocess.run([sys.executable, "-m", "gunicorn", *argv], env=_env(ROLLOFF_LOG_LEVEL="loud"),
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 2
    _one_line_no_traceback(result.stderr, "ROLLOFF_LOG_LEVEL", "'loud'",
                           "one of debug, info, warning, error, critical")


def test_serve_option_out_of_range_is_a_usage_error():
    result = _run("serve", "--port", "0")
    assert result.returncode == 2 and "1 to 65535" in result.stderr


def test_unknown_variables_are_listed_once_when_the_service_starts():
    from tests.hardening.server import Gunicorn

    server = Gunicorn(workers=1, env={"ROLLOFF_WORKER": "3", "ROLLOFF_COLOUR": "blue"})
    with server:
        pass
    warnings = [line for line in server.output().splitlines() if "unknown settings" in line]
    assert warnings == ["rolloff: warning: unknown settings ignored: ROLLOFF_COLOUR, "
                        "ROLLOFF_WORKER (did you mean ROLLOFF_WORKERS?)"]
