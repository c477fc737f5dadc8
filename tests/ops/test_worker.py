"""service/ops/worker.py without a server: request framing, the buffered socket, settings.

The framing rules checked here are those of RFC 9112 (section 2.2 for the head, section 6 for
the body length, section 7.1 for chunked bodies). The real server is driven in
tests/integration/test_slow_clients.py.
"""

from __future__ import annotations

import json
import socket

import gunicorn.config
import pytest

from service.ops.worker import (
    CONTINUE,
    HEAD_HOLD_BYTES,
    BufferedSocket,
    ParserConfig,
    RequestBuffer,
    Verdict,
    WorkerSettings,
    head_limit_of,
    line_limit_of,
    problem_bytes,
)
from service.problems import PROBLEM_TYPES

POST_HEAD = b"POST /v1/plate HTTP/1.1\r\nHost: a\r\nContent-Type: application/json\r\n"


def buffer(max_body: int = 1000, head_limit: int = 4096) -> RequestBuffer:
    return RequestBuffer(max_body, head_limit)


def feed_bytewise(buf: RequestBuffer, data: bytes) -> list[Verdict]:
    return [buf.feed(data[i:i + 1]) for i in range(len(data))]


# --------------------------------------------------------------------------- the head


def test_a_head_is_complete_only_at_its_empty_line_even_fed_byte_by_byte():
    request = b"GET /healthz HTTP/1.1\r\nHost: a\r\nAccept: */*\r\n\r\n"
    verdicts = feed_bytewise(buffer(), request)
    assert verdicts[:-1] == [Verdict.MORE] * (len(request) - 1)
    assert verdicts[-1] is Verdict.COMPLETE


def test_one_empty_line_before_the_request_line_is_ignored():
    assert buffer().feed(b"\r\nGET / HTTP/1.1\r\nHost: a\r\n\r\n") is Verdict.COMPLETE
    assert buffer().feed(b"\r\nGET / HTTP/1.1\r\nHost: a\r\n") is Verdict.MORE


def test_a_bare_lf_is_handed_to_gunicorn_at_once():
    # gunicorn refuses a bare LF in the head with 400 instead of waiting for more
    assert buffer().feed(b"GET / HTTP/1.1\nHost: a\n") is Verdict.PASS


def test_a_crlf_split_across_reads_is_not_a_bare_lf():
    buf = buffer()
    for piece in (b"GET / HTTP/1.1\r", b"\nHost: a\r\nX-A", b"B: c\r", b"\n", b"\r", b"\n"):
        verdict = buf.feed(piece)
    assert verdict is Verdict.COMPLETE


def test_a_head_beyond_the_head_limit_is_handed_to_gunicorn():
    # gunicorn's parser answers 414/431 from the bytes it is given
    buf = buffer(head_limit=100)
    assert buf.feed(b"GET /" + b"a" * 90) is Verdict.MORE
    assert buf.feed(b"b" * 20) is Verdict.PASS


def test_the_request_line_is_held_to_its_limit_as_gunicorn_counts_it():
    line = b"GET /" + b"a" * 95  # 100 bytes without CRLF
    assert buffer().feed(line + b"\r\nHost: a\r\n\r\n") is Verdict.COMPLETE
    limited = RequestBuffer(1000, 4096, line_limit=100)
    assert limited.feed(line + b"\r\nHost: a\r\n\r\n") is Verdict.COMPLETE
    longer = RequestBuffer(1000, 4096, line_limit=99)
    assert longer.feed(line + b"\r\n") is Verdict.LINE_TOO_LONG
    # without its CRLF yet: refused once it cannot fit any more (gunicorn's read_line)
    trickled = RequestBuffer(1000, 4096, line_limit=99)
    assert feed_bytewise(trickled, line + b"aa")[-3:] == [Verdict.MORE, Verdict.MORE,
                                                         Verdict.LINE_TOO_LONG]


def test_the_parser_config_lifts_only_the_line_limit():
    cfg = gunicorn.config.Config()
    cfg.set("limit_request_line", 16384)
    cfg.set("limit_request_fields", 50)
    assert line_limit_of(cfg) == 16384
    parser_cfg = ParserConfig(cfg)
    assert parser_cfg.limit_request_line == 0
    assert parser_cfg.limit_request_fields == 50 and not parser_cfg.is_ssl


# --------------------------------------------------------------------------- Content-Length


def test_a_body_is_complete_at_its_last_content_length_byte():
    body = json.dumps({"width": 0.6, "height": 1.0}).encode()
    buf = buffer()
    assert buf.feed(POST_HEAD + b"Content-Length: %d\r\n\r\n" % len(body)) is Verdict.MORE
    verdicts = feed_bytewise(buf, body)
    assert verdicts[:-1] == [Verdict.MORE] * (len(body) - 1)
    assert verdicts[-1] is Verdict.COMPLETE


def test_no_length_means_no_body():
    assert buffer().feed(b"POST /v1/plate HTTP/1.1\r\nHost: a\r\n\r\n") is Verdict.COMPLETE


def test_a_declared_body_over_the_limit_is_handed_on_without_waiting_for_it():
    # the app answers its own 413 problem from Content-Length alone
    assert buffer(max_body=10).feed(POST_HEAD + b"Content-Length: 11\r\n\r\n") is Verdict.PASS
    assert buffer(max_body=10).feed(POST_HEAD + b"Content-Length: 10\r\n\r\n") is Verdict.MORE


@pytest.mark.parametrize("headers", [
    b"Content-Length: 5\r\nContent-Length: 6\r\n",     # conflicting lengths
    b"Content-Length: -5\r\n",                          # not a length
    b"Content-Length: 0x10\r\n",
    b"Content-Length: 5\r\nTransfer-Encoding: chunked\r\n",  # both framings
    b"Transfer-Encoding: gzip\r\n",                     # last coding not chunked
    b"Transfer-Encoding: chunked, gzip\r\n",
    b"No colon here\r\n",                               # not a header line
])
def test_heads_gunicorn_refuses_are_handed_on_at_once(headers):
    assert buffer().feed(b"POST / HTTP/1.1\r\nHost: a\r\n" + headers + b"\r\n") is Verdict.PASS


def test_expect_100_continue_is_noticed_for_http_1_1_only():
    head = POST_HEAD + b"Content-Length: 5\r\nExpect: 100-continue\r\n\r\n"
    buf = buffer()
    assert buf.feed(head) is Verdict.MORE and buf.expects_continue
    old = buffer()
    old.feed(head.replace(b"HTTP/1.1", b"HTTP/1.0"))
    assert not old.expects_continue


# --------------------------------------------------------------------------- chunked


CHUNKED_HEAD = b"POST / HTTP/1.1\r\nHost: a\r\nTransfer-Encoding: chunked\r\n\r\n"


def test_a_chunked_body_is_complete_after_the_zero_chunk_and_the_empty_line():
    body = b"5\r\nhello\r\n6;ext=1\r\n world\r\n0\r\n\r\n"
    buf = buffer()
    buf.feed(CHUNKED_HEAD)
    verdicts = feed_bytewise(buf, body)
    assert verdicts[:-1] == [Verdict.MORE] * (len(body) - 1)
    assert verdicts[-1] is Verdict.COMPLETE
    assert buf.chunk_data == 11


def test_a_chunked_body_with_trailers_is_complete_after_them():
    buf = buffer()
    assert buf.feed(CHUNKED_HEAD + b"3\r\nabc\r\n0\r\nX-Check: 1\r\n") is Verdict.MORE
    assert buf.feed(b"\r\n") is Verdict.COMPLETE


def test_a_chunked_body_over_the_limit_is_refused_from_the_chunk_size():
    buf = buffer(max_body=10)
    assert buf.feed(CHUNKED_HEAD + b"6\r\nabcdef\r\n") is Verdict.MORE
    assert buf.feed(b"5\r\n") is Verdict.TOO_LARGE


@pytest.mark.parametrize("body", [b"zz\r\n", b"3\r\nabcXY", b";\r\n", b"1" * 17 + b"\r\n"])
def test_malformed_chunks_are_handed_to_gunicorn(body):
    assert buffer().feed(CHUNKED_HEAD + body) is Verdict.PASS


# --------------------------------------------------------------------------- the socket


@pytest.fixture
def pair():
    a, b = socket.socketpair()
    a.settimeout(2)
    b.settimeout(2)
    yield a, b
    a.close()
    b.close()


def test_buffered_bytes_come_first_then_end_of_stream_without_waiting(pair):
    server, client = pair
    client.sendall(b"bytes the worker must never read")
    wrapped = BufferedSocket(server, b"GET / HTTP/1.1\r\n\r\n")
    assert wrapped.recv(5) == b"GET /"
    view = bytearray(100)
    n = wrapped.recv_into(view)
    assert bytes(view[:n]) == b" HTTP/1.1\r\n\r\n"
    assert wrapped.recv(8192) == b""  # not the socket's pending bytes: no blocking read
    assert wrapped.getsockname() == server.getsockname()  # everything else is the socket's


def test_the_100_continue_sent_while_buffering_is_not_sent_twice(pair):
    server, client = pair
    wrapped = BufferedSocket(server, b"", continue_sent=True)
    assert wrapped.send(CONTINUE) == len(CONTINUE)
    wrapped.sendall(b"HTTP/1.1 200 OK\r\n\r\n")
    wrapped.send(CONTINUE)  # a second one is the application's own: passed on
    assert client.recv(100) == b"HTTP/1.1 200 OK\r\n\r\n" + CONTINUE


class _Recorder:
    """A socket stand-in that records each write (one entry per system call)."""

    def __init__(self) -> None:
        self.writes: list[bytes] = []

    def sendall(self, data: bytes, flags: int = 0) -> None:
        self.writes.append(bytes(data))

    def send(self, data: bytes, flags: int = 0) -> int:
        self.writes.append(bytes(data))
        return len(data)

    def shutdown(self, how: int) -> None:
        self.writes.append(b"<shutdown>")

    def close(self) -> None:
        self.writes.append(b"<close>")


def test_a_response_head_leaves_with_its_body_in_one_write():
    sock = _Recorder()
    wrapped = BufferedSocket(sock, b"")  # type: ignore[arg-type]
    wrapped.sendall(b"HTTP/1.1 200 OK\r\nContent-Length: 4\r\n\r\n")
    assert sock.writes == []  # held
    wrapped.sendall(b"body")
    wrapped.sendall(b"more")
    wrapped.flush()
    assert sock.writes == [b"HTTP/1.1 200 OK\r\nContent-Length: 4\r\n\r\nbody", b"more"]


def test_what_is_held_goes_out_before_any_other_write_or_the_close():
    head = b"HTTP/1.1 204 No Content\r\n\r\n"
    for finish, expected in (
            (lambda w: w.send(b"x"), [head, b"x"]),
            (lambda w: w.shutdown(socket.SHUT_WR), [head, b"<shutdown>"]),
            (lambda w: w.close(), [head, b"<close>"]),
            (lambda w: w.flush(), [head])):
        sock = _Recorder()
        wrapped = BufferedSocket(sock, b"")  # type: ignore[arg-type]
        wrapped.sendall(head)
        finish(wrapped)
        assert sock.writes == expected


def test_large_writes_are_not_held_or_copied():
    sock = _Recorder()
    wrapped = BufferedSocket(sock, b"")  # type: ignore[arg-type]
    big = b"h" * (HEAD_HOLD_BYTES + 1)
    wrapped.sendall(big)
    assert sock.writes == [big]
    sock = _Recorder()
    wrapped = BufferedSocket(sock, b"")  # type: ignore[arg-type]
    body = b"b" * (HEAD_HOLD_BYTES * 8 + 1)
    wrapped.sendall(b"head")
    wrapped.sendall(body)
    assert sock.writes == [b"head", body]


def test_after_the_half_close_the_socket_goes_to_the_linger_callback(pair):
    server, client = pair
    handed: list[socket.socket] = []
    wrapped = BufferedSocket(server, b"unread body", on_linger=handed.append)
    wrapped.shutdown(socket.SHUT_WR)
    assert wrapped.recv(4096) == b""  # gunicorn's close_graceful loop ends at once
    wrapped.close()
    wrapped.close()
    assert handed == [server] and server.fileno() >= 0  # still open: the loop closes it
    assert client.recv(10) == b""  # the client saw the FIN


def test_without_the_half_close_close_closes(pair):
    server, _ = pair
    handed: list[socket.socket] = []
    BufferedSocket(server, b"", on_linger=handed.append).close()
    assert handed == [] and server.fileno() == -1


# --------------------------------------------------------------------------- settings


def test_settings_defaults_and_environment():
    limit = head_limit_of(gunicorn.config.Config())
    base = WorkerSettings.from_environ({}, max_body_bytes=2_000_000, head_limit=limit)
    assert (base.read_seconds, base.pending_connections) == (10.0, 200)
    assert base.pending_bytes == 32 * 1024 * 1024
    assert base.keepalive_requests == 100
    custom = WorkerSettings.from_environ(
        {"CONDUCTION_REQUEST_READ_SECONDS": "2.5", "CONDUCTION_PENDING_CONNECTIONS": "7",
         "CONDUCTION_PENDING_BYTES": "10", "CONDUCTION_KEEPALIVE_REQUESTS": "1"},
        max_body_bytes=1000, head_limit=500)
    assert (custom.read_seconds, custom.pending_connections) == (2.5, 7)
    assert custom.keepalive_requests == 1
    assert custom.pending_bytes == 1500  # raised so that one largest request fits


@pytest.mark.parametrize(("name", "raw", "message"), [
    ("CONDUCTION_REQUEST_READ_SECONDS", "soon", "is not a valid float"),
    ("CONDUCTION_PENDING_CONNECTIONS", "0", "must be positive and finite"),
    ("CONDUCTION_REQUEST_READ_SECONDS", "inf", "must be positive and finite"),
    ("CONDUCTION_PENDING_BYTES", "1.5", "is not a valid int"),
    ("CONDUCTION_KEEPALIVE_REQUESTS", "0", "must be positive and finite"),
])
def test_bad_settings_name_the_variable(name, raw, message):
    with pytest.raises(ValueError, match=f"^{name}='{raw}' {message}"):
        WorkerSettings.from_environ({name: raw}, max_body_bytes=10, head_limit=10)


def test_head_limit_covers_gunicorns_own_header_buffer():
    cfg = gunicorn.config.Config()
    cfg.set("limit_request_line", 16384)
    cfg.set("limit_request_field_size", 16384)
    # gunicorn's max_buffer_headers (fields * (field size + 2) + 4) plus the request line
    assert head_limit_of(cfg) == 16384 + 2 + 100 * (16384 + 2) + 4


# --------------------------------------------------------------------------- answers


@pytest.mark.parametrize(("status", "type_"), [(408, "/problems/bad-request"),
                                               (413, "/problems/too-large"),
                                               (414, "/problems/bad-request")])
def test_worker_answers_are_problem_details_like_the_apps(status, type_):
    raw = problem_bytes(status, type_, "what happened")
    head, _, body = raw.partition(b"\r\n\r\n")
    lines = head.decode("latin-1").split("\r\n")
    assert lines[0].startswith(f"HTTP/1.1 {status} ")
    headers = dict(line.split(": ", 1) for line in lines[1:])
    assert headers["Content-Type"] == "application/problem+json"
    assert headers["Connection"] == "close" and int(headers["Content-Length"]) == len(body)
    assert json.loads(body) == {"type": type_, "title": PROBLEM_TYPES[type_][1],
                                "status": status, "detail": "what happened"}
