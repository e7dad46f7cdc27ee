"""The gunicorn worker of uvdose: gthread, with every request received whole before a thread takes it.

gunicorn's ``gthread`` worker hands a connection to a thread as soon as its first bytes
arrive; the thread then reads the rest of the headers and the body from a blocking
socket, with no time limit. A client that sends half a request and then nothing holds
that thread for ever, and a few such clients hold every thread of every worker: the
service stops answering, ``/livez`` included, and nothing is logged.

:class:`BufferingWorker` keeps the reading in the worker's event loop instead, as a
buffering front (nginx's request buffering, say) would. A connection is read without
blocking, from any number of clients at once, until its request is complete: the
headers, then the body its framing announces (``Content-Length``, or chunked up to the
last chunk and trailers; :class:`RequestFraming`). Only then does a thread parse and
serve it, from memory, so threads only ever compute. While receiving:

* from a request's first byte, the headers must be in within ``UVDOSE_HEADER_TIMEOUT_S``
  and the body within ``UVDOSE_BODY_TIMEOUT_S`` after them; a client that falls behind
  gets a 408 problem and the connection is closed, logged as a warning (how much had
  arrived, never the client's address);
* a body larger than ``UVDOSE_MAX_BODY_BYTES`` (its ``Content-Length``, or chunk sizes
  as they come) gets the 413 problem as soon as that is known, without waiting for the
  rest, and the connection lingers shortly to let the client read it;
* an idle kept-alive connection closes after ``UVDOSE_KEEPALIVE`` seconds, as in gthread;
* the bodies a worker is receiving hold at most :data:`BUFFER_BUDGET_BODIES` largest bodies
  of memory (each reserves its length, or the limit when chunked, once its headers are in);
  a request with no room waits, its bytes left to TCP, until earlier ones go to the threads;
* ``Expect: 100-continue`` is answered once the headers are in and the body is not too
  large, so a client waiting for it sends its body;
* an answer that makes no progress for ``UVDOSE_BODY_TIMEOUT_S`` (a client that stopped
  reading) is cut and logged, so slow readers do not hold threads either.

A request the framing scan cannot make sense of (no valid length, an odd transfer
coding, headers past gunicorn's limits) is handed to gunicorn's own parser as it is,
which picks its 400, 414, 431 or 501 and logs it; the worker writes that answer as a
problem document (gunicorn's HTML page is caught and rewritten: its status, reason and
message kept). Reading the remainder of such a request from the socket is bounded by
the body timeout.

Stopping (SIGTERM): the worker closes its listening sockets at once, so new
connections are refused rather than left waiting in the backlog; it brings every
running request's deadline forward to shortly before the graceful timeout
(``service.request_deadline.stop_by``), so a request the drain cannot wait for answers
a 503 rather than being cut; requests still arriving keep their timeouts; and when the
graceful period ends it logs how many requests and connections it had to cut.

TLS is left to the front that terminates it (ingress, proxy): with gunicorn's own TLS
(``certfile``) the worker serves exactly as gthread does, reading in threads.
"""
from __future__ import annotations

import errno
import re
import selectors
import socket
import time
from functools import partial

from gunicorn import http
from gunicorn.workers import gthread

RECV_BYTES = 256 * 1024
BUFFER_BUDGET_BODIES = 8
"""A worker buffers at most this many largest bodies (8 x 16 MiB by default) across all the
requests it is receiving; past it, reading pauses until requests go to the threads."""
LINGER_S = 3.0
LINGER_MAX_BYTES = 64 * 1024 * 1024
"""After a 400, 408 or 413 from the event loop, the connection stays open up to LINGER_S
and LINGER_MAX_BYTES, its input read and dropped, so that a client still sending its body
(most do not wait for ``100 Continue``) gets to read the answer instead of a reset (RFC 9112
§9.6). Dropping input costs no memory; the figures are common practice, no source."""
REPORT_BEFORE_KILL_S = 1.5  # the event loop wakes at least once a second
STOP_MARGIN_FRACTION, STOP_MARGIN_MIN_S, STOP_MARGIN_MAX_S = 0.2, 2.0, 5.0
"""Share of the graceful timeout kept for answering once running requests are stopped
(2 to 5 s): a 30 s graceful timeout stops them at 25 s, a 6 s one at 4 s. The stop takes
effect at a request's next deadline check, so the margin must cover one part of its work."""

_HEX = re.compile(rb"[0-9A-Fa-f]{1,16}")
_DIGITS = re.compile(rb"[0-9]{1,19}")


class RequestFraming:
    """Where the first request in a buffer ends, found incrementally (RFC 9112 §6, §7.1).

    :meth:`scan` says ``"more"`` (keep reading), ``"complete"`` (:attr:`end` bytes hold the
    whole request), ``"too-large"`` (the body is over ``max_body_bytes``:
    :attr:`body_bytes` is what is known of its size, exact when :attr:`body_bytes_exact`)
    or ``"handover"`` (framing this scan does not judge: gunicorn's parser will).
    """

    def __init__(self, max_header_bytes: int, max_body_bytes: int, max_chunk_line: int = 4096,
                 max_trailer_bytes: int = 65536):
        self.max_header_bytes = max_header_bytes
        self.max_body_bytes = max_body_bytes
        self.max_chunk_line = max_chunk_line
        self.max_trailer_bytes = max_trailer_bytes
        self.header_end: int | None = None
        self.expects_continue = False
        self.body_bytes = 0
        self.body_bytes_exact = True
        self.end: int | None = None
        self._length: int | None = None  # Content-Length framing
        self._chunked = False
        self._pos = 0  # chunked: where the next unread chunk-size line (or trailer) starts
        self._state = "size"

    @property
    def chunked(self) -> bool:
        return self._chunked

    @property
    def headers_complete(self) -> bool:
        return self.header_end is not None

    def scan(self, buf: bytearray) -> str:
        if self.header_end is None:
            found = buf.find(b"\r\n\r\n")
            if found < 0:
                return "handover" if len(buf) > self.max_header_bytes else "more"
            self.header_end = found + 4
            verdict = self._read_headers(bytes(buf[:found]))
            if verdict != "more":
                return verdict
        if not self._chunked:
            if len(buf) >= self.header_end + self._length:
                self.end = self.header_end + self._length
                return "complete"
            return "more"
        return self._scan_chunks(buf)

    def _read_headers(self, head: bytes) -> str:
        lengths, codings = [], []
        for line in head.split(b"\r\n")[1:]:
            name, colon, value = line.partition(b":")
            if not colon:
                return "handover"
            name, value = name.strip().lower(), value.strip()
            if name == b"content-length":
                lengths.append(value)
            elif name == b"transfer-encoding":
                codings += [part.strip().lower() for part in value.split(b",") if part.strip()]
            elif name == b"expect" and value.lower() == b"100-continue":
                self.expects_continue = True
        if codings:
            if lengths or codings[-1] != b"chunked" or codings.count(b"chunked") != 1:
                return "handover"  # gunicorn refuses these itself (RFC 9112 §6.1)
            self._chunked = True
            self._pos = self.header_end
            return "more"
        if len(set(lengths)) > 1 or (lengths and not _DIGITS.fullmatch(lengths[0])):
            return "handover"
        self._length = int(lengths[0]) if lengths else 0
        self.body_bytes = self._length
        return "too-large" if self._length > self.max_body_bytes else "more"

    def _scan_chunks(self, buf: bytearray) -> str:
        while True:
            if self._state == "size":
                line_end = buf.find(b"\r\n", self._pos)
                if line_end < 0:
                    return "handover" if len(buf) - self._pos > self.max_chunk_line else "more"
                size_text = bytes(buf[self._pos:line_end]).split(b";", 1)[0].strip()
                if not _HEX.fullmatch(size_text):
                    return "handover"
                size = int(size_text, 16)
                self.body_bytes += size
                if self.body_bytes > self.max_body_bytes:
                    self.body_bytes_exact = False
                    return "too-large"
                self._pos = line_end + 2
                if size == 0:
                    self._state = "trailers"
                else:
                    self._state, self._pos = "data", self._pos + size + 2
            if self._state == "data":
                if len(buf) < self._pos:
                    return "more"
                self._state = "size"
                continue
            if self._state == "trailers":
                if buf[self._pos:self._pos + 2] == b"\r\n":
                    self.end = self._pos + 2
                    return "complete"
                found = buf.find(b"\r\n\r\n", self._pos)
                if found >= 0:
                    self.end = found + 4
                    return "complete"
                return "handover" if len(buf) - self._pos > self.max_trailer_bytes else "more"


class Inbox:
    """What a thread's gunicorn parser reads from: the bytes the event loop received, then
    (only for a request handed over unjudged) the socket itself, with a timeout."""

    def __init__(self, sock: socket.socket, fallback_timeout_s: float):
        self.sock = sock
        self.fallback_timeout_s = fallback_timeout_s
        self.buffer = bytearray()

    def recv(self, size: int) -> bytes:
        if self.buffer:
            piece = bytes(self.buffer[:size])
            del self.buffer[:size]
            return piece
        previous = self.sock.gettimeout()
        self.sock.settimeout(self.fallback_timeout_s)
        try:
            return self.sock.recv(size)
        finally:
            self.sock.settimeout(previous)

    def gettimeout(self):
        return self.sock.gettimeout()

    def settimeout(self, value) -> None:
        self.sock.settimeout(value)


class BufferedConn(gthread.TConn):
    """A gthread connection whose requests are received by the event loop (see module)."""

    def __init__(self, cfg, sock, client, server, body_timeout_s: float):
        super().__init__(cfg, sock, client, server)
        self.inbox = Inbox(sock, body_timeout_s)
        self.send_timeout_s = body_timeout_s
        self.framing: RequestFraming | None = None
        self.first_byte_at: float | None = None
        self.headers_at: float | None = None
        self.idle_until = 0.0
        self.linger_until: float | None = None
        self.lingered_bytes = 0
        self.sent_continue = False
        self.reserved_bytes = 0  # of the worker's buffer budget, while its body is received

    def init(self) -> None:
        if not self.initialized and not self.cfg.is_ssl:
            self.initialized = True
            self.parser = http.get_parser(self.cfg, self.inbox, self.client)
        super().init()
        # A client that stops reading its answer must not hold the thread for ever either.
        self.sock.settimeout(self.send_timeout_s)


class BufferingWorker(gthread.ThreadWorker):
    """gthread with requests received in the event loop (see the module docstring)."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        from uvdose.service import config

        server = config.server_settings_from_environment()
        app = config.settings_from_environment()
        self.header_timeout_s = server["UVDOSE_HEADER_TIMEOUT_S"]
        self.body_timeout_s = server["UVDOSE_BODY_TIMEOUT_S"]
        self.max_body_bytes = app["MAX_CONTENT_LENGTH"]
        self.max_header_bytes = (self.cfg.limit_request_line + 2
                                 + self.cfg.limit_request_fields * (self.cfg.limit_request_field_size + 2) + 2)
        self.receiving: dict[int, BufferedConn] = {}  # by file descriptor
        self.paused: dict[int, BufferedConn] = {}  # headers in, body waiting for budget (oldest first)
        self.buffer_budget_bytes = BUFFER_BUDGET_BODIES * self.max_body_bytes
        self.reserved_bytes = 0  # body bytes the admitted requests may still buffer
        self.in_threads: set[BufferedConn] = set()
        self.cut_report_at: float | None = None  # when stopping: when to log what the drain will cut

    # -- receiving ---------------------------------------------------------------------

    def accept(self, listener) -> None:
        if self.cfg.is_ssl:
            return super().accept(listener)
        try:
            client_sock, client_addr = listener.accept()
        except OSError as error:
            if error.errno not in (errno.EAGAIN, errno.ECONNABORTED, errno.EWOULDBLOCK):
                raise
            return
        self.nr_conns += 1
        conn = BufferedConn(self.cfg, client_sock, client_addr, listener.getsockname(), self.body_timeout_s)
        self._receive(conn, first_wait_s=self.header_timeout_s)

    def _receive(self, conn: BufferedConn, first_wait_s: float) -> None:
        """Put ``conn`` in the event loop until its next request is whole."""
        conn.sock.setblocking(False)
        conn.framing = RequestFraming(self.max_header_bytes, self.max_body_bytes,
                                      self.cfg.limit_request_field_size or 8190)
        conn.first_byte_at = conn.headers_at = None
        conn.sent_continue = False
        now = time.monotonic()
        conn.idle_until = now + first_wait_s
        if not self.alive:
            conn.idle_until = min(conn.idle_until, now + gthread.STOP_KEEPALIVE_LINGER)
        self.receiving[conn.sock.fileno()] = conn
        if conn.inbox.buffer:  # the client sent its next request along with the last one
            conn.first_byte_at = now
            if self._judge(conn):
                return
        self.poller.register(conn.sock, selectors.EVENT_READ, partial(self._readable, conn))

    def _admit(self, conn: BufferedConn) -> bool:
        """Reserve memory for ``conn``'s body (its length, or the limit when chunked); False
        when the budget has no room. A lone request is always admitted, so the oldest
        request waiting always gets its turn and no set of waiting clients can lock out
        the rest."""
        framing = conn.framing
        need = self.max_body_bytes if framing.chunked else framing.body_bytes
        if self.reserved_bytes and self.reserved_bytes + need > self.buffer_budget_bytes:
            return False
        conn.reserved_bytes = need
        self.reserved_bytes += need
        return True

    def _release(self, conn: BufferedConn) -> None:
        self.reserved_bytes -= conn.reserved_bytes
        conn.reserved_bytes = 0

    def _readable(self, conn: BufferedConn, _sock) -> None:
        try:
            data = conn.sock.recv(RECV_BYTES)
        except (BlockingIOError, InterruptedError):
            return
        except OSError:
            data = b""
        if conn.linger_until is not None:
            conn.lingered_bytes += len(data)
            if not data or conn.lingered_bytes > LINGER_MAX_BYTES:
                self._drop(conn)
            return
        if not data:
            if not conn.inbox.buffer:
                self._drop(conn)
                return
            # The client ended its side inside a request: it may still read the 400.
            self.log.warning("client cut off: connection ended inside a request (%d bytes received); "
                             "answered 400, nothing computed", len(conn.inbox.buffer))
            self._answer_and_linger(conn, _incomplete_answer(len(conn.inbox.buffer)))
            return
        if conn.first_byte_at is None:
            conn.first_byte_at = time.monotonic()
        conn.inbox.buffer += data
        if self._judge(conn):
            self.poller.unregister(conn.sock)

    def _judge(self, conn: BufferedConn) -> bool:
        """Act on what ``conn`` has received; True when it leaves the receiving state."""
        framing = conn.framing
        had_headers = framing.headers_complete
        verdict = framing.scan(conn.inbox.buffer)
        if framing.headers_complete and not had_headers:
            conn.headers_at = time.monotonic()
        if verdict in ("complete", "handover"):
            self._release(conn)
            del self.receiving[conn.sock.fileno()]
            conn.data_ready = True  # gthread must not wait for data: it is here
            self.in_threads.add(conn)
            self.enqueue_req(conn)
            return True
        if verdict == "too-large":
            self.log.warning("client cut off: request body of %s%d bytes is over the %d-byte limit; "
                             "answered 413, nothing computed", "" if framing.body_bytes_exact else "at least ",
                             framing.body_bytes, self.max_body_bytes)
            self._answer_and_linger(conn, _too_large_answer(framing.body_bytes, self.max_body_bytes,
                                                            framing.body_bytes_exact))
            return False
        if framing.headers_complete and not conn.reserved_bytes and not self._admit(conn):
            # No room for the body yet: leave its bytes with the kernel (TCP holds the client
            # back) until admitted requests go to the threads; its timeouts still run.
            self.paused[conn.sock.fileno()] = conn
            return True
        if framing.expects_continue and framing.headers_complete and not conn.sent_continue:
            conn.sent_continue = True
            _send_now(conn.sock, b"HTTP/1.1 100 Continue\r\n\r\n")
        return False

    def _unpause(self, conn: BufferedConn) -> None:
        """Take ``conn`` off the paused list, back in the poller (to linger on it)."""
        if self.paused.pop(conn.sock.fileno(), None) is not None:
            self.poller.register(conn.sock, selectors.EVENT_READ, partial(self._readable, conn))

    def _answer_and_linger(self, conn: BufferedConn, answer: bytes) -> None:
        self._release(conn)
        self._unpause(conn)
        if answer:
            _send_now(conn.sock, answer)
        try:
            conn.sock.shutdown(socket.SHUT_WR)
        except OSError:
            pass
        conn.inbox.buffer.clear()
        conn.linger_until = time.monotonic() + LINGER_S

    def _drop(self, conn: BufferedConn) -> None:
        fd = conn.sock.fileno()
        self.receiving.pop(fd, None)
        self.paused.pop(fd, None)
        self._release(conn)
        try:
            self.poller.unregister(conn.sock)
        except (KeyError, ValueError, OSError):
            pass
        self.nr_conns -= 1
        conn.close()

    def _resume_paused(self) -> None:
        while self.paused:
            fd, conn = next(iter(self.paused.items()))
            if not self._admit(conn):
                return
            del self.paused[fd]
            if self._judge(conn):  # its whole body may be buffered already
                continue
            self.poller.register(conn.sock, selectors.EVENT_READ, partial(self._readable, conn))

    def _expire_receiving(self) -> None:
        self._resume_paused()
        now = time.monotonic()
        for conn in list(self.receiving.values()):
            if conn.linger_until is not None:
                if now > conn.linger_until:
                    self._drop(conn)
            elif conn.first_byte_at is None:
                if now > conn.idle_until:
                    self._drop(conn)  # an idle connection: nothing was asked
            elif conn.headers_at is None and now > conn.first_byte_at + self.header_timeout_s:
                self.log.warning("client cut off: request headers not complete after %.0f s "
                                 "(%d bytes received); answered 408", self.header_timeout_s,
                                 len(conn.inbox.buffer))
                self._answer_and_linger(conn, _timeout_answer("headers", self.header_timeout_s))
            elif conn.headers_at is not None and now > conn.headers_at + self.body_timeout_s:
                framing = conn.framing
                self.log.warning("client cut off: request body not complete after %.0f s (%d bytes "
                                 "received%s); answered 408, nothing computed", self.body_timeout_s,
                                 len(conn.inbox.buffer) - framing.header_end,
                                 f" of {framing.body_bytes}" if not framing.chunked else ", chunked")
                self._answer_and_linger(conn, _timeout_answer("body", self.body_timeout_s))

    def murder_pending(self) -> None:
        # Called on every turn of gthread's event loop, running or stopping.
        super().murder_pending()
        self._expire_receiving()
        if self.cut_report_at is not None and time.monotonic() >= self.cut_report_at:
            self._report_cut()

    def _report_cut(self) -> None:
        """Log what the end of the graceful period cuts (the master kills the worker then)."""
        self.cut_report_at = None
        computing = len(self.in_threads)
        receiving = sum(1 for c in self.receiving.values() if c.first_byte_at and c.linger_until is None)
        if computing or receiving:
            self.log.warning("stopped after the %d s graceful timeout: cut %d requests in progress and %d "
                             "still being received", self.cfg.graceful_timeout, computing, receiving)

    def handle_request(self, req, conn):
        if getattr(conn, "sent_continue", False):
            req._expected_100_continue = False  # answered already, from the event loop
        try:
            return super().handle_request(req, conn)
        except (socket.timeout, TimeoutError):
            # The client stopped reading its answer (BufferedConn.init's send timeout).
            self.log.warning("client cut off: the answer made no progress for %.0f s (the client stopped "
                             "reading); connection closed", self.body_timeout_s)
            return False

    # -- after a request -----------------------------------------------------------------

    def finish_request(self, conn, fs) -> None:
        self.in_threads.discard(conn)
        if not isinstance(conn, BufferedConn):
            return super().finish_request(conn, fs)
        try:
            keep = fs.result() if not fs.cancelled() else False
        except Exception:
            keep = False
        if keep is True:
            try:
                conn.inbox.buffer[:0] = conn.parser.unreader.take_buffered()
                self._receive(conn, first_wait_s=self.cfg.keepalive)
                return
            except Exception:
                keep = False
        self._close_lingering(conn)

    def _close_lingering(self, conn: BufferedConn) -> None:
        """Close after an answer, lingering in the event loop (gthread's close blocks it)."""
        if conn.sock.fileno() < 0:
            self.nr_conns -= 1
            return
        conn.sock.setblocking(False)
        self._answer_and_linger(conn, b"")
        self.receiving[conn.sock.fileno()] = conn
        try:
            self.poller.register(conn.sock, selectors.EVENT_READ, partial(self._readable, conn))
        except (KeyError, ValueError, OSError):
            self._drop(conn)

    # -- gunicorn's own refusals ---------------------------------------------------------

    def handle_error(self, req, client, addr, exc) -> None:
        """gunicorn's answer to a request it refuses itself (400, 414, 431, 501...), as a
        problem document: gunicorn picks the status and the words (and logs it), written
        here as RFC 9457 JSON in place of its HTML page."""
        captured = _CapturedAnswer()
        super().handle_error(req, captured, addr, exc)
        status, reason, detail = captured.parts()
        if status is None:
            return
        from uvdose.service.problems import problem_body

        answer = _problem_answer(status, reason, problem_body(status, reason, detail or None))
        try:
            client.setblocking(False)
            client.send(answer)
        except OSError:
            self.log.debug("Failed to send error message.")

    # -- stopping ------------------------------------------------------------------------

    def handle_exit(self, sig, frame) -> None:
        if self.alive:
            self.method_queue.defer(self._begin_stop)
        super().handle_exit(sig, frame)

    def _begin_stop(self) -> None:
        from uvdose.service import request_deadline

        self.set_accept_enabled(False)
        for listener in self.sockets:
            listener.close()  # refuse new connections now, rather than leave them in the backlog
        now = time.monotonic()
        for conn in self.receiving.values():  # idle kept-alive ones: a request may be on its way
            conn.idle_until = min(conn.idle_until, now + gthread.STOP_KEEPALIVE_LINGER)
        graceful = self.cfg.graceful_timeout
        margin = min(float(graceful), max(STOP_MARGIN_MIN_S, min(STOP_MARGIN_MAX_S, STOP_MARGIN_FRACTION * graceful)))
        request_deadline.stop_by(now + graceful - margin)
        # The master kills workers at the graceful timeout: report just before it.
        self.cut_report_at = now + max(0.0, graceful - REPORT_BEFORE_KILL_S)
        self.log.info("stopping: %d requests in progress, %d connections receiving; new connections refused",
                      len(self.in_threads), sum(1 for c in self.receiving.values() if c.first_byte_at))

    def run(self) -> None:
        super().run()
        if self.cut_report_at is not None:  # the drain ended on its own clock first
            self._report_cut()


class _CapturedAnswer:
    """Stands in for the client socket while gunicorn writes its HTML error page."""

    def __init__(self):
        self.data = bytearray()

    def gettimeout(self) -> float:
        return 0.0

    def sendall(self, data: bytes) -> None:
        self.data += data

    send = sendall

    def parts(self) -> tuple[int | None, str, str]:
        """(status, reason, message) of the captured page."""
        import html

        head, _, page = bytes(self.data).decode("latin-1").partition("\r\n\r\n")
        match = re.match(r"HTTP/1\.1 (\d{3}) ([^\r\n]*)", head)
        if not match:
            return None, "", ""
        message = page.split("</h1>", 1)[-1].split("</body>", 1)[0].strip()
        return int(match.group(1)), match.group(2), html.unescape(message)


def _send_now(sock: socket.socket, data: bytes) -> None:
    """Send a short answer from the event loop, never blocking it (a client whose window
    is full loses the answer, not the worker's time)."""
    try:
        sock.send(data)
    except OSError:
        pass


def _problem_answer(status: int, reason: str, problem: dict) -> bytes:
    import json

    from uvdose.service.cautions import CAUTION_HEADER, HEADER_TEXT
    from uvdose.service.security_headers import DATA_POLICY, EVERY_ANSWER

    body = json.dumps(problem).encode()
    headers = {"Connection": "close", "Content-Type": "application/problem+json",
               "Content-Length": str(len(body)), **EVERY_ANSWER, "Content-Security-Policy": DATA_POLICY,
               CAUTION_HEADER: HEADER_TEXT}
    head = f"HTTP/1.1 {status} {reason}\r\n" + "".join(f"{k}: {v}\r\n" for k, v in headers.items()) + "\r\n"
    return head.encode("latin-1") + body


def _too_large_answer(received: int, limit: int, exact: bool) -> bytes:
    from uvdose.service.problems import TYPE_PREFIX, problem_body
    from uvdose.service.request_body import body_too_large

    problem = body_too_large(received if exact else limit + 1, limit, known=exact)
    return _problem_answer(413, "Content Too Large",
                           problem_body(problem.status, problem.title, problem.detail, TYPE_PREFIX + problem.slug,
                                        **problem.extensions))


def _incomplete_answer(received: int) -> bytes:
    from uvdose.service.problems import TYPE_PREFIX, problem_body
    from uvdose.service.request_body import incomplete_body

    problem = incomplete_body(f"The connection ended after {received} bytes, inside the request.")
    return _problem_answer(400, "Bad Request", problem_body(problem.status, problem.title, problem.detail,
                                                             TYPE_PREFIX + problem.slug))


def _timeout_answer(part: str, seconds: float) -> bytes:
    from uvdose.service.problems import TYPE_PREFIX, problem_body

    setting = "UVDOSE_HEADER_TIMEOUT_S" if part == "headers" else "UVDOSE_BODY_TIMEOUT_S"
    return _problem_answer(408, "Request Timeout", problem_body(
        408, "Request Timeout", f"The request {part} did not arrive within {seconds:g} s ({setting}); "
        "the connection is closed and nothing was computed.", TYPE_PREFIX + "request-timeout"))
