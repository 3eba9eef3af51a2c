"""The real service (`stressmap serve`, waitress) under what a hostile or careless client does.

- Concurrent point predictions over more ready models than the model cache holds: every model
  load goes through the netCDF/HDF5 library, which is not thread-safe; the process must neither
  crash (a segmentation fault ends it with no answer) nor answer 5xx.
- Idle connections holding half-sent headers must not starve other clients: waitress closes
  them after ``channel_timeout`` and admits ``connection_limit`` connections.
- Bodies over waitress' own ``max_request_body_size`` get an RFC 9457 problem document (RFC 9457
  section 3), like every other error of the service.

Sources: RFC 9457 (problem details), RFC 9110 section 15.5.14 (413 Content Too Large); the rest
is common practice of running a threaded HTTP service.
"""

from __future__ import annotations

import socket
import time
from concurrent.futures import ThreadPoolExecutor

import pytest
from service_support import store_ready_model
from stressmap_api.store import Store
from test_server import Server

httpx = pytest.importorskip("httpx")

pytestmark = pytest.mark.server


@pytest.fixture
def data_dir_with_models(tmp_path, coarse_demo_model):
    """Five ready copies of the coarse fictional demo model (more than the cache of 2 below)."""
    data_dir = tmp_path / "data"
    store = Store(data_dir, cache_size=0)
    ids = [store_ready_model(store, coarse_demo_model) for _ in range(5)]
    return data_dir, ids


def test_concurrent_predictions_over_more_models_than_the_cache(data_dir_with_models):
    data_dir, ids = data_dir_with_models
    server = Server(data_dir, MODEL_CACHE_SIZE=1, COMPUTE_THREADS=8)
    try:
        def client_loop(k: int) -> list[int]:
            codes = []
            with httpx.Client(base_url=server.base + "/api/v1", timeout=60.0) as http:
                for i in range(20):  # round-robin over the models: every request may load one
                    mid = ids[(k + i) % len(ids)]
                    resp = http.post(f"/models/{mid}/predict", json={"points": [[-15.0, -20.0]]})
                    codes.append(resp.status_code)
            return codes

        with ThreadPoolExecutor(8) as pool:
            codes = [c for chunk in pool.map(client_loop, range(8)) for c in chunk]
        assert server.proc.poll() is None, "the service died: " + "".join(server.seen[-5:])
        assert codes.count(200) == len(codes), sorted(set(codes))
        assert server.http.get("/health").status_code == 200
    finally:
        server.stop()


def test_half_sent_headers_do_not_starve_other_clients(tmp_path):
    server = Server(tmp_path / "data")
    host, port = server.base.removeprefix("http://").split(":")
    socks = []
    try:
        for _ in range(110):  # more than waitress' old connection_limit of 100
            s = socket.create_connection((host, int(port)), timeout=5)
            s.sendall(b"GET /api/v1/health HTTP/1.1\r\nHost: 127.0.0.1\r\nX-Slow: ")
            socks.append(s)
        t0 = time.monotonic()
        resp = httpx.get(server.base + "/api/v1/health", timeout=10.0)
        assert resp.status_code == 200 and time.monotonic() - t0 < 5.0
    finally:
        for s in socks:
            s.close()
        server.stop()


def test_body_over_the_server_limit_is_a_problem_document(tmp_path):
    server = Server(tmp_path / "data")
    try:
        host, port = server.base.removeprefix("http://").split(":")
        with socket.create_connection((host, int(port)), timeout=10) as s:
            # waitress refuses a declared length over max_request_body_size before reading it
            s.sendall(b"POST /api/v1/models HTTP/1.1\r\nHost: 127.0.0.1\r\n"
                      b"Content-Type: application/json\r\nContent-Length: 99999999999\r\n\r\n")
            data = b""
            deadline = time.monotonic() + 10
            while b"\r\n\r\n" not in data or not data.rstrip().endswith(b"}"):
                chunk = s.recv(65536)
                if not chunk or time.monotonic() > deadline:
                    break
                data += chunk
        head, _, body = data.partition(b"\r\n\r\n")
        assert head.startswith(b"HTTP/1.1 413"), head
        assert b"content-type: application/problem+json" in head.lower()
        assert b'"status": 413' in body
    finally:
        server.stop()
