"""The service's gunicorn worker: gthread with read deadlines, problem+json errors and a backlog drain.

``RolloffWorker`` is gunicorn's threaded worker (``gthread``; written for
gunicorn 27, pinned in pyproject.toml) with three additions:

Read deadlines
    A client gets ``ROLLOFF_BODY_TIMEOUT_S`` to send its request headers, and
    again that long for its body (:func:`service.api.body.read_body` arms it
    through ``environ["rolloff.io_deadline"]``). A watchdog thread per worker
    shuts down the reading side of a connection whose deadline passed, which
    wakes the thread blocked on it: a client dripping its headers gets a 408
    problem and the connection is closed; one dripping its body gets a 408
    from the app. A per-read socket timeout would not do: a client sending
    one byte per second never lets a single read time out.
Errors gunicorn answers itself
    A request gunicorn's parser refuses before the app sees it (bad request
    line, URI over ``limit_request_line``: 414, too many or too large header
    fields: 431, invalid header, unsupported transfer coding: 501, ...) is
    answered as ``application/problem+json`` instead of gunicorn's HTML page,
    with gunicorn's own status and message.
Backlog drain on stop
    On SIGTERM (or when recycled) a worker stops accepting; connections the
    kernel had already accepted into the listen backlog would be reset when
    the last copy of the listening socket closes. The worker accepts and
    serves what is in the backlog, then closes its copy of the listening
    socket at once, so that later connection attempts are refused (a proxy
    retries those on another instance) rather than queued and reset.

Nothing here computes or knows the API; the app runs unchanged under any
WSGI server (without these additions).
"""

from __future__ import annotations

import errno
import heapq
import html
import itertools
import json
import re
import socket
import sys
import threading
import time

from gunicorn.workers.gthread import TConn, ThreadWorker

from service.config import Settings
from service.version import SERVICE_VERSION

PROBLEM_MEDIA_TYPE = "application/problem+json"

#: GIL switch interval of a worker (s); see RolloffWorker.init_process.
SWITCH_INTERVAL_S = 0.001

#: Problem type slugs of the statuses gunicorn answers itself.
_SLUGS = {400: "malformed-request", 403: "forbidden", 408: "header-timeout", 414: "uri-too-long",
          417: "expectation-failed", 431: "header-fields-too-large", 500: "internal", 501: "not-implemented"}


class IoDeadline:
    """The read deadline of one connection (armed for its headers, then by the app for its body)."""

    def __init__(self, watchdog: "Watchdog", sock: socket.socket):
        self._watchdog = watchdog
        self._sock = sock
        self._lock = threading.Lock()
        self._generation = 0
        self.expired = False
        self.phase = "idle"

    def arm(self, seconds: float) -> None:
        """Shut the connection's reading side ``seconds`` from now, unless disarmed before."""
        with self._lock:
            self._generation += 1
            self.expired = False
            generation = self._generation
        self._watchdog.schedule(time.monotonic() + float(seconds), self, generation)

    def disarm(self) -> None:
        with self._lock:
            self._generation += 1

    def fire(self, generation: int) -> None:
        with self._lock:
            if generation != self._generation:
                return
            self._generation += 1
            self.expired = True
            try:
                self._sock.shutdown(socket.SHUT_RD)
            except OSError:  # already closed by the client
                pass


class Watchdog:
    """One thread that fires the armed deadlines of a worker process in time order."""

    def __init__(self):
        self._heap: list[tuple[float, int, IoDeadline, int]] = []
        self._cv = threading.Condition()
        self._seq = itertools.count()
        self._thread = threading.Thread(target=self._run, name="rolloff-io-deadlines", daemon=True)
        self._thread.start()

    def schedule(self, when: float, deadline: IoDeadline, generation: int) -> None:
        with self._cv:
            heapq.heappush(self._heap, (when, next(self._seq), deadline, generation))
            self._cv.notify()

    def _run(self) -> None:
        while True:
            with self._cv:
                while not self._heap:
                    self._cv.wait()
                when, _, deadline, generation = self._heap[0]
                wait = when - time.monotonic()
                if wait > 0:
                    self._cv.wait(wait)
                    continue
                heapq.heappop(self._heap)
            deadline.fire(generation)


class _Capture:
    """A stand-in socket that keeps what gunicorn writes (its HTML error page), to rewrite it."""

    def __init__(self):
        self.data = b""

    def gettimeout(self):
        return 0.0

    def setblocking(self, flag):
        pass

    def sendall(self, data):
        self.data += data


def problem_bytes(status: int, reason: str, detail: str) -> bytes:
    """A complete ``Connection: close`` HTTP/1.1 response carrying an RFC 9457 problem."""
    body = json.dumps({"type": f"urn:rolloff:problem:{_SLUGS.get(status, 'malformed-request')}", "title": reason,
                       "status": status, "detail": detail, "instance": None, "request_id": None}).encode()
    head = (f"HTTP/1.1 {status} {reason}\r\nConnection: close\r\nContent-Type: {PROBLEM_MEDIA_TYPE}\r\n"
            f"Content-Length: {len(body)}\r\nX-Rolloff-Version: {SERVICE_VERSION}\r\n\r\n")
    return head.encode("latin-1") + body


def problem_from_html(page: bytes) -> bytes:
    """gunicorn's HTML error response -> the same status and message as problem+json."""
    text = page.decode("latin-1", "replace")
    m = re.match(r"HTTP/1\.[01] (\d{3}) ([^\r\n]*)", text)
    status, reason = (int(m.group(1)), m.group(2).strip()) if m else (400, "Bad Request")
    body = re.search(r"</h1>(.*)</body>", text, re.S)
    detail = html.unescape(body.group(1)).strip() if body else ""
    if status >= 500:
        detail = "The server failed to read this request."
    return problem_bytes(status, reason, detail or reason)


class RolloffWorker(ThreadWorker):
    """gunicorn's gthread worker with read deadlines, problem+json errors and a backlog drain."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.read_timeout_s = float(Settings.from_env().body_timeout_s)
        self._current = threading.local()
        self.watchdog: Watchdog | None = None

    def init_process(self):
        self.watchdog = Watchdog()
        # A thread waiting for the GIL gets it after at most this long while a computation holds it
        # (CPython's default is 5 ms). /readyz makes a few hundred numpy calls, each giving the GIL back
        # and waiting to retake it: with 5 ms per handoff it took about 1 s beside a computing thread.
        sys.setswitchinterval(SWITCH_INTERVAL_S)
        super().init_process()

    def load_wsgi(self):
        super().load_wsgi()
        app = self.wsgi
        current = self._current

        def with_io_deadline(environ, start_response):
            conn = getattr(current, "conn", None)
            deadline = getattr(conn, "rolloff_deadline", None)
            if deadline is not None:
                deadline.disarm()          # the headers have arrived
                deadline.phase = "app"
                environ["rolloff.io_deadline"] = deadline

            def start(status, headers, exc_info=None):
                # gunicorn drops hop-by-hop headers: an app's "Connection: close" (after a refused or
                # unfinished body) becomes a forced close of the connection here.
                if any(k.lower() == "connection" and v.strip().lower() == "close" for k, v in headers):
                    response = getattr(start_response, "__self__", None)
                    if response is not None and hasattr(response, "force_close"):
                        response.force_close()
                return start_response(status, headers, exc_info)

            return app(environ, start)

        self.wsgi = with_io_deadline

    # --- read deadlines ------------------------------------------------------------------------
    def enqueue_req(self, conn):
        deadline = getattr(conn, "rolloff_deadline", None)
        if deadline is None:
            deadline = conn.rolloff_deadline = IoDeadline(self.watchdog, conn.sock)
        deadline.phase = "headers"
        deadline.arm(self.read_timeout_s)
        super().enqueue_req(conn)

    def finish_request(self, conn, fs):
        deadline = getattr(conn, "rolloff_deadline", None)
        if deadline is not None:
            deadline.disarm()
            deadline.phase = "idle"
        super().finish_request(conn, fs)

    def handle_request(self, req, conn):
        self._current.conn = conn
        try:
            return super().handle_request(req, conn)
        finally:
            self._current.conn = None

    def handle(self, conn):
        result = super().handle(conn)
        deadline = getattr(conn, "rolloff_deadline", None)
        if result is False and deadline is not None and deadline.expired and deadline.phase == "headers":
            try:
                conn.sock.sendall(problem_bytes(
                    408, "Request Timeout",
                    f"The request headers did not arrive within {self.read_timeout_s:g} s "
                    "(set by ROLLOFF_BODY_TIMEOUT_S)."))
            except OSError:
                pass
        return result

    # --- errors gunicorn answers itself ----------------------------------------------------------
    def handle_error(self, req, client, addr, exc):
        captured = _Capture()
        super().handle_error(req, captured, addr, exc)
        if not captured.data:
            return
        try:
            client.setblocking(False)
            client.sendall(problem_from_html(captured.data))
        except OSError:
            self.log.debug("Failed to send error message.")
        finally:
            try:
                client.setblocking(True)
            except OSError:
                pass

    # --- stop: serve the backlog, then refuse -----------------------------------------------------
    def set_accept_enabled(self, enabled):
        super().set_accept_enabled(enabled)
        if enabled or self.alive:
            return
        for listener in self.sockets:
            self._drain(listener)
            listener.close()

    def _drain(self, listener) -> None:
        """Accept every connection already in ``listener``'s backlog and queue it for the threads."""
        while True:
            try:
                listener.setblocking(False)
                client, addr = listener.accept()
            except (BlockingIOError, InterruptedError):
                return
            except OSError as exc:
                if exc.errno not in (errno.ECONNABORTED,):
                    return
                continue
            self.nr_conns += 1
            client.setblocking(True)
            self.enqueue_req(TConn(self.cfg, client, addr, listener.getsockname()))
