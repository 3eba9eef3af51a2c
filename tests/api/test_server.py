"""The real service: `stressmap serve` (waitress) in a subprocess on a free loopback port.

Over HTTP (httpx as the client): build the fictional demo plate, poll the job, predict at points.
Crash safety: killing the build's worker process (SIGKILL) fails the job with a clear reason and
leaves no model directory; killing the whole service mid-build and restarting it reports the job
failed ("interrupted"), never "running", and no half model is visible.
"""

from __future__ import annotations

import os
import queue
import re
import signal
import sqlite3
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
from service_support import coarse_demo_document, wait_for_job

from stressmap import CAUTION

httpx = pytest.importorskip("httpx")

pytestmark = pytest.mark.server

STRESSMAP = Path(sys.executable).with_name("stressmap")


class Server:
    """A `stressmap serve --port 0` subprocess in its own session (process group)."""

    def __init__(self, data_dir: Path, *args: str, **env):
        environ = dict(os.environ, STRESSMAP_DATA_DIR=str(data_dir), STRESSMAP_JOB_WORKERS="1",
                       **{f"STRESSMAP_{k}": str(v) for k, v in env.items()})
        environ.pop("STRESSMAP_API_TOKEN", None)
        self.proc = subprocess.Popen([str(STRESSMAP), "serve", "--port", "0", *args],
                                     stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                                     env=environ, start_new_session=True)
        self.lines: queue.Queue = queue.Queue()
        self._pump_thread = threading.Thread(target=self._pump, daemon=True)
        self._pump_thread.start()
        deadline = time.monotonic() + 120
        self.base = None
        seen = self.seen = []
        while self.base is None:
            try:
                line = self.lines.get(timeout=max(deadline - time.monotonic(), 0.01))
            except queue.Empty:
                self.kill()
                raise AssertionError("server did not start: " + "".join(seen)) from None
            seen.append(line)
            m = re.search(r"listening on (http://127\.0\.0\.1:\d+)", line)
            if m:
                self.base = m.group(1)
        self.http = httpx.Client(base_url=self.base + "/api/v1", timeout=60.0)

    def _pump(self):
        for line in self.proc.stdout:
            self.lines.put(line)

    def get(self, url):
        return self.http.get(url).json()

    def kill(self):
        """SIGKILL the service and its workers (a crash, not a shutdown)."""
        if self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGKILL)
        self.proc.wait(timeout=30)
        self._pump_thread.join(timeout=10)
        self.proc.stdout.close()
        if getattr(self, "http", None) is not None:
            self.http.close()

    def stop(self):
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGINT)
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                pass
        self.kill()


@pytest.fixture
def data_dir(tmp_path):
    return tmp_path / "data"


def _worker_pid(data_dir: Path, job_id: str) -> int:
    con = sqlite3.connect(data_dir / "index.sqlite3")
    try:
        return int(con.execute("SELECT worker_pid FROM jobs WHERE id=?", (job_id,)).fetchone()[0])
    finally:
        con.close()


def _wait_mid_build(server, job_id: str, fraction: float = 0.25) -> None:
    """Wait until the build has got past meshing (progress >= fraction) and is still running."""
    deadline = time.monotonic() + 120
    while True:
        job = server.get(f"/jobs/{job_id}")
        assert job["status"] in ("queued", "running"), job
        if job["status"] == "running" and job["progress"] >= fraction:
            return
        assert time.monotonic() < deadline, job
        time.sleep(0.02)


def test_build_poll_and_predict_over_http(data_dir):
    server = Server(data_dir, MAX_CONTENT_LENGTH=300_000)
    try:
        http = server.http
        assert http.get("/health").json()["status"] == "ok"
        resp = http.post("/models", json=coarse_demo_document())
        assert resp.status_code == 202
        job = wait_for_job(server.get, resp.headers["Location"].removeprefix("/api/v1"))
        assert job["status"] == "done", job
        model_id = job["result"]["model_id"]

        pts = {"points": [[-15.0, -20.0], [-5.0, -12.0]]}
        pred = http.post(f"/models/{model_id}/predict", json=pts)
        assert pred.status_code == 200
        assert pred.headers["content-type"].startswith("application/geo+json")
        fc = pred.json()
        assert fc["caution"] == CAUTION and fc["model_id"] == model_id
        assert [f["geometry"]["coordinates"] for f in fc["features"]] == pts["points"]
        assert all(f["properties"]["inside"] for f in fc["features"])
        assert all(0 <= f["properties"]["shmax_azimuth_deg"] < 180 for f in fc["features"])

        # The service, not waitress, answers an oversized body: problem+json 413.
        big = http.post(f"/models/{model_id}/predict",
                        json={"points": [[-15.0, -20.0]] * 30_000})
        assert big.status_code == 413
        assert big.headers["content-type"] == "application/problem+json"
        # Unknown routes and methods stay problem documents through the real server too.
        assert http.get("/nothing-here").headers["content-type"] == "application/problem+json"
    finally:
        server.stop()


def test_killed_builds_leave_no_half_model_and_fail_after_restart(data_dir):
    fine = coarse_demo_document(edge_km=20.0)  # tens of thousands of nodes: seconds of work
    server = Server(data_dir)
    try:
        # 1. kill the worker process mid-build
        resp = server.http.post("/models", json=fine)
        assert resp.status_code == 202
        job1, model1 = resp.json()["id"], resp.json()["model_id"]
        _wait_mid_build(server, job1)
        os.kill(_worker_pid(data_dir, job1), signal.SIGKILL)
        failed = wait_for_job(server.get, f"/jobs/{job1}")
        assert failed["status"] == "failed"
        assert "worker process ended unexpectedly" in failed["error"]["reason"]
        assert server.get(f"/models/{model1}")["status"] == "failed"
        assert not (data_dir / "models" / model1).exists()

        # 2. kill the whole service mid-build (a crash of the machine, as far as it can tell)
        resp = server.http.post("/models", json=fine)
        job2, model2 = resp.json()["id"], resp.json()["model_id"]
        _wait_mid_build(server, job2)
    finally:
        server.kill()

    restarted = Server(data_dir)
    try:
        job = restarted.get(f"/jobs/{job2}")
        assert job["status"] == "failed"
        assert "interrupted" in job["error"]["reason"] and "submit it again" in job["error"]["reason"]
        models = {m["id"]: m for m in restarted.get("/models")["models"]}
        assert models[model1]["status"] == models[model2]["status"] == "failed"
        refused = restarted.http.post(f"/models/{model2}/predict", json={"points": [[0, 0]]})
        assert refused.status_code == 409
        # nothing but finished model directories may sit under models/: no temporary leftovers
        assert list((data_dir / "models").iterdir()) == []
        # and the restarted service builds again
        resp = restarted.http.post("/models", json=coarse_demo_document())
        done = wait_for_job(restarted.get, f"/jobs/{resp.json()['id']}")
        assert done["status"] == "done"
        assert (data_dir / "models" / resp.json()["model_id"] / "fields.nc").is_file()
    finally:
        restarted.stop()


def test_demo_service_prints_two_requests_that_work_as_printed(data_dir):
    """`make serve` runs `stressmap serve --demo`: the demo model is ready before the server
    listens, and the two printed example requests answer as printed (run here by the shell)."""
    import json
    import shutil

    if shutil.which("curl") is None:
        pytest.skip("curl is not installed")
    server = Server(data_dir, "--demo")
    try:
        while not any("press Ctrl-C" in line for line in server.seen):
            server.seen.append(server.lines.get(timeout=60))
        curls = [line.strip() for line in server.seen if line.strip().startswith("curl ")]
        commands = [c for c in curls if "/models/" in c]
        assert len(commands) == 2, server.seen
        # the fictional demo planet's two requests (its plates build in the background)
        network = [c for c in curls if "/networks/" in c]
        assert len(network) == 2, server.seen
        plates = json.loads(subprocess.run(["sh", "-c", network[0]], capture_output=True,
                                           text=True, timeout=60, check=True).stdout)
        assert len(plates["features"]) == 10 and "fictional" in plates["network_name"]
        outputs = [subprocess.run(["sh", "-c", c], capture_output=True, text=True, timeout=60,
                                  check=True).stdout for c in commands]
        model = json.loads(outputs[0])
        assert model["status"] == "ready" and "fictional" in model["name"]
        fc = json.loads(outputs[1])
        assert fc["type"] == "FeatureCollection" and fc["caution"] == CAUTION
        assert fc["model_id"] == model["id"] and len(fc["features"]) == 2
        assert all(f["properties"]["inside"] for f in fc["features"])
    finally:
        server.stop()
    again = Server(data_dir, "--demo")  # a restart reuses the stored demo model
    try:
        while not any("press Ctrl-C" in line for line in again.seen):
            again.seen.append(again.lines.get(timeout=60))
        assert any(model["id"] in line for line in again.seen if "ready" in line)
    finally:
        again.stop()
