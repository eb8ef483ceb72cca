"""The allocator's arena cap of the gunicorn workers (service/malloc.py)."""

from __future__ import annotations

import platform
import subprocess
import sys

import pytest

from service.malloc import limit_arenas


def test_glibc_takes_the_arena_cap():
    # source: GNU C Library manual, "Malloc Tunable Parameters": mallopt(M_ARENA_MAX, n) returns 1 on success
    if platform.libc_ver()[0] != "glibc":
        pytest.skip("not glibc: the cap is not applied")
    out = subprocess.run([sys.executable, "-c", "from service.malloc import limit_arenas; print(limit_arenas(2))"],
                         capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "True"


def test_a_cap_below_one_is_refused():
    with pytest.raises(ValueError, match="count"):
        limit_arenas(0)


def test_the_gunicorn_configuration_caps_arenas_at_the_compute_slots():
    # the master reads the configuration (and sets the cap) before it preloads the app
    code = ("import service.gunicorn_conf as c; from service.config import Settings; "
            "print(c.MALLOC_ARENAS, Settings.from_env().compute_slots)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env={"PATH": "/usr/bin:/bin", "ROLLOFF_COMPUTE_SLOTS": "3"})
    arenas, slots = (int(x) for x in out.stdout.split())
    assert (arenas, slots) == (3, 3)
