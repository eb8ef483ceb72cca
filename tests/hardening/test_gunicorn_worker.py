"""Pieces of the service's gunicorn worker that need no server: read deadlines and the error rewrite."""

from __future__ import annotations

import json
import socket
import threading
import time

from gunicorn import util

from service.gunicorn_worker import IoDeadline, Watchdog, problem_from_html


def test_a_passed_deadline_wakes_a_blocked_read_with_end_of_file():
    a, b = socket.socketpair()
    try:
        deadline = IoDeadline(Watchdog(), a)
        got = {}
        reader = threading.Thread(target=lambda: got.update(data=a.recv(10)))
        reader.start()
        b.sendall(b"x")
        time.sleep(0.05)
        deadline.arm(0.05)
        reader.join(5)
        assert got == {"data": b"x"}           # the byte before the deadline arrived
        assert a.recv(10) == b""               # after it, the reading side is shut: end of file
        assert deadline.expired
        a.sendall(b"still writable")           # an answer (408) can still be written
        assert b.recv(100) == b"still writable"
    finally:
        a.close()
        b.close()


def test_a_disarmed_deadline_never_fires():
    a, b = socket.socketpair()
    try:
        deadline = IoDeadline(Watchdog(), a)
        deadline.arm(0.05)
        deadline.disarm()
        time.sleep(0.2)
        assert not deadline.expired
        b.sendall(b"y")
        assert a.recv(10) == b"y"
        deadline.arm(10)
        deadline.arm(0.05)  # re-armed: the later arming wins
        time.sleep(0.3)
        assert deadline.expired
    finally:
        a.close()
        b.close()


class _Sink:
    def __init__(self):
        self.data = b""

    def gettimeout(self):
        return 0.0

    def setblocking(self, flag):
        pass

    def sendall(self, data):
        self.data += data


def test_gunicorns_html_error_page_becomes_the_same_problem():
    sink = _Sink()
    util.write_error(sink, 414, "URI Too Long", "Request Line is too large (9014 > 8190) <script>")
    answer = problem_from_html(sink.data)
    head, _, body = answer.partition(b"\r\n\r\n")
    assert head.startswith(b"HTTP/1.1 414 URI Too Long\r\n")
    assert b"Content-Type: application/problem+json" in head and b"Connection: close" in head
    assert int(head.split(b"Content-Length: ")[1].split(b"\r\n")[0]) == len(body)
    problem = json.loads(body)
    assert problem == {"type": "urn:rolloff:problem:uri-too-long", "title": "URI Too Long", "status": 414,
                       "detail": "Request Line is too large (9014 > 8190) <script>", "instance": None,
                       "request_id": None}


def test_a_server_error_page_says_nothing_of_the_cause():
    sink = _Sink()
    util.write_error(sink, 500, "Internal Server Error", "")
    problem = json.loads(problem_from_html(sink.data).partition(b"\r\n\r\n")[2])
    assert problem["status"] == 500 and problem["type"] == "urn:rolloff:problem:internal"
    assert problem["detail"] == "The server failed to read this request."
