"""The background job runner (api/jobs.py): states, progress, failures, worker crashes.

The job functions here are small test helpers (module level, so a spawned worker process can
import them); the real model build is exercised in tests/test_api_models.py and test_server.py.
"""

from __future__ import annotations

import os
import signal
import time

import pytest

from stressmap.errors import InputError, problem
from stressmap_api.jobs import JobQueueFull, JobRunner
from stressmap_api.store import Store


def _add(a, b, *, progress):
    progress(0.5, "adding")
    return {"sum": a + b}


def _reject(*, progress):
    raise InputError("bad document", [problem("must be positive", field="sheet.thickness_km")])


def _explode(*, progress):
    raise RuntimeError("numerical trouble")


def _wait_for_file(path, *, progress):
    progress(0.1, "waiting")
    deadline = time.monotonic() + 30
    while not os.path.exists(path) and time.monotonic() < deadline:
        time.sleep(0.02)
    return {"waited": True}


def _sleep_forever(*, progress):
    progress(0.2, "sleeping")
    time.sleep(60)


def wait(store, job_id, states=("done", "failed"), timeout=60.0):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        view = store.job(job_id)
        if view["status"] in states:
            return view
        time.sleep(0.02)
    raise AssertionError(f"job {job_id} still {store.job(job_id)['status']}")


@pytest.fixture
def store(tmp_path):
    return Store(tmp_path / "data")


@pytest.fixture
def threads(store):
    runner = JobRunner(store, workers=2, executor="thread")
    yield runner
    runner.shutdown(wait=True)


def test_done_job_reports_result_and_full_progress(store, threads):
    job = threads.submit("sum", _add, 2, b=3)
    view = wait(store, job)
    assert view["status"] == "done"
    assert view["result"] == {"sum": 5}
    assert view["progress"] == 1.0
    assert view["kind"] == "sum" and view["started"] and view["finished"]


def test_input_error_fails_the_job_with_each_problem(store, threads):
    view = wait(store, threads.submit("build", _reject))
    assert view["status"] == "failed"
    assert view["error"]["reason"] == "bad document"
    assert view["error"]["errors"] == [{"message": "must be positive", "field": "sheet.thickness_km"}]


def test_unexpected_error_fails_the_job_with_its_type(store, threads):
    view = wait(store, threads.submit("build", _explode))
    assert view["status"] == "failed"
    assert view["error"]["reason"] == "RuntimeError: numerical trouble"


def test_running_state_and_progress_are_visible(store, threads, tmp_path):
    flag = tmp_path / "go"
    job = threads.submit("wait", _wait_for_file, str(flag))
    view = wait(store, job, states=("running",))
    deadline = time.monotonic() + 10
    while store.job(job)["message"] != "waiting" and time.monotonic() < deadline:
        time.sleep(0.02)
    assert store.job(job)["progress"] == pytest.approx(0.1)
    flag.write_text("go")
    assert wait(store, job)["status"] == "done"


def test_queue_is_bounded(store, tmp_path):
    runner = JobRunner(store, workers=1, executor="thread", max_queued=2)
    flag = tmp_path / "go"
    try:
        runner.submit("wait", _wait_for_file, str(flag))
        runner.submit("wait", _wait_for_file, str(flag))
        with pytest.raises(JobQueueFull):
            runner.submit("wait", _wait_for_file, str(flag))
    finally:
        flag.write_text("go")
        runner.shutdown(wait=True)


def test_unpicklable_function_is_refused_for_process_workers(store):
    runner = JobRunner(store, workers=1, executor="process")
    try:
        with pytest.raises(TypeError, match="picklable"):
            runner.submit("x", lambda progress: 1)
    finally:
        runner.shutdown()


def test_killed_worker_process_fails_its_job_and_the_pool_recovers(store):
    runner = JobRunner(store, workers=1, executor="process")
    try:
        job = runner.submit("sleep", _sleep_forever)
        view = wait(store, job, states=("running",))
        pid = store._execute("SELECT worker_pid FROM jobs WHERE id=?", (job,))[0][0]
        assert pid != os.getpid()
        os.kill(pid, signal.SIGKILL)
        view = wait(store, job)
        assert view["status"] == "failed"
        assert "worker process ended unexpectedly" in view["error"]["reason"]
        again = runner.submit("sum", _add, 1, b=1)  # a fresh pool takes the next job
        assert wait(store, again)["result"] == {"sum": 2}
    finally:
        runner.shutdown()


def test_shutdown_fails_unfinished_jobs(store):
    runner = JobRunner(store, workers=1, executor="process")
    job = runner.submit("sleep", _sleep_forever)
    wait(store, job, states=("running",))
    runner.shutdown()
    view = store.job(job)
    assert view["status"] == "failed"
    assert "submit it again" in view["error"]["reason"]
