"""Large answers streamed, and slow clients, end to end on a real ``alveary serve``.

A service that streams every answer over 500 rows is compared with the session's service
(which sends the same answers whole): pandas, pyarrow and the standard library's json
must read the same values from both. Slow and idle connections are held by raw sockets.
"""

from __future__ import annotations

import io
import json
import socket
import time

import httpx
import pandas as pd
import pyarrow as pa
import pytest

from support.server import ServiceProcess

pytestmark = pytest.mark.server

HEADER_TIMEOUT = 1.5
QUERY = {"bbox": "0,40,12,50", "datetime": "../..", "level": 7}


@pytest.fixture(scope="module")
def streaming(analytic_store):
    url, options = analytic_store
    cubes = [{"id": "analytic", "url": url, "storage_options": options}]
    options = {
        "stream_rows": 500,
        "header_timeout": HEADER_TIMEOUT,
        "keep_alive_timeout": 1.0,
        "max_zones": 60_000,
    }
    with ServiceProcess(cubes, options=options) as proc:
        yield proc


def get(base, fmt):
    r = httpx.get(base + "/cubes/analytic/bbox", params={**QUERY, "f": fmt}, timeout=60)
    assert r.status_code == 200, r.text
    return r


@pytest.mark.parametrize("fmt", ["json", "geojson", "csv", "arrow"])
def test_streamed_answers_read_the_same_as_whole_ones(streaming, service, fmt):
    streamed, whole = get(streaming.url, fmt), get(service.url, fmt)
    assert streamed.headers.get("transfer-encoding") == "chunked"
    assert "content-length" not in streamed.headers
    assert whole.headers["content-length"] == str(len(whole.content))
    assert streamed.headers["etag"] == whole.headers["etag"]
    if fmt == "csv":
        frame = pd.read_csv(io.BytesIO(streamed.content))
        assert len(frame) > 500
        pd.testing.assert_frame_equal(frame, pd.read_csv(io.BytesIO(whole.content)))
    elif fmt == "arrow":
        table = pa.ipc.open_stream(streamed.content).read_all()
        assert table.num_rows > 500
        assert table.equals(pa.ipc.open_stream(whole.content).read_all())
    else:
        assert json.loads(streamed.content) == json.loads(whole.content)


def closed_after(sock, limit):
    """Seconds until the server closed ``sock`` (None if still open after ``limit``)."""
    start = time.monotonic()
    sock.settimeout(0.25)
    while time.monotonic() - start < limit:
        try:
            if sock.recv(4096) == b"":
                return time.monotonic() - start
        except TimeoutError:
            pass
        except ConnectionResetError:
            return time.monotonic() - start
    return None


def test_a_client_sending_headers_slowly_is_closed_within_the_header_timeout(streaming):
    with socket.create_connection((streaming.host, streaming.port), timeout=5) as sock:
        start = time.monotonic()
        sock.sendall(b"GET /healthz HTTP/1.1\r\nHost: x\r\n")
        closed = None
        for n in range(12):  # one header line every half second, for up to 6 s
            try:
                sock.sendall(f"X-Slow-{n}: y\r\n".encode())
            except (BrokenPipeError, ConnectionResetError):
                closed = time.monotonic() - start
                break
            waited = closed_after(sock, 0.5)
            if waited is not None:
                closed = time.monotonic() - start
                break
        assert closed is not None, "the slow client was never closed"
        assert closed < HEADER_TIMEOUT + 1.5
    # A well-behaved client is served, and an idle kept-alive connection is closed.
    with socket.create_connection((streaming.host, streaming.port), timeout=5) as sock:
        sock.sendall(b"GET /healthz HTTP/1.1\r\nHost: x\r\n\r\n")
        assert sock.recv(4096).startswith(b"HTTP/1.1 200")
        assert closed_after(sock, 4.0) is not None


def test_request_headers_over_16_kib_are_refused_and_the_connection_closed(streaming):
    # RFC 6585 §5: 431 Request Header Fields Too Large. Headers under the limit are served
    # (a 12 KiB cookie is ordinary), and a request whose body follows its headers in the
    # same packet is not counted against the limit by its body.
    def send(raw: bytes) -> bytes:
        with socket.create_connection((streaming.host, streaming.port), timeout=5) as sock:
            sock.sendall(raw)
            chunks = []
            while True:
                try:
                    data = sock.recv(65536)
                except (ConnectionResetError, TimeoutError):
                    break
                if not data:
                    break
                chunks.append(data)
            return b"".join(chunks)

    big = b"X-Big: " + b"a" * 20_000 + b"\r\n"
    reply = send(b"GET /healthz HTTP/1.1\r\nHost: x\r\n" + big + b"\r\n")
    assert reply.startswith(b"HTTP/1.1 431"), reply[:100]
    body = json.loads(reply.split(b"\r\n\r\n", 1)[1])
    assert body["status"] == 431 and "16384" in body["detail"]
    ok = b"Cookie: " + b"c" * 12_000 + b"\r\n"
    reply = send(b"GET /healthz HTTP/1.1\r\nHost: x\r\nConnection: close\r\n" + ok + b"\r\n")
    assert reply.startswith(b"HTTP/1.1 200"), reply[:100]
    body = json.dumps({"lat": [45.0], "lon": [7.0]}).encode() + b" " * 30_000
    head = b"POST /cubes/analytic/points HTTP/1.1\r\nHost: x\r\nConnection: close\r\n"
    head += b"Content-Type: application/json\r\nContent-Length: %d\r\n\r\n" % len(body)
    reply = send(head + body)
    assert reply.startswith(b"HTTP/1.1 200"), reply[:300]
