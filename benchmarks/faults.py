"""Faults a hostile or careless client causes, against the production server: figures per fault.

    .venv/bin/python benchmarks/faults.py [--data-dir DIR]

Starts `stressmap serve --demo` (waitress, the fictional demo model; data directory default
``var/bench-data``, reused) with a model cache of 2 and five more copies of the demo model in the
index, then, one after the other:

1. 8 clients x 25 one-point predictions round-robin over 6 ready models (more than the cache):
   requests/s, p50/p99 latency, errors, whether the server is alive (the netCDF/HDF5 library is not
   thread-safe; without the service's lock this crashed the process);
2. 110 connections holding half-sent headers, then ``GET /health``: its latency;
3. 4 calibrations with the largest resample counts at once, with a 5 s time limit, while one
   client keeps predicting: the calibrations' answers and times, and the predictions' p99;
4. a body over waitress' own size limit: status and media type;
5. 200 requests with hostile bodies (lone surrogates, 600-level nesting, wrong media types,
   foreign Host headers): count of 5xx.

Prints one line per fault; exit status 0 when every fault was survived (no 5xx other than a 503
with Retry-After, the server alive at the end). Traffic goes to 127.0.0.1 only.
"""

from __future__ import annotations

import argparse
import os
import socket
import statistics
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import httpx
from load import REPO, start_server, stop_server
from stressmap_api.store import Store

INDICATORS = "id,lon,lat,type,azimuth_deg\n" + "\n".join(
    f"S{i},{-25 + 0.1 * i:.2f},-20,overcoring,{(7 * i) % 180}" for i in range(150))


def pct(values, q):
    return statistics.quantiles(values, n=100)[q - 1] * 1000 if len(values) > 2 else float("nan")


def copies_of_demo(data_dir: Path, demo_id: str, n: int) -> list[str]:
    from stressmap.io.modeldir import read_model, write_model

    store = Store(data_dir, cache_size=0)
    model = read_model(store.model_dir(demo_id))
    ids = []
    for _ in range(n):
        mid = store.add_model("copy of the fictional demo plate (benchmark)", None)
        write_model(model, store.model_dir(mid))
        store.mark_model_ready(mid, model.summary)
        ids.append(mid)
    return ids


def many_models(base, ids):
    def loop(k):
        out = []
        with httpx.Client(base_url=base + "/api/v1", timeout=60) as http:
            for i in range(25):
                t0 = time.perf_counter()
                r = http.post(f"/models/{ids[(k + i) % len(ids)]}/predict",
                              json={"points": [[-15.0, -20.0]]})
                out.append((r.status_code, time.perf_counter() - t0))
        return out

    t0 = time.monotonic()
    with ThreadPoolExecutor(8) as pool:
        res = [x for chunk in pool.map(loop, range(8)) for x in chunk]
    wall = time.monotonic() - t0
    lat = [t for _, t in res]
    errors = sum(1 for s, _ in res if s != 200)
    print(f"1 many models: {len(res)} predictions over {len(ids)} models (cache 2), "
          f"{len(res) / wall:.1f} req/s, p50 {pct(lat, 50):.0f} ms, p99 {pct(lat, 99):.0f} ms, "
          f"errors {errors}")
    return errors == 0


def slow_headers(base):
    host, port = base.removeprefix("http://").split(":")
    socks = []
    try:
        for _ in range(110):
            s = socket.create_connection((host, int(port)), timeout=5)
            s.sendall(b"GET /api/v1/health HTTP/1.1\r\nHost: 127.0.0.1\r\nX-Slow: ")
            socks.append(s)
        t0 = time.perf_counter()
        ok = httpx.get(base + "/api/v1/health", timeout=30).status_code == 200
        print(f"2 half-sent headers: 110 connections open, /health answered in "
              f"{(time.perf_counter() - t0) * 1000:.0f} ms ({'ok' if ok else 'FAILED'})")
        return ok
    finally:
        for s in socks:
            s.close()


def heavy_calibrations(base, model_id):
    body = {"indicators_csv": INDICATORS, "n_bootstrap": 2000, "n_random": 2000, "n_starts": 64}

    def calib(_):
        t0 = time.perf_counter()
        r = httpx.post(f"{base}/api/v1/models/{model_id}/calibrate", json=body, timeout=120)
        return r.status_code, time.perf_counter() - t0, "Retry-After" in r.headers

    lat = []
    with ThreadPoolExecutor(5) as pool:
        futures = [pool.submit(calib, i) for i in range(4)]
        with httpx.Client(base_url=base + "/api/v1", timeout=60) as http:
            while not all(f.done() for f in futures):
                t0 = time.perf_counter()
                http.post(f"/models/{model_id}/predict", json={"points": [[-15.0, -20.0]]})
                lat.append(time.perf_counter() - t0)
        res = [f.result() for f in futures]
    codes = sorted({s for s, _, _ in res})
    print(f"3 heavy calibrations x4 (time limit 5 s): answers {codes} after "
          f"{max(t for _, t, _ in res):.1f} s at most; meanwhile {len(lat)} predictions, "
          f"p99 {pct(lat, 99):.0f} ms")
    return all(s < 500 or (s == 503 and ra) for s, _, ra in res)


def oversized(base):
    host, port = base.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=10) as s:
        s.sendall(b"POST /api/v1/models HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: "
                  b"application/json\r\nContent-Length: 99999999999\r\n\r\n")
        data = s.recv(65536)
    head = data.split(b"\r\n\r\n")[0].decode("latin-1")
    problem = "application/problem+json" in head.lower()
    print(f"4 oversized body: {head.splitlines()[0]}, problem+json {problem}")
    return problem and " 413 " in head.splitlines()[0] + " "


def hostile_bodies(base, model_id):
    texts = ['{"points": [["\\ud800", 1]]}', '{"points": ' + "[" * 600 + "]" * 600 + "}",
             '{"points": [[-15, -20]], "weights": {"ridge": 1e308}}',
             '{"region": {"polygon": {"type": "Polygon"}, "spacing_km": 5e-324}}']
    cases = 0
    fivexx = 0
    with httpx.Client(base_url=base + "/api/v1", timeout=60) as http:
        for i in range(50):
            for text in texts:
                ctype = "application/json" if i % 5 else "text/plain"
                host = "127.0.0.1" if i % 7 else "attacker.example"
                r = http.post(f"/models/{model_id}/predict", content=text.encode(),
                              headers={"Content-Type": ctype, "Host": host})
                cases += 1
                fivexx += r.status_code >= 500
    print(f"5 hostile bodies: {cases} requests, {fivexx} answered 5xx")
    return fivexx == 0


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--data-dir", default=str(REPO / "var" / "bench-data"))
    args = ap.parse_args()
    os.environ.update(STRESSMAP_MODEL_CACHE_SIZE="2", STRESSMAP_REQUEST_TIME_LIMIT_S="5",
                      STRESSMAP_COMPUTE_THREADS="8")
    proc, base, demo = start_server(Path(args.data_dir), None)
    copies: list[str] = []
    try:
        copies = copies_of_demo(Path(args.data_dir), demo, 5)
        ids = [demo] + copies
        results = [many_models(base, ids), slow_headers(base), heavy_calibrations(base, demo),
                   oversized(base), hostile_bodies(base, demo)]
        alive = proc.poll() is None and httpx.get(base + "/api/v1/health").status_code == 200
        print(f"server alive at the end: {alive}; faults survived: {sum(results)} of "
              f"{len(results)}")
        return 0 if alive and all(results) else 1
    finally:
        stop_server(proc)
        store = Store(args.data_dir, cache_size=0)
        for mid in copies:  # the benchmark's copies go; the demo model stays for the next run
            store.delete_model(mid)


if __name__ == "__main__":
    raise SystemExit(main())
