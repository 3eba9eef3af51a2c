"""Load test of the production server: `stressmap serve --demo` (waitress) on a free loopback port.

    .venv/bin/python benchmarks/load.py [--clients 32] [--requests 6000] [--time-limit 60]
                                         [--grid-every 20] [--data-dir DIR]

Starts the service in a subprocess with the fictional demo model (built on first use in the data
directory, default ``var/bench-data``, and reused afterwards), then drives it with a bounded
asyncio + httpx client: ``--clients`` concurrent clients share a fixed budget of ``--requests``
requests; every ``--grid-every``-th request is a grid (``GET /models/{id}/field``), the rest are
point predictions (``POST /models/{id}/predict`` with 1-5 points inside the plate). It stops
after the budget or the time limit, whichever comes first, stops the server and prints throughput,
p50/p95/p99 latency and errors per kind. Traffic goes to 127.0.0.1 only.

Targets (issue 8, on 2 cores): >= 200 point-prediction requests/s, p99 < 200 ms, zero errors.
Exit status 0 when the run completed without errors (targets are reported, not enforced).
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import queue
import random
import re
import signal
import statistics
import subprocess
import sys
import threading
import time
from pathlib import Path

import httpx

REPO = Path(__file__).resolve().parent.parent
STRESSMAP = Path(sys.executable).with_name("stressmap")

#: Points inside the fictional demo plate (lon, lat); each request picks 1-5 of them.
POINTS = [(-15.0, -20.0), (-5.0, -12.0), (-25.0, -25.0), (-10.0, -30.0), (-20.0, -15.0),
          (-8.0, -22.0), (-18.0, -28.0), (-12.0, -10.0)]
GRID_QUERY = {"bbox": "-25,-30,-5,-10", "spacing_km": "200", "format": "geojson"}


def start_server(data_dir: Path, threads: int | None, timeout_s: float = 600.0):
    """Start `stressmap serve --demo --port 0`; return (process, base URL, demo model id)."""
    env = dict(os.environ, STRESSMAP_DATA_DIR=str(data_dir))
    env.pop("STRESSMAP_API_TOKEN", None)
    cmd = [str(STRESSMAP), "serve", "--demo", "--host", "127.0.0.1", "--port", "0"]
    if threads:
        cmd += ["--threads", str(threads)]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                            env=env, cwd=REPO, start_new_session=True)
    lines: queue.Queue = queue.Queue()
    threading.Thread(target=lambda: [lines.put(x) for x in proc.stdout], daemon=True).start()
    base = model_id = None
    seen = []
    deadline = time.monotonic() + timeout_s
    while base is None or model_id is None:
        try:
            line = lines.get(timeout=max(deadline - time.monotonic(), 0.01))
        except queue.Empty:
            stop_server(proc)
            raise SystemExit("server did not start:\n" + "".join(seen[-20:])) from None
        seen.append(line)
        if m := re.search(r"listening on (http://127\.0\.0\.1:\d+)", line):
            base = m.group(1)
        if m := re.search(r"\) ready: ([0-9a-f]{32})", line):
            model_id = m.group(1)
    return proc, base, model_id


def cpu_seconds(pid: int) -> float:
    """User + system CPU time of a process, all its threads (Linux /proc/<pid>/stat)."""
    try:
        fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    except OSError:
        return float("nan")
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def stop_server(proc) -> None:
    if proc.poll() is None:
        os.killpg(proc.pid, signal.SIGINT)
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait(timeout=20)


async def drive(base: str, model_id: str, clients: int, total: int, time_limit: float,
                grid_every: int, seed: int = 1) -> dict:
    """Run the load; returns per-kind latencies (s), error messages and the wall time."""
    rng = random.Random(seed)
    plan = ["grid" if (i + 1) % grid_every == 0 else "point" for i in range(total)]
    bodies = [json.dumps({"points": [list(p) for p in rng.sample(POINTS, rng.randint(1, 5))]})
              .encode() for _ in range(total)]  # encoded once: the client's CPU is the server's
    json_type = {"Content-Type": "application/json"}
    latencies = {"point": [], "grid": []}
    errors: dict[str, list[str]] = {"point": [], "grid": []}
    next_index = 0
    deadline = time.monotonic() + time_limit
    # One httpx client (one keep-alive connection) per simulated client: a shared pool of 32
    # connections costs the load generator about twice the CPU per request.
    limits = httpx.Limits(max_connections=1, max_keepalive_connections=1)

    async def client() -> None:
        nonlocal next_index
        async with httpx.AsyncClient(base_url=f"{base}/api/v1/models/{model_id}", limits=limits,
                                     timeout=30.0) as http:
            while time.monotonic() < deadline:
                i = next_index
                if i >= total:
                    return
                next_index += 1
                kind = plan[i]
                t0 = time.perf_counter()
                try:
                    if kind == "point":
                        resp = await http.post("/predict", content=bodies[i], headers=json_type)
                    else:
                        resp = await http.get("/field", params=GRID_QUERY)
                    ok = resp.status_code == 200 and len(resp.content) > 0
                    msg = f"HTTP {resp.status_code}"
                except httpx.HTTPError as exc:
                    ok, msg = False, f"{type(exc).__name__}: {exc}"
                latencies[kind].append(time.perf_counter() - t0)
                if not ok:
                    errors[kind].append(msg)

    start = time.perf_counter()
    await asyncio.gather(*(client() for _ in range(clients)))
    wall = time.perf_counter() - start
    return {"latencies": latencies, "errors": errors, "wall_s": wall,
            "unsent": total - next_index}


def percentile(values, q: float) -> float:
    if not values:
        return float("nan")
    ordered = sorted(values)
    k = min(int(round(q / 100.0 * (len(ordered) - 1))), len(ordered) - 1)
    return ordered[k]


def report(result: dict, clients: int) -> bool:
    wall = result["wall_s"]
    n_all = sum(len(v) for v in result["latencies"].values())
    print(f"wall time {wall:.1f} s, {clients} concurrent clients, "
          f"{result['unsent']} requests not sent (time limit)")
    print(f"CPU per request: server {1000 * result['server_cpu_s'] / max(n_all, 1):.2f} ms, "
          f"load client {1000 * result['client_cpu_s'] / max(n_all, 1):.2f} ms; "
          f"machine load average before the run {result['loadavg']:.1f} on {os.cpu_count()} cpus "
          "(figures from a busy machine understate the service)")
    all_ok = True
    for kind in ("point", "grid"):
        lat = result["latencies"][kind]
        errs = result["errors"][kind]
        if not lat:
            continue
        print(f"{kind:>5}: {len(lat):6d} requests  {len(lat) / wall:7.1f} req/s  "
              f"p50 {1000 * statistics.median(lat):6.1f} ms  p95 {1000 * percentile(lat, 95):6.1f} ms"
              f"  p99 {1000 * percentile(lat, 99):6.1f} ms  max {1000 * max(lat):6.1f} ms  "
              f"errors {len(errs)}" + (f" (first: {errs[0]})" if errs else ""))
        all_ok &= not errs
    pts = result["latencies"]["point"]
    rate = len(pts) / wall if wall else 0.0
    p99 = 1000 * percentile(pts, 99)
    n_err = sum(len(e) for e in result["errors"].values())
    print(f"targets: point rate {rate:.0f}/s (>= 200: {'met' if rate >= 200 else 'MISSED'}), "
          f"point p99 {p99:.0f} ms (< 200: {'met' if p99 < 200 else 'MISSED'}), "
          f"errors {n_err} (0: {'met' if n_err == 0 else 'MISSED'})")
    return all_ok


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--clients", type=int, default=32)
    ap.add_argument("--requests", type=int, default=6000)
    ap.add_argument("--time-limit", type=float, default=60.0, help="seconds of load at most")
    ap.add_argument("--grid-every", type=int, default=20, help="every N-th request is a grid")
    ap.add_argument("--threads", type=int, default=None, help="waitress threads (default: config)")
    ap.add_argument("--data-dir", default=str(REPO / "var" / "bench-data"))
    args = ap.parse_args(argv)
    data_dir = Path(args.data_dir).resolve()
    t0 = time.perf_counter()
    proc, base, model_id = start_server(data_dir, args.threads)
    print(f"server {base} ready in {time.perf_counter() - t0:.1f} s; demo model {model_id}; "
          f"cpus {os.cpu_count()}")
    try:
        with httpx.Client(base_url=f"{base}/api/v1/models/{model_id}", timeout=60) as warm:
            warm.post("/predict", json={"points": [list(POINTS[0])]}).raise_for_status()
            warm.get("/field", params=GRID_QUERY).raise_for_status()
        loadavg = os.getloadavg()[0]
        server_cpu, client_cpu = cpu_seconds(proc.pid), time.process_time()
        result = asyncio.run(drive(base, model_id, args.clients, args.requests, args.time_limit,
                                   max(args.grid_every, 1)))
        result["server_cpu_s"] = cpu_seconds(proc.pid) - server_cpu
        result["client_cpu_s"] = time.process_time() - client_cpu
        result["loadavg"] = loadavg
    finally:
        stop_server(proc)
    return 0 if report(result, args.clients) else 1


if __name__ == "__main__":
    sys.exit(main())
