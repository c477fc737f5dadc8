"""A sync worker that reads each request completely before serving it (slow-client defence).

gunicorn's sync worker reads a request with blocking `recv()` calls, so a client that sends its
head or body slowly (or never finishes: "slowloris") holds the whole worker until the worker
timeout kills it; a few such clients stop a service with one worker per core.
`RequestBufferingWorker` keeps everything that made sync workers the right choice here (one
request at a time, on the main thread, where the SIGALRM time budget of
service/ops/deadline.py works; the same throughput; gunicorn's own parser, limits and
`max_requests`) and adds one step in front:

1. A selector loop over the listening sockets, the signal pipe and the connections whose
   request is not complete yet. New connections are accepted without blocking and whatever
   bytes have arrived are read into a per-connection buffer (`RequestBuffer`).
2. Only a complete request (head ended by CRLF CRLF, then `Content-Length` bytes of body, or a
   chunked body up to its last chunk and trailers) is served: gunicorn's usual sync handling
   runs on a `BufferedSocket`, whose `recv()` returns the buffered bytes first and delegates
   everything else to the real socket. Responses are written as before (blocking).
3. Bounds: every connection has `REQUEST_READ_SECONDS` from accept to a complete request
   (then 408, or a silent close if it sent nothing); at most `PENDING_CONNECTIONS`
   incomplete connections and `PENDING_BYTES` buffered bytes per worker (beyond either, the
   oldest incomplete connection is closed); a declared `Content-Length` above the body limit
   (CONDUCTION_MAX_BODY_BYTES) is served at once so the app answers its own 413 without the
   body being read, and a chunked body that grows past the limit is answered 413 here.
   The request line is held to limit_request_line here too (414): gunicorn's own parser
   lowers any limit above 8190 bytes to 8190, which would refuse the 16 KiB spreadsheet GETs
   the service promises, so the parser is given no line limit (`ParserConfig`).
4. Keep-alive: after the response to a request framed exactly (one `Content-Length` request
   and nothing after it), an HTTP/1.1 connection that neither side asked to close goes back to
   the loop as idle, for at most the `keepalive` setting's seconds and
   CONDUCTION_KEEPALIVE_REQUESTS requests (then `Connection: close`, so connections keep
   spreading over the workers); its next bytes make it an incomplete request again, with a
   fresh read deadline. A worker with requests waiting still accepts one new connection per
   turn, so kept-alive clients cannot leave newcomers in the listen backlog.
   Otherwise gunicorn closes gracefully (half-close, then read until the client closes, at
   most 2 s) so unread request bytes cannot turn the close into a reset that cuts the
   response. That wait happens in the selector loop instead of in the worker's hands.
5. Stopping (SIGTERM after the drain, or `max_requests`): no more accepts; connections that
   have not sent a byte (idle kept-alive ones too) are closed; requests already arriving keep
   their read deadline and are served if they complete (as the plain sync worker finishes the
   request it is reading), so a stop waits at most REQUEST_READ_SECONDS for slow clients, then
   for the request being served.

Requests that the buffer cannot frame (a malformed head, conflicting lengths, an unknown
transfer coding) are handed to gunicorn as they are, at once, so its parser answers them as it
always has (400, 414, 431, 501). A `recv()` past the buffered bytes reports end of stream: the
worker never waits for a client while it holds a request.

Settings, from the environment (checked in the master at start-up, see `WorkerSettings`):
CONDUCTION_REQUEST_READ_SECONDS (10), CONDUCTION_PENDING_CONNECTIONS (200),
CONDUCTION_PENDING_BYTES (33554432), CONDUCTION_KEEPALIVE_REQUESTS (100), and the body limit
CONDUCTION_MAX_BODY_BYTES that the app also uses (service/config.py); gunicorn's own
`keepalive` (CONDUCTION_KEEPALIVE_SECONDS in deploy/gunicorn.conf.py) is the idle time.

Every connection dropped instead of served is counted in the Prometheus counter
`conduction_connections_dropped_total{reason}` (service/ops/metrics.py: `expired`, `evicted`,
`too_large`, `line_too_long`) and summarised in the log at most once a minute; served requests
cost nothing extra.

The gunicorn master imports this module by its dotted path (deploy/gunicorn.conf.py,
`worker_class`), so at module level it imports only the standard library and gunicorn: the
service's config, problem titles and metrics are imported in the worker, after the fork
(prometheus-client chooses its multi-process storage when imported, from
PROMETHEUS_MULTIPROC_DIR, which the master sets before forking). Without the metrics (they
cannot be imported) the worker runs as before and says so once in the log.
"""

from __future__ import annotations

import enum
import errno
import json
import math
import os
import selectors
import socket
import sys
import time
from collections import OrderedDict, deque
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from gunicorn import http, util
from gunicorn.http import wsgi
from gunicorn.workers.sync import SyncWorker

#: gunicorn's own graceful close (gunicorn.util.close_graceful): read after the response for at
#: most this long, and at most this many bytes, before closing.
LINGER_SECONDS = 2.0
LINGER_BYTES = 65536
#: Largest single read from a client while buffering, bytes.
READ_CHUNK = 256 * 1024
#: Longest chunk-size line (with extensions) accepted while buffering a chunked body, bytes.
CHUNK_LINE_LIMIT = 4096
#: A first write of a response up to this size (its head) is held to go out with the body.
HEAD_HOLD_BYTES = 8192
#: gunicorn's interim answer to `Expect: 100-continue` (gunicorn.http.wsgi.create sends it too).
CONTINUE = b"HTTP/1.1 100 Continue\r\n\r\n"
#: Default of CONDUCTION_MAX_BODY_BYTES when the service's config cannot be read (tests).
DEFAULT_MAX_BODY_BYTES = 2_000_000


# --------------------------------------------------------------------------- settings


@dataclass(frozen=True)
class WorkerSettings:
    """Bounds on reading requests, per worker process.

    Attributes
    ----------
    read_seconds : float
        Time from accepting a connection to holding its complete request, s
        (CONDUCTION_REQUEST_READ_SECONDS).
    pending_connections : int
        Connections with an incomplete request held at once (CONDUCTION_PENDING_CONNECTIONS);
        the oldest is closed to make room. Connections lingering after their response are
        bounded by the same number.
    pending_bytes : int
        Bytes buffered for incomplete requests at once (CONDUCTION_PENDING_BYTES); the oldest
        incomplete connections are closed to get back under it. Never less than one largest
        request (body limit plus head limit).
    max_body_bytes : int
        Body limit (CONDUCTION_MAX_BODY_BYTES, the app's MAX_CONTENT_LENGTH).
    head_limit : int
        Largest request head buffered before gunicorn's parser is left to refuse it, bytes
        (from limit_request_line, limit_request_fields and limit_request_field_size).
    keepalive_requests : int
        Requests served on one connection before it is closed (CONDUCTION_KEEPALIVE_REQUESTS);
        1 closes every connection after its first response, as gunicorn's sync worker does.
    """

    read_seconds: float = 10.0
    pending_connections: int = 200
    pending_bytes: int = 32 * 1024 * 1024
    max_body_bytes: int = DEFAULT_MAX_BODY_BYTES
    head_limit: int = 16384 + 100 * (16384 + 2) + 4
    keepalive_requests: int = 100

    @classmethod
    def from_environ(cls, environ: Mapping[str, str], *, max_body_bytes: int,
                     head_limit: int) -> WorkerSettings:
        """Read CONDUCTION_REQUEST_READ_SECONDS, _PENDING_CONNECTIONS, _PENDING_BYTES and
        _KEEPALIVE_REQUESTS.

        Raises ValueError naming the variable when a value is not a number or not positive.
        """
        def number(name: str, kind: type, default: float) -> Any:
            raw = environ.get(name)
            if raw is None or raw.strip() == "":
                return kind(default)
            try:
                value = kind(raw)
            except ValueError:
                raise ValueError(f"{name}={raw!r} is not a valid {kind.__name__}") from None
            if not (value > 0 and math.isfinite(value)):
                raise ValueError(f"{name}={raw!r} must be positive and finite")
            return value

        base = cls()
        pending_bytes = number("CONDUCTION_PENDING_BYTES", int, base.pending_bytes)
        return cls(
            read_seconds=number("CONDUCTION_REQUEST_READ_SECONDS", float, base.read_seconds),
            pending_connections=number("CONDUCTION_PENDING_CONNECTIONS", int,
                                       base.pending_connections),
            # one largest request must always fit, or it could never complete
            pending_bytes=max(pending_bytes, max_body_bytes + head_limit),
            max_body_bytes=max_body_bytes,
            head_limit=head_limit,
            keepalive_requests=number("CONDUCTION_KEEPALIVE_REQUESTS", int,
                                      base.keepalive_requests),
        )


def line_limit_of(cfg: Any) -> int:
    """limit_request_line as configured, bytes without CRLF (0: none; gunicorn refuses
    negative values)."""
    return int(cfg.limit_request_line)


class ParserConfig:
    """The worker's gunicorn config, except that the parser sees no request-line limit.

    gunicorn (27) silently lowers any limit_request_line above 8190 to 8190; only 0 lifts it.
    The worker enforces the configured limit itself on the buffered head (answering 414), and
    the head can never exceed `head_limit_of(cfg)`, so the parser's 0 is still bounded.
    """

    limit_request_line = 0

    def __init__(self, cfg: Any) -> None:
        self._cfg = cfg

    def __getattr__(self, name: str) -> Any:
        # gunicorn's parser reads a dozen settings per request, each through Config's own
        # look-up (measured: 4 % of a worker's time on /healthz); settings do not change in a
        # worker's life (a reload starts new workers), so each is read once
        value = getattr(self._cfg, name)
        setattr(self, name, value)
        return value


def head_limit_of(cfg: Any) -> int:
    """Largest head gunicorn's parser can accept with these settings, bytes (its own
    max_buffer_headers plus the request line; 0 limits mean gunicorn's defaults)."""
    line = cfg.limit_request_line if cfg.limit_request_line > 0 else 8190
    field = cfg.limit_request_field_size if cfg.limit_request_field_size > 0 else 8190
    fields = cfg.limit_request_fields if cfg.limit_request_fields > 0 else 32768
    return line + 2 + fields * (field + 2) + 4


# --------------------------------------------------------------------------- framing


class Verdict(enum.Enum):
    """What a connection's buffered bytes amount to."""

    MORE = "more"            # incomplete: wait for more bytes
    COMPLETE = "complete"    # one whole request is buffered: serve it
    PASS = "pass"            # cannot be framed here (malformed, or a body that is refused
                             # anyway): let gunicorn's parser or the app answer it now
    TOO_LARGE = "too_large"  # a chunked body beyond the body limit: answer 413 here
    LINE_TOO_LONG = "line_too_long"  # request line beyond limit_request_line: answer 414


class RequestBuffer:
    """The bytes of one request as they arrive, and whether they make a whole request yet.

    Framing follows RFC 9112 (section 6, message body length): a head ends with an empty line
    (CRLF CRLF); then `Transfer-Encoding` whose last coding is chunked means chunks up to the
    zero-size one and the trailer section; else `Content-Length` bytes; else no body. Anything
    this does not understand is `PASS`ed to gunicorn's parser, which is stricter and answers it.
    """

    __slots__ = ("data", "max_body_bytes", "head_limit", "line_limit", "head_end", "body_end",
                 "chunked", "chunk_at", "chunk_data", "expects_continue", "_scanned",
                 "_line_done")

    def __init__(self, max_body_bytes: int, head_limit: int, line_limit: int = 0) -> None:
        self.data = bytearray()
        self.max_body_bytes = max_body_bytes
        self.head_limit = head_limit
        self.line_limit = line_limit  # longest request line, bytes without CRLF; 0: no limit
        self._line_done = line_limit <= 0
        self.head_end = -1           # offset just past the head's CRLF CRLF
        self.body_end = -1           # offset just past a Content-Length body
        self.chunked = False
        self.chunk_at = 0            # offset of the next chunk-size line
        self.chunk_data = 0          # chunk data bytes seen so far
        self.expects_continue = False
        self._scanned = 0            # head bytes already searched for CRLF CRLF

    def feed(self, chunk: bytes) -> Verdict:
        """Append `chunk` and judge the buffer."""
        self.data += chunk
        return self.judge()

    def judge(self) -> Verdict:
        if self.head_end < 0:
            verdict = self._find_head()
            if verdict is not None:
                return verdict
        if self.chunked:
            return self._scan_chunks()
        return Verdict.COMPLETE if len(self.data) >= self.body_end else Verdict.MORE

    # the head ------------------------------------------------------------------------------

    def _find_head(self) -> Verdict | None:
        data = self.data
        # RFC 9112 section 2.2: one empty line before the request line is ignored
        start = 2 if data[:2] == b"\r\n" else 0
        begin = max(start, self._scanned - 3)
        if not self._line_done:
            # gunicorn's rule (its read_line): the line without CRLF may be `limit` bytes long
            eol = data.find(b"\r\n", max(start, self._scanned - 1))
            if (eol if eol >= 0 else len(data) - 2) - start > self.line_limit:
                return Verdict.LINE_TOO_LONG
            self._line_done = eol >= 0
        end = data.find(b"\r\n\r\n", begin)
        if end < 0:
            # a bare LF never ends a head the way gunicorn reads it: it refuses it at once
            if _has_bare_lf(data, begin):
                return Verdict.PASS
            self._scanned = len(data)
            return Verdict.PASS if len(data) > self.head_limit else Verdict.MORE
        self.head_end = end + 4
        return self._frame(bytes(data[start:end]))

    def _frame(self, head: bytes) -> Verdict | None:
        lines = head.split(b"\r\n")
        request_line = lines[0]
        lengths: set[bytes] = set()
        codings: list[bytes] = []
        expect = b""
        for line in lines[1:]:
            name, colon, value = line.partition(b":")
            if not colon:
                return Verdict.PASS
            name = name.lower()
            value = value.strip(b" \t")
            if name == b"content-length":
                lengths.add(value)
            elif name == b"transfer-encoding":
                codings.extend(c.strip(b" \t").lower() for c in value.split(b","))
            elif name == b"expect":
                expect = value.lower()
        if codings:
            if lengths or codings[-1] != b"chunked":
                return Verdict.PASS  # gunicorn refuses both (400, 501) before any body
            self.chunked = True
            self.chunk_at = self.head_end
        elif lengths:
            if len(lengths) > 1:
                return Verdict.PASS
            value = lengths.pop()
            if not (value.isdigit() and len(value) <= 18):
                return Verdict.PASS
            length = int(value)
            if length > self.max_body_bytes:
                return Verdict.PASS  # the app answers its 413 without reading the body
            self.body_end = self.head_end + length
        else:
            self.body_end = self.head_end
        self.expects_continue = (expect == b"100-continue"
                                 and request_line.endswith(b" HTTP/1.1"))
        return None

    # a chunked body (RFC 9112 section 7.1) --------------------------------------------------

    def _scan_chunks(self) -> Verdict:
        data = self.data
        while True:
            eol = data.find(b"\r\n", self.chunk_at, self.chunk_at + CHUNK_LINE_LIMIT)
            if eol < 0:
                too_long = len(data) - self.chunk_at >= CHUNK_LINE_LIMIT
                return Verdict.PASS if too_long else Verdict.MORE
            digits = bytes(data[self.chunk_at:eol]).split(b";", 1)[0].strip(b" \t")
            if not digits or len(digits) > 16 or digits.strip(b"0123456789abcdefABCDEF"):
                return Verdict.PASS
            size = int(digits, 16)
            if size == 0:
                # trailer section: header lines, then an empty line
                if data[eol + 2:eol + 4] == b"\r\n":
                    return Verdict.COMPLETE
                if data.find(b"\r\n\r\n", eol) >= 0:
                    return Verdict.COMPLETE
                return (Verdict.PASS if len(data) - eol > self.head_limit else Verdict.MORE)
            if self.chunk_data + size > self.max_body_bytes:
                return Verdict.TOO_LARGE
            after = eol + 2 + size
            if len(data) < after + 2:
                return Verdict.MORE
            if data[after:after + 2] != b"\r\n":
                return Verdict.PASS
            self.chunk_data += size
            self.chunk_at = after + 2


def _has_bare_lf(data: bytearray, begin: int) -> bool:
    """Whether a LF not preceded by CR occurs at or after `begin`."""
    at = data.find(b"\n", begin)
    while at >= 0:
        if at == 0 or data[at - 1] != 0x0D:
            return True
        at = data.find(b"\n", at + 1)
    return False


# --------------------------------------------------------------------------- the socket


class BufferedSocket:
    """A client socket whose `recv()` returns the already buffered request bytes first.

    Everything else is delegated to the real socket, so gunicorn's parser and response writer
    work unchanged. Two calls differ:

    - `recv()` past the buffered bytes reports end of stream: the buffer holds the whole
      request (or, for a request handed over unframed, everything gunicorn needs to refuse
      it), so the worker never waits in a read.
    - After `shutdown()` (gunicorn's graceful close after the response), `recv()` reports end
      of stream at once and `close()` hands the socket to `on_linger`, which finishes the close
      (reading until the client closes) without holding the worker.
    - The first `sendall()` of a response (gunicorn writes the head on its own, then the body)
      is held back, up to `HEAD_HOLD_BYTES`, and leaves with the next write: head and body in
      one system call and, usually, one TCP segment, which the client reads at once (measured
      per response on these 2 cores: one write and one client wake-up fewer). Anything else
      that writes, `flush()`, `shutdown()` and `close()` send what is held first.
    """

    def __init__(self, sock: socket.socket, data: bytes, *, continue_sent: bool = False,
                 on_linger: Any = None) -> None:
        self._sock = sock
        self._data = memoryview(data)
        self._continue_sent = continue_sent
        self._on_linger = on_linger
        self._closing = False
        self._closed = False
        self._held = b""
        self._wrote = False  # the response has begun (the head is not held any more)

    def recv(self, bufsize: int, flags: int = 0) -> bytes:
        piece = bytes(self._data[:bufsize])
        self._data = self._data[len(piece):]
        return piece

    def recv_into(self, buffer: Any, nbytes: int = 0, flags: int = 0) -> int:
        view = memoryview(buffer).cast("B")
        piece = self.recv(nbytes or len(view), flags)
        view[:len(piece)] = piece
        return len(piece)

    def send(self, data: bytes, flags: int = 0) -> int:
        if self._continue_sent and data == CONTINUE:
            # already sent while the body was being buffered: do not send a second one
            self._continue_sent = False
            return len(data)
        self.flush()
        return self._sock.send(data, flags)

    def sendall(self, data: bytes, flags: int = 0) -> None:
        if not self._wrote:
            self._wrote = True
            if len(data) <= HEAD_HOLD_BYTES:
                self._held = bytes(data)
                return
        elif self._held:
            held, self._held = self._held, b""
            if len(data) <= HEAD_HOLD_BYTES * 8:
                self._sock.sendall(held + data, flags)  # one write
                return
            self._sock.sendall(held, flags)  # a large body: not worth copying
        self._sock.sendall(data, flags)

    def sendfile(self, *args: Any, **kwargs: Any) -> int:
        self.flush()
        return self._sock.sendfile(*args, **kwargs)

    def flush(self) -> None:
        """Send what is held (a response head, or a small whole response)."""
        if self._held:
            held, self._held = self._held, b""
            self._sock.sendall(held)

    def shutdown(self, how: int) -> None:
        if how in (socket.SHUT_WR, socket.SHUT_RDWR):
            try:
                self.flush()
            except OSError:
                self._held = b""
        self._sock.shutdown(how)
        if how in (socket.SHUT_WR, socket.SHUT_RDWR):
            self._closing = True
            self._data = memoryview(b"")  # unread request bytes no longer matter

    def close(self) -> None:
        if self._closed:
            return
        self._closed = True
        self._data = memoryview(b"")
        try:
            self.flush()
        except OSError:
            self._held = b""
        if self._closing and self._on_linger is not None:
            self._on_linger(self._sock)
        else:
            self._sock.close()

    def __getattr__(self, name: str) -> Any:
        return getattr(self._sock, name)


# --------------------------------------------------------------------------- the worker


class _Pending:
    """A connection whose request is not complete yet (or, `idle`, a kept-alive connection
    waiting for its next request)."""

    __slots__ = ("sock", "fd", "addr", "listener", "deadline", "buffer", "continue_sent",
                 "registered", "served", "reusable")

    def __init__(self, sock: socket.socket, addr: Any, listener: Any, deadline: float,
                 buffer: RequestBuffer, served: int = 0) -> None:
        self.sock = sock
        self.fd = sock.fileno()
        self.addr = addr
        self.listener = listener
        self.deadline = deadline
        self.buffer = buffer
        self.continue_sent = False
        self.registered = False
        self.served = served      # requests already answered on this connection
        self.reusable = False     # the buffer holds exactly one framed request


class _Lingering:
    """A connection whose response is written, read until the client closes."""

    __slots__ = ("sock", "fd", "deadline", "drained")

    def __init__(self, sock: socket.socket, deadline: float) -> None:
        self.sock = sock
        self.fd = sock.fileno()
        self.deadline = deadline
        self.drained = 0


_WAKEUP = "wakeup"


class RequestBufferingWorker(SyncWorker):
    """gunicorn sync worker that serves a request only once it has been received completely.

    See the module docstring. The name deliberately does not end in "SyncWorker": gunicorn
    swaps any such class for its threaded worker when `threads` > 1, and the time budget needs
    every request on the main thread.
    """

    cfg: Any  # gunicorn's Config; in run() the `ParserConfig` around it
    settings: WorkerSettings
    line_limit: int

    @classmethod
    def check_config(cls, cfg: Any, log: Any) -> None:
        """Called in the master at start-up: refuse bad settings before forking workers."""
        settings = cls._load_settings(cfg)
        log.info("request buffering: %g s to send a request, at most %d incomplete "
                 "connections and %d bytes buffered per worker, bodies up to %d bytes",
                 settings.read_seconds, settings.pending_connections, settings.pending_bytes,
                 settings.max_body_bytes)

    @staticmethod
    def _load_settings(cfg: Any) -> WorkerSettings:
        raw = os.environ.get("CONDUCTION_MAX_BODY_BYTES")
        try:
            max_body = int(raw) if raw else DEFAULT_MAX_BODY_BYTES
        except ValueError:
            raise ValueError(f"CONDUCTION_MAX_BODY_BYTES={raw!r} is not a valid int") from None
        return WorkerSettings.from_environ(os.environ, max_body_bytes=max_body,
                                           head_limit=head_limit_of(cfg))

    def _unsupported(self) -> str | None:
        if self.cfg.is_ssl:
            return "TLS in gunicorn"
        if getattr(self.cfg, "protocol", "http") != "http":
            return f"protocol {self.cfg.protocol}"
        if str(getattr(self.cfg, "proxy_protocol", "off")).lower() not in ("off", "false",
                                                                             "none"):
            return "the PROXY protocol"
        return None

    def run(self) -> None:
        reason = self._unsupported()
        if reason is not None:
            self.log.warning("request buffering is off with %s: plain sync worker", reason)
            super().run()
            return
        self.settings = self._load_settings(self.cfg)
        self.line_limit = line_limit_of(self.cfg)
        # gunicorn's parser caps any limit_request_line above 8190 at 8190 (only 0 lifts it),
        # so it is enforced here, on the buffered head, and the parser gets 0
        self.cfg = ParserConfig(self.cfg)
        self._pending: OrderedDict[int, _Pending] = OrderedDict()
        # kept-alive connections waiting for their next request, oldest first (all with the
        # same idle time, so their deadlines are in order too)
        self._idle: OrderedDict[int, _Pending] = OrderedDict()
        self.keepalive_seconds = max(0.0, float(self.cfg.keepalive or 0))
        self.access_log = bool(self.cfg.accesslog)
        self._lingering: OrderedDict[int, _Lingering] = OrderedDict()
        self._ready: deque[_Pending] = deque()
        self._buffered = 0
        self._dropped = {"expired": 0, "evicted": 0, "too_large": 0, "line_too_long": 0}
        self._last_report = time.monotonic()
        self._drop_counters = self._load_drop_counters()
        self._selector = selectors.DefaultSelector()
        for listener in self.sockets:
            listener.setblocking(False)
            self._selector.register(listener, selectors.EVENT_READ, listener)
        self._selector.register(self.PIPE[0], selectors.EVENT_READ, _WAKEUP)
        try:
            self._loop()
        finally:
            for pending in [*self._pending.values(), *self._idle.values()]:
                self._drop(pending)
            for ready in self._ready:
                ready.sock.close()
            for lingering in list(self._lingering.values()):
                self._end_linger(lingering)
            self._selector.close()

    def _load_drop_counters(self) -> dict[str, Any]:
        """The children of `conduction_connections_dropped_total` by reason, imported here, in
        the worker (see the module docstring); empty when the metrics cannot be loaded."""
        try:
            from service.ops.metrics import connection_drop_counters

            return connection_drop_counters()
        except Exception as exc:  # the worker must serve without its metrics
            self.log.warning("connection drops are not counted in the metrics: %s: %s",
                             type(exc).__name__, exc)
            return {}

    def _count_drop(self, reason: str) -> None:
        """Count one dropped connection for the log summary and the metrics."""
        self._dropped[reason] += 1
        counter = self._drop_counters.get(reason)
        if counter is not None:
            try:
                counter.inc()
            except Exception as exc:  # e.g. the metrics directory is full: keep serving
                self.log.warning("connection drops are no longer counted in the metrics: "
                                 "%s: %s", type(exc).__name__, exc)
                self._drop_counters = {}

    def _loop(self) -> None:
        timeout = self.timeout or 0.5
        accepting = True
        while True:
            self.notify()
            if not self.is_parent_alive():
                return
            if accepting and not self.alive:
                # graceful stop (or max_requests): no new connections, and those that have
                # not begun a request are closed. Requests already arriving keep their read
                # deadline, as under the plain sync worker a request being received is
                # finished, so a stop waits at most REQUEST_READ_SECONDS for them.
                accepting = False
                for listener in self.sockets:
                    self._selector.unregister(listener)
                for pending in [*self._pending.values(), *self._idle.values()]:
                    if not pending.buffer.data:
                        self._drop(pending)
            if not (accepting or self._ready or self._pending or self._lingering):
                return
            now = time.monotonic()
            wait = 0.0 if self._ready else self._next_wakeup(now, timeout)
            for key, _ in self._selector.select(wait):
                data = key.data
                # an entry closed earlier in this batch (evicted, expired) is skipped
                if isinstance(data, _Pending):
                    if self._idle.get(data.fd) is data:
                        self._wake(data)
                    elif self._pending.get(data.fd) is data:
                        self._read(data)
                elif isinstance(data, _Lingering):
                    if self._lingering.get(data.fd) is data:
                        self._drain(data)
                elif data is _WAKEUP:
                    self._clear_wakeup()
                elif accepting:
                    self._accept(data)
            now = time.monotonic()
            self._expire(now)
            self._report(now)
            if self._ready:
                self._serve(self._ready.popleft())

    def _next_wakeup(self, now: float, timeout: float) -> float:
        at = now + timeout
        if self._pending:
            at = min(at, next(iter(self._pending.values())).deadline)
        if self._lingering:
            at = min(at, next(iter(self._lingering.values())).deadline)
        if self._idle:
            at = min(at, next(iter(self._idle.values())).deadline)
        return max(0.0, at - now)

    def _clear_wakeup(self) -> None:
        try:
            while os.read(self.PIPE[0], 4096):
                pass
        except OSError:
            pass

    # accepting and reading -----------------------------------------------------------------

    def _accept(self, listener: Any) -> None:
        """Take one new connection, at most, per turn of the loop.

        Every worker woken by new connections takes one, then serves or looks again, so a burst
        of connections spreads over the workers; a worker taking a whole burst would keep it
        (kept alive) while the others idle (seen: half the throughput for about a second after
        wrk opened its 16 connections). A busy worker still takes one per turn, so a
        connection never waits unseen in the listen backlog while kept-alive connections keep
        the worker's queue from emptying (seen: latencies of about 1 s).
        """
        try:
            sock, addr = listener.accept()
        except OSError as exc:
            if exc.errno in (errno.EAGAIN, errno.EWOULDBLOCK, errno.ECONNABORTED):
                return
            if exc.errno in (errno.EMFILE, errno.ENFILE, errno.ENOBUFS, errno.ENOMEM):
                self.log.warning("cannot accept (%s): closing the oldest incomplete "
                                 "connection", os.strerror(exc.errno))
                self._evict_oldest()
                return
            raise
        sock.setblocking(False)
        util.close_on_exec(sock)
        while len(self._pending) >= self.settings.pending_connections:
            self._evict_oldest()
        pending = _Pending(sock, addr, listener,
                           time.monotonic() + self.settings.read_seconds,
                           RequestBuffer(self.settings.max_body_bytes,
                                         self.settings.head_limit, self.line_limit))
        self._pending[pending.fd] = pending
        self._read(pending)  # the request has usually arrived with the connection

    def _read(self, pending: _Pending) -> None:
        """Read what has arrived (all of it: the body limit bounds the loop), then judge."""
        buffer = pending.buffer
        verdict = Verdict.MORE
        while verdict is Verdict.MORE:
            try:
                chunk = pending.sock.recv(READ_CHUNK)
            except (BlockingIOError, InterruptedError):
                break
            except OSError:
                self._drop(pending)
                return
            if not chunk:
                self._drop(pending)  # closed before the request was complete
                return
            self._buffered += len(chunk)
            verdict = buffer.feed(chunk)
        if verdict is Verdict.MORE:
            if buffer.expects_continue and not pending.continue_sent:
                pending.continue_sent = True
                self._send_quietly(pending.sock, CONTINUE)
            self._watch(pending)
            self._limit_buffered(pending)
        elif verdict is Verdict.TOO_LARGE:
            self._count_drop("too_large")
            self._forget(pending)
            self._answer(pending.sock, 413, "/problems/too-large",
                         f"Request body exceeds the limit of "
                         f"{self.settings.max_body_bytes} bytes.")
        elif verdict is Verdict.LINE_TOO_LONG:
            self._count_drop("line_too_long")
            self._forget(pending)
            self._answer(pending.sock, 414, "/problems/bad-request",
                         f"The request line is longer than the limit of {self.line_limit} "
                         "bytes: send the problem as a POST body instead.")
        else:
            # exactly one request, framed here, and nothing after it: the connection can be
            # kept for the next one (pipelined bytes would be lost with the parser)
            pending.reusable = (verdict is Verdict.COMPLETE and not buffer.chunked
                                and len(buffer.data) == buffer.body_end)
            self._forget(pending)
            self._ready.append(pending)

    def _watch(self, pending: _Pending) -> None:
        if not pending.registered:
            self._selector.register(pending.sock, selectors.EVENT_READ, pending)
            pending.registered = True

    def _forget(self, pending: _Pending) -> None:
        """Stop tracking `pending` as incomplete or idle (served, answered or dropped next)."""
        if self._pending.get(pending.fd) is pending:
            del self._pending[pending.fd]
            self._buffered -= len(pending.buffer.data)
        elif self._idle.get(pending.fd) is pending:
            del self._idle[pending.fd]
        if pending.registered:
            self._selector.unregister(pending.sock)
            pending.registered = False

    def _drop(self, pending: _Pending) -> None:
        self._forget(pending)
        pending.sock.close()

    def _evict_oldest(self) -> None:
        if self._pending:
            self._count_drop("evicted")
            self._drop(next(iter(self._pending.values())))

    def _limit_buffered(self, current: _Pending) -> None:
        """Close the oldest other incomplete connections while over the byte cap."""
        for other in list(self._pending.values()):
            if self._buffered <= self.settings.pending_bytes:
                return
            if other is not current:
                self._count_drop("evicted")
                self._drop(other)

    def _expire(self, now: float) -> None:
        while self._pending:
            pending = next(iter(self._pending.values()))
            if pending.deadline > now:
                break
            self._count_drop("expired")
            self._forget(pending)
            if pending.buffer.data:
                self._answer(pending.sock, 408, "/problems/bad-request",
                             f"The request was not received completely within "
                             f"{self.settings.read_seconds:g} s.")
            else:
                pending.sock.close()  # never said anything: nothing to answer
        while self._lingering:
            lingering = next(iter(self._lingering.values()))
            if lingering.deadline > now:
                break
            self._end_linger(lingering)
        while self._idle:
            idle = next(iter(self._idle.values()))
            if idle.deadline > now:
                break
            self._drop(idle)  # the keep-alive time is over: an ordinary close, not counted

    def _report(self, now: float) -> None:
        if now - self._last_report < 60 or not any(self._dropped.values()):
            return
        self.log.warning("connections dropped in the last %.0f s: %d closed at the "
                         "read deadline, %d closed to make room, %d chunked bodies over the "
                         "limit (413), %d request lines over the limit (414)",
                         now - self._last_report, self._dropped["expired"],
                         self._dropped["evicted"], self._dropped["too_large"],
                         self._dropped["line_too_long"])
        self._dropped = dict.fromkeys(self._dropped, 0)
        self._last_report = now

    # answering -----------------------------------------------------------------------------

    def _serve(self, pending: _Pending) -> None:
        """gunicorn's sync handling of one complete request (parser, app, response), then
        either the close or, when the request and response allow it, keep-alive."""
        sock = pending.sock
        try:
            sock.setblocking(True)
        except OSError:
            sock.close()
            return
        client = BufferedSocket(sock, bytes(pending.buffer.data),
                                continue_sent=pending.continue_sent, on_linger=self._linger)
        pending.buffer = RequestBuffer(0, 0)  # release the bytes; the wrapper holds them
        may_keep = (pending.reusable and self.alive and self.keepalive_seconds > 0
                    and pending.served + 1 < self.settings.keepalive_requests)
        if self._handle(pending.listener, client, pending.addr, may_keep):
            self._keep(pending)
        self.notify()

    # keep-alive ----------------------------------------------------------------------------

    def _keep(self, pending: _Pending) -> None:
        """Wait (in the loop) for the next request on a connection whose response is sent."""
        try:
            pending.sock.setblocking(False)
        except OSError:
            pending.sock.close()
            return
        while len(self._idle) >= self.settings.pending_connections:
            self._drop(next(iter(self._idle.values())))  # oldest idle first: not counted
        pending.served += 1
        pending.buffer = RequestBuffer(self.settings.max_body_bytes, self.settings.head_limit,
                                       self.line_limit)
        pending.continue_sent = False
        pending.reusable = False
        pending.deadline = time.monotonic() + self.keepalive_seconds
        self._idle[pending.fd] = pending
        try:
            self._watch(pending)
        except (OSError, ValueError, KeyError):
            self._drop(pending)

    def _wake(self, pending: _Pending) -> None:
        """A kept-alive connection has bytes (or an end of stream): it is now a connection
        with an incomplete request, with the usual read deadline from now."""
        del self._idle[pending.fd]
        while len(self._pending) >= self.settings.pending_connections:
            self._evict_oldest()
        pending.deadline = time.monotonic() + self.settings.read_seconds
        self._pending[pending.fd] = pending
        self._read(pending)

    def _handle(self, listener: Any, client: BufferedSocket, addr: Any, may_keep: bool) -> bool:
        """`SyncWorker.handle`, closing only when it must: True when the response leaves the
        connection open (`may_keep`, and HTTP/1.1 with no `Connection: close` either way, a
        framed response, the worker not stopping); on False the connection has been closed
        as gunicorn closes it."""
        req = None
        kept = False
        try:
            parser = http.get_parser(self.cfg, client, addr)
            req = next(parser)
            kept = self._handle_request(listener, req, client, addr, may_keep)
        except http.errors.NoMoreData as exc:
            self.log.debug("Ignored premature client disconnection. %s", exc)
        except StopIteration as exc:
            self.log.debug("Closing connection. %s", exc)
        except OSError as exc:
            if exc.errno not in (errno.EPIPE, errno.ECONNRESET, errno.ENOTCONN):
                self.log.exception("Socket error processing request.")
            else:
                self.log.debug("Ignoring socket error: %s", exc)
        except BaseException as exc:
            self.handle_error(req, client, addr, exc)
        finally:
            if not kept:
                util.close_graceful(client)
        return kept

    def _handle_request(self, listener: Any, req: Any, client: BufferedSocket, addr: Any,
                        may_keep: bool) -> bool:
        """`SyncWorker.handle_request` that closes only when `may_keep` is False, HTTP says
        so, or the worker is stopping; returns whether the connection may stay open. The
        access log is written only when one is configured (gunicorn formats every entry
        before its logger drops it: measured 6 % of a worker's time on /healthz)."""
        environ: dict[str, Any] = {}
        resp = None
        try:
            self.cfg.pre_request(self, req)
            request_start = datetime.now()
            resp, environ = wsgi.create(req, client, addr, listener.getsockname(), self.cfg)
            self.nr += 1
            if self.nr >= self.max_requests:
                self.log.info("Autorestarting worker after current request.")
                self.alive = False
            if not (may_keep and self.alive):
                resp.force_close()
            respiter = self.wsgi(environ, resp.start_response)
            try:
                if isinstance(respiter, environ["wsgi.file_wrapper"]):
                    resp.write_file(respiter)
                else:
                    for item in respiter:
                        resp.write(item)
                resp.close()
                client.flush()
            finally:
                if self.access_log:
                    self.log.access(resp, req, environ, datetime.now() - request_start)
                if hasattr(respiter, "close"):
                    respiter.close()
            return not resp.should_close()
        except OSError:
            util.reraise(*sys.exc_info())
        except (Exception, SystemExit):
            if resp and resp.headers_sent:
                # a response already begun cannot carry an error response too
                self.log.exception("Error handling request")
                raise StopIteration() from None
            raise
        finally:
            try:
                self.cfg.post_request(self, req, environ, resp)
            except Exception:
                self.log.exception("Exception in post_request hook")
        return False

    def _answer(self, sock: socket.socket, status: int, type_: str, detail: str) -> None:
        """Send a small problem-details answer without blocking, then close gracefully."""
        self._send_quietly(sock, problem_bytes(status, type_, detail))
        try:
            sock.shutdown(socket.SHUT_WR)
        except OSError:
            sock.close()
            return
        self._linger(sock)

    @staticmethod
    def _send_quietly(sock: socket.socket, data: bytes) -> None:
        try:
            sock.setblocking(False)
            sock.send(data)  # a few hundred bytes: fits any socket buffer
        except OSError:
            pass

    # lingering closes ----------------------------------------------------------------------

    def _linger(self, sock: socket.socket) -> None:
        """Finish gunicorn's graceful close in the loop: read until the client closes."""
        try:
            sock.setblocking(False)
            while len(self._lingering) >= self.settings.pending_connections:
                self._end_linger(next(iter(self._lingering.values())))
            lingering = _Lingering(sock, time.monotonic() + LINGER_SECONDS)
            self._selector.register(sock, selectors.EVENT_READ, lingering)
        except (OSError, ValueError, KeyError):
            sock.close()
            return
        self._lingering[lingering.fd] = lingering

    def _drain(self, lingering: _Lingering) -> None:
        try:
            data = lingering.sock.recv(LINGER_BYTES)
        except (BlockingIOError, InterruptedError):
            return
        except OSError:
            data = b""
        lingering.drained += len(data)
        if not data or lingering.drained >= LINGER_BYTES:
            self._end_linger(lingering)

    def _end_linger(self, lingering: _Lingering) -> None:
        if self._lingering.get(lingering.fd) is lingering:
            del self._lingering[lingering.fd]
        try:
            self._selector.unregister(lingering.sock)
        except (KeyError, ValueError):
            pass
        lingering.sock.close()


def problem_bytes(status: int, type_: str, detail: str) -> bytes:
    """A complete HTTP/1.1 response carrying an RFC 9457 problem, as the app would write it
    (same `type`, `title`, `status`, `detail` members; the titles come from service.problems)."""
    try:
        from service.problems import PROBLEM_TYPES

        title = PROBLEM_TYPES[type_][1]
    except (ImportError, KeyError):
        title = type_.rsplit("/", 1)[-1].replace("-", " ").capitalize()
    body = json.dumps({"type": type_, "title": title, "status": status, "detail": detail},
                      separators=(",", ":")).encode()
    reason = {408: "Request Timeout", 413: "Content Too Large", 414: "URI Too Long"}.get(
        status, "Error")
    head = (f"HTTP/1.1 {status} {reason}\r\nConnection: close\r\n"
            f"Content-Type: application/problem+json\r\nContent-Length: {len(body)}\r\n\r\n")
    return head.encode("latin-1") + body
