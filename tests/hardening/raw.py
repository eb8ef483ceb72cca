"""Send a :class:`tests.hardening.corpus.RawCase` on a socket and judge the answer (live servers only)."""

from __future__ import annotations

import json
import socket
import time

from tests.hardening.corpus import PROBLEM, RawCase, leaks


def send_raw(port: int, case: RawCase) -> tuple[bytes, float]:
    """(everything the server sent until it closed or the case's time ran out, seconds taken)."""
    started = time.perf_counter()
    out = b""
    with socket.create_connection(("127.0.0.1", port), timeout=case.timeout) as s:
        try:
            s.sendall(case.data)
        except OSError:  # the server answered and closed before taking everything (e.g. 413)
            pass
        end = started + max(case.timeout, case.drip_s)
        while True:
            left = end - time.perf_counter()
            if left <= 0:
                break
            s.settimeout(left)
            try:
                data = s.recv(65536)
            except (socket.timeout, OSError):
                break
            if not data:
                break
            out += data
            if b"\r\n\r\n" in out:
                head, _, body = out.partition(b"\r\n\r\n")
                length = [int(line.split(b":", 1)[1]) for line in head.split(b"\r\n")
                          if line.lower().startswith(b"content-length:")]
                if length and len(body) >= length[0]:
                    break
    return out, time.perf_counter() - started


def judge_raw(case: RawCase, answer: bytes, seconds: float) -> str | None:
    """None when ``answer`` is the problem ``case`` demands, in time; else what is wrong."""
    if not answer:
        return f"no answer within {case.timeout} s"
    if seconds > case.timeout:
        return f"answered after {seconds:.2f} s (limit {case.timeout} s)"
    head, _, body = answer.partition(b"\r\n\r\n")
    status_line, *header_lines = head.decode("latin-1").split("\r\n")
    parts = status_line.split(" ", 2)
    status = int(parts[1]) if len(parts) > 1 and parts[1].isdigit() else 0
    headers = {k.strip().lower(): v.strip() for k, _, v in (h.partition(":") for h in header_lines)}
    if status != case.status:
        return f"status {status}, expected {case.status}: {answer[:300]!r}"
    if headers.get("content-type", "").split(";")[0] != PROBLEM:
        return f"content type {headers.get('content-type')!r}, expected {PROBLEM}"
    leak = leaks(body)
    if leak:
        return f"the body reveals {leak!r}"
    try:
        problem = json.loads(body)
    except ValueError:
        return f"body is not JSON: {body[:200]!r}"
    if problem.get("status") != status or not problem.get("type") or not problem.get("title"):
        return f"not a complete problem: {problem}"
    if case.detail.lower() not in str(problem.get("detail", "")).lower():
        return f"detail {problem.get('detail')!r} lacks {case.detail!r}"
    return None
