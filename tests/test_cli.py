"""The rolloff command (service/cli.py)."""

from __future__ import annotations

import subprocess
import sys


def _run(*args):
    return subprocess.run([sys.executable, "-m", "service", *args], capture_output=True, text=True, timeout=120)


def test_openapi_check_passes_on_the_committed_document():
    result = _run("openapi", "--check")
    assert result.returncode == 0, result.stderr


def test_usage_errors_exit_nonzero():
    assert _run("openapi").returncode == 2          # --write or --check is required
    assert _run("no-such-command").returncode == 2
    assert "serve" in _run("--help").stdout
