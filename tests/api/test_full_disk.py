"""A full disk (ENOSPC) under the data directory: reads and deletions keep working, no job stays
"running" forever, and no orphan rows or directories are left once space is back.

The data directory is put on a small tmpfs (mounted by the test; CI runs as root) and filled with
a ballast file until the kernel answers ENOSPC. Source: SQLite documentation ("database or disk is
full", SQLITE_FULL; WAL readers need no writes); the rest is common practice of storage
degradation tests.
"""

from __future__ import annotations

import errno
import os
import subprocess
import time

import pytest
from service_support import coarse_demo_document, store_ready_model
from stressmap_api import create_app
from stressmap_api.store import ID_PATTERN, Store

API = "/api/v1"


@pytest.fixture
def small_disk(tmp_path):
    mount = tmp_path / "small"
    mount.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=6m", "tmpfs", str(mount)],
                          capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs here (needs root): {done.stderr.strip()}")
    try:
        yield mount
    finally:
        subprocess.run(["umount", "-l", str(mount)], check=False)


def _fill(path):
    """Write ballast until the file system is full; returns the ballast path."""
    ballast = path / "ballast"
    with open(ballast, "wb") as fh:
        try:
            while True:
                fh.write(b"\0" * 65536)
                fh.flush()
        except OSError as exc:
            assert exc.errno == errno.ENOSPC
    return ballast


def test_full_disk_keeps_reads_and_deletes_and_ends_jobs(small_disk, coarse_demo_model):
    data = small_disk / "data"
    ids = [store_ready_model(Store(data), coarse_demo_model) for _ in range(2)]
    app = create_app({"TESTING": True, "DATA_DIR": str(data), "JOB_EXECUTOR": "thread"})
    client = app.test_client()
    try:
        ballast = _fill(small_disk)
        r = client.get(f"{API}/models"); assert r.status_code == 200, r.get_json()
        assert client.get(f"{API}/models/{ids[0]}").status_code == 200
        pred = client.post(f"{API}/models/{ids[0]}/predict", json={"points": [[-15, -20]]})
        assert pred.status_code == 200
        resp = client.post(f"{API}/models", json=coarse_demo_document(250.0))
        assert resp.status_code in (202, 503), resp.get_data(as_text=True)
        if resp.status_code == 202:
            job_url = resp.headers["Location"].removeprefix(API)
            deadline = time.monotonic() + 60
            while (job := client.get(API + job_url).get_json())["status"] in ("queued",
                                                                               "running"):
                assert time.monotonic() < deadline, job
                time.sleep(0.1)
            assert job["status"] == "failed", job
        assert client.delete(f"{API}/models/{ids[1]}").status_code == 204
        assert client.get(f"{API}/models/{ids[1]}").status_code == 404
        os.unlink(ballast)
    finally:
        app.extensions["stressmap_jobs"].shutdown(wait=True)
    # with space back, a restart leaves only ready models, each with its directory
    store = Store(data)
    store.recover()
    rows = {m["id"]: m["status"] for m in store.list_models()}
    assert all(status in ("ready", "failed") for status in rows.values()), rows
    dirs = {p.name for p in store.models_dir.iterdir()}
    assert dirs == {i for i, s in rows.items() if s == "ready"}
    assert all(ID_PATTERN.match(d) for d in dirs)
    assert ids[0] in dirs and ids[1] not in rows
