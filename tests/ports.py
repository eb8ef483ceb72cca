"""Loopback TCP ports for the servers the tests start.

By default the kernel picks a free ephemeral port. Where only a range of ports
may be used (a shared machine, a firewall), set ``ROLLOFF_TEST_PORTS=18100-18199``:
ports are then taken from that range, each at most once per test process.
"""

from __future__ import annotations

import os
import random
import socket

_handed_out: set[int] = set()


def _bindable(port: int, host: str) -> bool:
    with socket.socket() as s:
        s.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            s.bind((host, port))
        except OSError:
            return False
    return True


def free_port(host: str = "127.0.0.1") -> int:
    """A TCP port free on ``host`` at the time of the call (from ``ROLLOFF_TEST_PORTS`` when set)."""
    span = os.environ.get("ROLLOFF_TEST_PORTS", "").strip()
    if not span:
        with socket.socket() as s:
            s.bind((host, 0))
            return s.getsockname()[1]
    low, high = (int(p) for p in span.split("-"))
    candidates = [p for p in range(low, high + 1) if p not in _handed_out]
    random.shuffle(candidates)
    for port in candidates:
        if _bindable(port, host):
            _handed_out.add(port)
            return port
    raise RuntimeError(f"no free port left in ROLLOFF_TEST_PORTS={span}")
