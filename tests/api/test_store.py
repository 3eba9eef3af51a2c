"""The model/job index and the data directory (api/store.py).

The storage mechanics are checked with plain JSON rows; reading and writing real models is in
tests/test_api_models.py. SQLite WAL and atomic rename semantics are the library's (sqlite3,
os.replace); these tests check how the store uses them.
"""

from __future__ import annotations

import sqlite3

import pytest

from stressmap.errors import NotFoundError
from stressmap_api.store import ID_PATTERN, ModelNotReady, Store, check_id, new_id, owner_token


@pytest.fixture
def store(tmp_path):
    return Store(tmp_path / "data", cache_size=2)


def test_index_uses_wal_journal(store):
    con = sqlite3.connect(store.db_path)
    try:
        assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    finally:
        con.close()


@pytest.mark.parametrize("bad", ["", "../../etc/passwd", "0" * 31, "0" * 33, "A" * 32,
                                 "g" * 32, "00000000-0000-0000-0000-000000000000", "..", "/"])
def test_malformed_ids_are_rejected_before_any_lookup(store, bad):
    with pytest.raises(NotFoundError, match="32 lowercase hex digits"):
        store.meta(bad)
    with pytest.raises(NotFoundError):
        store.model_dir(bad)


def test_generated_ids_match_the_pattern_and_differ():
    ids = {new_id() for _ in range(100)}
    assert len(ids) == 100
    assert all(ID_PATTERN.match(i) for i in ids)
    assert check_id(next(iter(ids))) in ids


def test_model_lifecycle_queued_to_failed_through_its_job(store):
    job = store.add_job("build", owner_token())
    mid = store.add_model("plate A", job)
    assert store.meta(mid)["status"] == "queued"
    store.set_model_status(mid, "building")
    with pytest.raises(ModelNotReady, match="building"):
        store.load(mid)
    store.job_started(job, 1234)
    store.job_failed(job, "mesh too large")
    meta = store.meta(mid)
    assert meta["status"] == "failed"
    assert meta["error"] == "mesh too large"
    assert store.job(job)["error"] == {"reason": "mesh too large"}
    with pytest.raises(ModelNotReady, match="failed: mesh too large"):
        store.load(mid)


def test_ready_needs_the_directory_in_place(store):
    mid = store.add_model("plate B", None)
    from stressmap.errors import StorageError

    with pytest.raises(StorageError, match="missing"):
        store.mark_model_ready(mid, {"build_time": "2026-01-01T00:00:00Z"})
    store.model_dir(mid).mkdir()
    store.mark_model_ready(mid, {"build_time": "2026-01-01T00:00:00Z", "name": "plate B"})
    meta = store.meta(mid, with_summary=True)
    assert meta["status"] == "ready" and meta["build_time"] == "2026-01-01T00:00:00Z"
    assert meta["summary"]["name"] == "plate B"
    assert [m["id"] for m in store.list_models()] == [mid]


def test_delete_removes_row_and_directory(store):
    mid = store.add_model("plate C", None)
    store.model_dir(mid).mkdir()
    (store.model_dir(mid) / "summary.json").write_text("{}")
    store.mark_model_ready(mid, {})
    store.delete_model(mid)
    assert not store.model_dir(mid).exists()
    assert list(store.models_dir.iterdir()) == []
    with pytest.raises(NotFoundError):
        store.meta(mid)


def test_job_progress_is_clamped_and_done_is_final(store):
    job = store.add_job("build", owner_token())
    store.job_started(job, 1)
    store.job_progress(job, 1.7, "almost")
    assert store.job(job)["progress"] == 1.0
    store.job_done(job, {"model_id": "x"})
    store.job_failed(job, "too late")  # a finished job stays finished
    view = store.job(job)
    assert view["status"] == "done" and view["result"] == {"model_id": "x"} and "error" not in view


def test_recover_fails_jobs_of_a_dead_owner_and_removes_temporary_directories(store):
    dead_owner = f"{owner_token().rsplit(':', 2)[0]}:999999999:deadbeef"  # no such process id
    job = store.add_job("build", dead_owner)
    mid = store.add_model("plate D", job)
    store.job_started(job, 999999999)
    tmp = store.models_dir / f".{mid}.tmp-0123"
    tmp.mkdir()
    (tmp / "fields.nc").write_bytes(b"half")
    assert store.recover() == 1
    view = store.job(job)
    assert view["status"] == "failed"
    assert "interrupted" in view["error"]["reason"] and "was running" in view["error"]["reason"]
    assert store.meta(mid)["status"] == "failed"
    assert not tmp.exists()


def test_recover_leaves_jobs_of_a_live_runner_alone(store):
    from stressmap_api.store import register_owner

    owner = owner_token()
    register_owner(owner, True)
    try:
        job = store.add_job("build", owner)
        assert store.recover() == 0
        assert store.job(job)["status"] == "queued"
    finally:
        register_owner(owner, False)
    assert store.recover() == 1
