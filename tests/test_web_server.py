"""The waitress settings `eightfold serve` uses: half-sent connections cannot lock everyone out."""

from __future__ import annotations

import socket
import threading
import time

import pytest

from webapp import create_app
from webapp.server import WAITRESS_LIMITS

PORT = 8118  # loopback only


def run_until_closed(srv, stopping: threading.Event) -> None:
    """srv.run(), where closing the server from the test thread ends the loop quietly.

    Closing the sockets while the loop sits in select() makes select raise EBADF in the loop's thread.
    """
    try:
        srv.run()
    except OSError:
        if not stopping.is_set():
            raise


@pytest.fixture
def live(tmp_path):
    from waitress import create_server

    app = create_app({"DATA_DIR": str(tmp_path / "data"), "SWEEP_AUTORESUME": False})
    srv = create_server(app, host="127.0.0.1", port=PORT, threads=4, **WAITRESS_LIMITS)
    stopping = threading.Event()
    thread = threading.Thread(target=run_until_closed, args=(srv, stopping), daemon=True)
    thread.start()
    yield srv
    stopping.set()
    srv.close()
    thread.join(5)
    app.extensions["eightfold_worker"].stop()


def get(path="/login", timeout=5.0) -> tuple[int, float]:
    start = time.monotonic()
    s = socket.create_connection(("127.0.0.1", PORT), timeout=timeout)
    try:
        s.sendall(f"GET {path} HTTP/1.1\r\nHost: 127.0.0.1\r\nConnection: close\r\n\r\n".encode())
        status = int(s.recv(64).split()[1])
    finally:
        s.close()
    return status, time.monotonic() - start


def half_sent(n):
    socks = []
    for _ in range(n):
        s = socket.create_connection(("127.0.0.1", PORT), timeout=5)
        s.sendall(b"POST /sets HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Length: 100000\r\n\r\nabc")
        socks.append(s)
    return socks


def test_110_half_sent_connections_do_not_block_new_requests(live):
    # waitress's default connection_limit (100) made request 101 wait for the 120 s channel timeout
    socks = half_sent(110)
    try:
        status, took = get()
        assert status == 200 and took < 3.0
    finally:
        for s in socks:
            s.close()


@pytest.mark.slow
def test_a_silent_connection_is_closed_after_the_channel_timeout(live):
    [s] = half_sent(1)
    try:
        s.settimeout(WAITRESS_LIMITS["channel_timeout"] + 2 * WAITRESS_LIMITS["cleanup_interval"] + 10)
        start = time.monotonic()
        assert s.recv(1024) == b""  # closed by the server, nothing sent
        took = time.monotonic() - start
        assert took <= WAITRESS_LIMITS["channel_timeout"] + 2 * WAITRESS_LIMITS["cleanup_interval"] + 2
    finally:
        s.close()
