"""Faults: the real server killed with SIGKILL during a build and during a model write, storage
that cannot be written (data directory not a directory, full disk).

Specification (issue 8): after a crash and restart the SQLite index passes
``PRAGMA integrity_check`` (SQLite documentation: it returns the single row "ok" when no problem
is found), every model stored before still loads and predicts identically, the interrupted job is
reported failed (never "running"), and no half-written model is visible; storage that cannot be
written gives a clear failure, not a corrupt store.

How the kills are timed: the server runs with a ``sitecustomize`` module on PYTHONPATH (Python
docs, "site" module: imported automatically at start-up) that makes the build worker stop at a
chosen point and touch a marker file: half-way through the build, or inside the atomic model
write after every file is in the temporary directory but before the rename. The test waits for
the marker, then SIGKILLs the server process (the workers die with it: PR_SET_PDEATHSIG).
The tests run as root, where file permissions do not stop writes, so "cannot write" is made
real by replacing a directory with a plain file (ENOTDIR from the kernel) or, for a full disk,
by a netCDF writer that fails with ENOSPC part-way through.
"""

from __future__ import annotations

import errno
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
from service_support import coarse_demo_document, wait_for_job, store_ready_model

httpx = pytest.importorskip("httpx")

pytestmark = pytest.mark.server

STRESSMAP = Path(sys.executable).with_name("stressmap")
POINTS = {"points": [[-15.0, -20.0], [-5.0, -12.0], [-25.0, -25.0], [-10.0, -30.0]]}

SITECUSTOMIZE = '''
import os, time
_stage = os.environ.get("STRESSMAP_TEST_PAUSE")
_marker = os.environ.get("STRESSMAP_TEST_MARKER")
if _stage and _marker:
    def _pause():
        open(_marker, "w").write(str(os.getpid()))
        time.sleep(120)

    if _stage == "build":
        import stressmap.model as _model
        _orig_build = _model.build_model

        def build_model(document, progress=None):
            def hooked(fraction, message=""):
                if progress is not None:
                    progress(fraction, message)
                if fraction >= 0.3:
                    _pause()
            return _orig_build(document, progress=hooked)

        _model.build_model = build_model
    elif _stage == "write":
        import stressmap.io.modeldir as _modeldir

        def fsync_dir(path, _calls=[]):
            _calls.append(path)
            _pause()  # every file is in the temporary directory; the rename has not happened

        _modeldir.fsync_dir = fsync_dir
'''


class Server:
    """``stressmap serve --port 0`` in its own process group, optionally with a pause hook."""

    def __init__(self, data_dir: Path, hook_dir: Path | None = None, pause: str | None = None,
                 marker: Path | None = None):
        env = dict(os.environ, STRESSMAP_DATA_DIR=str(data_dir), STRESSMAP_JOB_WORKERS="1",
                   STRESSMAP_JOB_EXECUTOR="process")
        env.pop("STRESSMAP_API_TOKEN", None)
        if pause:
            env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(hook_dir),
                                                              env.get("PYTHONPATH")]))
            env.update(STRESSMAP_TEST_PAUSE=pause, STRESSMAP_TEST_MARKER=str(marker))
        self.proc = subprocess.Popen([str(STRESSMAP), "serve", "--port", "0"],
                                     stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                                     env=env, start_new_session=True)
        self.output: list[str] = []
        lines: queue.Queue = queue.Queue()
        self._pump = threading.Thread(target=self._read, args=(lines,), daemon=True)
        self._pump.start()
        deadline = time.monotonic() + 60
        base = None
        while base is None:
            try:
                line = lines.get(timeout=max(deadline - time.monotonic(), 0.01))
            except queue.Empty:
                self.kill()
                raise AssertionError("server did not start:\n" + "".join(self.output)) from None
            if m := re.search(r"listening on (http://127\.0\.0\.1:\d+)", line):
                base = m.group(1)
        self.http = httpx.Client(base_url=base + "/api/v1", timeout=30.0)

    def _read(self, lines):
        for line in self.proc.stdout:
            self.output.append(line)
            lines.put(line)

    def get(self, url):
        return self.http.get(url.removeprefix("/api/v1")).json()

    def kill(self, whole_group: bool = True):
        """SIGKILL the server process (a crash); then make sure nothing of it is left."""
        if self.proc.poll() is None:
            os.kill(self.proc.pid, signal.SIGKILL)
        self.proc.wait(timeout=30)
        if whole_group:
            try:
                os.killpg(self.proc.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
        self._pump.join(timeout=10)
        self.proc.stdout.close()
        self.http.close()

    def stop(self):
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGINT)
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                pass
        self.kill()


def integrity(data_dir: Path) -> list[str]:
    con = sqlite3.connect(data_dir / "index.sqlite3")
    try:
        return [r[0] for r in con.execute("PRAGMA integrity_check").fetchall()]
    finally:
        con.close()


@pytest.fixture
def stored(tmp_path, coarse_demo_model):
    """A data directory holding two ready models (the coarse fictional demo, stored twice)."""
    from stressmap_api.store import Store

    data_dir = tmp_path / "data"
    store = Store(data_dir, cache_size=0)
    ids = []
    for _ in range(2):
        model_id = store_ready_model(store, coarse_demo_model)
        ids.append(model_id)
    return data_dir, ids


def _answers(server: Server, ids: list[str]) -> dict:
    """What clients see of the stored models: descriptions and point predictions."""
    out = {}
    for model_id in ids:
        meta = server.http.get(f"/models/{model_id}")
        pred = server.http.post(f"/models/{model_id}/predict", json=POINTS)
        assert meta.status_code == 200 and pred.status_code == 200, pred.text
        desc = meta.json()
        out[model_id] = (desc["status"], desc["summary"], pred.json()["features"])
    return out


def _wait_for(path: Path, server: Server, timeout: float = 90.0) -> None:
    deadline = time.monotonic() + timeout
    while not path.exists():
        if time.monotonic() > deadline or server.proc.poll() is not None:
            raise AssertionError("the worker never reached the pause:\n" + "".join(server.output))
        time.sleep(0.02)


@pytest.mark.parametrize("stage", ["build", "write"])
def test_sigkill_during_build_or_write_then_restart(stored, tmp_path, stage):
    data_dir, ids = stored
    hook = tmp_path / "hook"
    hook.mkdir()
    (hook / "sitecustomize.py").write_text(SITECUSTOMIZE, encoding="utf-8")
    marker = tmp_path / "paused"

    server = Server(data_dir, hook, pause=stage, marker=marker)
    try:
        before = _answers(server, ids)
        resp = server.http.post("/models", json=coarse_demo_document(100.0))
        assert resp.status_code == 202, resp.text
        job_id, new_id = resp.json()["id"], resp.json()["model_id"]
        _wait_for(marker, server)
        running = server.get(f"/jobs/{job_id}")
        assert running["status"] == "running"
        if stage == "write":  # mid-write: the files exist only in a temporary directory
            temps = [p.name for p in (data_dir / "models").iterdir() if ".tmp-" in p.name]
            assert temps and all(new_id in t for t in temps)
            assert not (data_dir / "models" / new_id).exists()
    finally:
        server.kill()

    assert integrity(data_dir) == ["ok"]  # before any recovery touches it
    server = Server(data_dir)
    try:
        job = server.get(f"/jobs/{job_id}")
        assert job["status"] == "failed", job
        assert "interrupted" in job["error"]["reason"]
        meta = server.get(f"/models/{new_id}")
        assert meta["status"] == "failed" and "interrupted" in meta["error"]
        assert server.http.post(f"/models/{new_id}/predict", json=POINTS).status_code == 409
        listing = {m["id"]: m["status"] for m in server.get("/models")["models"]}
        assert listing == {ids[0]: "ready", ids[1]: "ready", new_id: "failed"}
        assert _answers(server, ids) == before  # loads and predicts identically
        entries = sorted(p.name for p in (data_dir / "models").iterdir())
        assert entries == sorted(ids), "a half-written model or temporary directory is left"
        assert integrity(data_dir) == ["ok"]
    finally:
        server.stop()


# -- storage that cannot be written (in-process app; builds on a thread) ----------------------
@pytest.fixture
def app_with_models(stored):
    from stressmap_api import create_app

    data_dir, ids = stored
    app = create_app({"TESTING": True, "DATA_DIR": str(data_dir), "JOB_EXECUTOR": "thread",
                      "JOB_WORKERS": 1, "LOAD_DEMO": False, "API_TOKEN": ""})
    yield app, data_dir, ids
    app.extensions["stressmap_jobs"].shutdown()


def _predictions(app, ids: list[str]) -> dict:
    client = app.test_client()
    out = {}
    for i in ids:
        resp = client.post(f"/api/v1/models/{i}/predict", json=POINTS)
        assert resp.status_code == 200, resp.get_data(as_text=True)
        out[i] = resp.get_json()["features"]
    return out


def _build_fails_cleanly(app, reason: str) -> str:
    """Submit a build, expect it to fail with ``reason`` and its model to say failed."""
    client = app.test_client()
    resp = client.post("/api/v1/models", json=coarse_demo_document(250.0))
    assert resp.status_code == 202
    new_id = resp.get_json()["model_id"]
    job = wait_for_job(lambda u: client.get(u).get_json(), resp.headers["Location"], timeout=60)
    assert job["status"] == "failed"
    assert re.search(reason, job["error"]["reason"]), job["error"]
    reason_text = job["error"]["reason"]  # clear, and without the server's paths
    assert str(Path(app.config["DATA_DIR"]).resolve()) not in reason_text
    assert not re.search(r"(?<![\w>])/(tmp|work|root|home|usr|var|srv)\b", reason_text)
    meta = client.get(f"/api/v1/models/{new_id}").get_json()
    assert meta["status"] == "failed"
    return new_id


def test_models_directory_unwritable(app_with_models):
    """The models directory replaced by a plain file: writes fail with ENOTDIR, even as root."""
    app, data_dir, ids = app_with_models
    before = _predictions(app, ids)
    models = data_dir / "models"
    aside = data_dir / "models-aside"
    models.rename(aside)
    models.write_text("not a directory", encoding="utf-8")
    try:
        _build_fails_cleanly(app, r"(Not a directory|NotADirectory|cannot create)")
    finally:
        models.unlink()
        aside.rename(models)
    app.extensions["stressmap_store"]._cache.clear()  # read the files again, not the cache
    assert _predictions(app, ids) == before
    assert sorted(p.name for p in models.iterdir()) == sorted(ids)
    assert integrity(data_dir) == ["ok"]


def test_full_disk_during_model_write(app_with_models, monkeypatch):
    """The netCDF writer fails with ENOSPC after writing part of the file: the temporary
    directory is removed, the job says the disk is full, stored models are untouched."""
    import xarray as xr

    app, data_dir, ids = app_with_models
    before = _predictions(app, ids)

    def full_disk(self, path=None, *args, **kwargs):
        Path(path).write_bytes(b"\x89HDF\r\n\x1a\n" + b"\0" * 4096)  # a partial file first
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))

    monkeypatch.setattr(xr.Dataset, "to_netcdf", full_disk)
    _build_fails_cleanly(app, r"No space left on device")
    monkeypatch.undo()
    app.extensions["stressmap_store"]._cache.clear()
    assert _predictions(app, ids) == before
    assert sorted(p.name for p in (data_dir / "models").iterdir()) == sorted(ids)
    assert integrity(data_dir) == ["ok"]


def test_data_directory_that_is_a_file_stops_the_server_with_a_clear_message(tmp_path):
    target = tmp_path / "data"
    target.write_text("a file where the data directory should be", encoding="utf-8")
    env = dict(os.environ, STRESSMAP_DATA_DIR=str(target))
    out = subprocess.run([str(STRESSMAP), "serve", "--port", "0"], capture_output=True,
                         text=True, env=env, timeout=60)
    assert out.returncode != 0
    assert "cannot create the data directory" in out.stderr
    assert "Traceback" not in out.stderr + out.stdout
    assert target.read_text(encoding="utf-8").startswith("a file")  # untouched


def test_index_database_unreadable_gives_a_problem(app_with_models):
    """The index file replaced by garbage while the service runs: 503 problem, no trace."""
    app, data_dir, ids = app_with_models
    db = data_dir / "index.sqlite3"
    saved = db.read_bytes()
    for extra in ("-wal", "-shm"):
        Path(str(db) + extra).unlink(missing_ok=True)
    db.write_bytes(b"this is not a database" * 100)
    try:
        resp = app.test_client().get("/api/v1/models")
        assert resp.status_code == 503
        assert resp.content_type == "application/problem+json"
        body = resp.get_data(as_text=True)
        assert "index database" in body and "Traceback" not in body
        assert str(data_dir) not in body
    finally:
        db.write_bytes(saved)


def test_index_that_cannot_be_opened_for_writing_gives_a_problem(app_with_models):
    """The index's WAL and shared-memory files blocked by directories of the same name (SQLite
    cannot open its journal, even as root): every request answers 503 problem+json naming the
    index, creating a model changes nothing, and the store works again once they are gone."""
    app, data_dir, ids = app_with_models
    before = _predictions(app, ids)
    blockers = [Path(str(data_dir / "index.sqlite3") + x) for x in ("-wal", "-shm")]
    for path in blockers:
        path.unlink(missing_ok=True)
        path.mkdir()
    client = app.test_client()
    try:
        for resp in (client.get("/api/v1/models"),
                     client.post("/api/v1/models", json=coarse_demo_document(250.0))):
            assert resp.status_code == 503
            assert resp.content_type == "application/problem+json"
            body = resp.get_json()
            assert body["detail"] == ("cannot open the index database <data directory>/"
                                      "index.sqlite3: unable to open database file")
            assert str(data_dir) not in resp.get_data(as_text=True)
    finally:
        for path in blockers:
            path.rmdir()
    app.extensions["stressmap_store"]._cache.clear()
    assert _predictions(app, ids) == before
    assert [m["id"] for m in client.get("/api/v1/models").get_json()["models"]] == ids[::-1]
    assert sorted(p.name for p in (data_dir / "models").iterdir()) == sorted(ids)
    assert integrity(data_dir) == ["ok"]


def test_read_only_data_directory(app_with_models, monkeypatch):
    """A read-only data directory, simulated where root would still write: the index opened
    read-only (SQLite URI ``mode=ro``, SQLite docs "URI filenames") and file renames failing with
    EROFS. Reads and predictions go on; creating and deleting answer 503 problems that say the
    store is read-only; nothing changes on disk."""
    import sqlite3 as sqlite3_module

    from stressmap_api import store as store_module

    app, data_dir, ids = app_with_models
    client = app.test_client()
    before = _predictions(app, ids)
    real_connect = sqlite3_module.connect

    def read_only(path, *args, **kwargs):
        return real_connect(f"file:{path}?mode=ro", *args, uri=True, **kwargs)

    def no_rename(*args, **kwargs):
        raise OSError(errno.EROFS, os.strerror(errno.EROFS))

    monkeypatch.setattr(store_module.sqlite3, "connect", read_only)
    monkeypatch.setattr(store_module.os, "replace", no_rename)
    listing = client.get("/api/v1/models").get_json()
    for resp in (client.post("/api/v1/models", json=coarse_demo_document(250.0)),
                 client.delete(f"/api/v1/models/{ids[0]}")):
        assert resp.status_code == 503, resp.get_data(as_text=True)
        assert resp.content_type == "application/problem+json"
        assert "readonly database" in resp.get_json()["detail"]
        assert str(data_dir) not in resp.get_data(as_text=True)
    assert client.get("/api/v1/models").get_json() == listing
    app.extensions["stressmap_store"]._cache.clear()
    assert _predictions(app, ids) == before  # reads work on a read-only store
    monkeypatch.undo()
    assert client.get("/api/v1/models").get_json() == listing
    assert sorted(p.name for p in (data_dir / "models").iterdir()) == sorted(ids)
    assert integrity(data_dir) == ["ok"]
