"""Heavy work off the server's interpreter (app/web/workers.py): admission, progress,
stop, partial results, a client that goes away, and the jobs API."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from concurrent.futures import ProcessPoolExecutor

import httpx2 as httpx
import pytest

from ringwise.web import workers
from ringwise.web.errors import ApiError
from ringwise.web.paths import SAMPLES_DIR
from ringwise.web.samples import sample_texts
from ringwise.web.server import create_app
from tests.web.conftest import serving

TEXTS = sample_texts()["clapp-clock-1M"]


def counting(steps: int, pause: float, progress=None) -> dict:
    """A stand-in for a long core function: reports progress, stops when told,
    and answers with how far it got (as a stopped spread does)."""
    done = 0
    for i in range(steps):
        time.sleep(pause)
        done = i + 1
        if progress is not None and progress(done / steps) is False:
            break
    return {"done": done, "of": steps}


def _until(predicate, timeout: float = 20.0) -> None:
    deadline = time.monotonic() + timeout
    while not predicate():
        assert time.monotonic() < deadline, "timed out"
        time.sleep(0.02)


def test_admission_refuses_past_the_limit_at_once_with_retry_after():
    work = workers.Work()
    try:
        limit = workers.LIMITS["reconcile"]
        held = [work.submit("reconcile", counting, 500, 0.01, keep=True) for _ in range(limit)]
        t0 = time.perf_counter()
        with pytest.raises(ApiError) as refused:
            work.submit("reconcile", counting, 1, 0.0)
        assert time.perf_counter() - t0 < 0.1  # refused, never queued (not a timing test: no wait)
        assert refused.value.status == 429
        assert int(refused.value.headers["Retry-After"]) == workers.RETRY_AFTER_S
        assert refused.value.problems[0]["type"] == "busy"
        # another kind has its own queue
        other = work.submit("synthesize", counting, 1, 0.0, keep=True)
        _until(other.finished.is_set)
        for job in held:
            work.stop(job)
        _until(lambda: all(j.finished.is_set() for j in held))
        # the slots are free again
        again = work.submit("reconcile", counting, 1, 0.0, keep=True)
        _until(again.finished.is_set)
        assert work.get(again.id).state == "done"
    finally:
        work.shutdown()


def test_a_stopped_job_keeps_what_it_computed():
    work = workers.Work()
    try:
        job = work.submit("spread", counting, 1000, 0.005, keep=True)
        _until(lambda: work.refresh(job).progress > 0.05)
        assert work.get(job.id).state == "running"
        work.stop(job)
        _until(job.finished.is_set)
        out = work.get(job.id).out()
        assert out["state"] == "cancelled"
        assert 0 < out["result"]["done"] < 1000
        assert out["progress"] == pytest.approx(out["result"]["done"] / 1000)
    finally:
        work.shutdown()


def test_kept_jobs_are_bounded_and_forgotten():
    work = workers.Work()
    try:
        ids = []
        for _ in range(workers.MAX_KEPT + 5):
            job = work.submit("sweep", counting, 1, 0.0, keep=True)
            _until(job.finished.is_set)
            ids.append(job.id)
        assert len(work.jobs()) <= workers.MAX_KEPT
        with pytest.raises(ApiError):
            work.get(ids[0])
        last = work.get(ids[-1])
        last.ended = time.monotonic() - workers.KEEP_SECONDS - 1
        with pytest.raises(ApiError) as gone:
            work.get(last.id)
        assert gone.value.status == 404
    finally:
        work.shutdown()


def test_the_process_pool_runs_the_core_in_other_processes():
    work = workers.Work()
    work.start("process")
    try:
        job = work.submit("sweep", os.getpid, with_progress=False, keep=True)
        assert job.finished.wait(60)
        assert work.get(job.id).state == "done"
        assert job.result != os.getpid()
    finally:
        work.shutdown()


def _spread_job(client, samples: int) -> dict:
    body = {"fields": TEXTS, "samples": str(samples), "seed": "3"}
    r = client.post("/api/sheet/spread/jobs", json=body)
    assert r.status_code == 202, r.text
    return r.json()


def test_spread_job_shows_progress_and_stops_with_the_samples_done(client):
    job = _spread_job(client, 40_000)
    assert job["kind"] == "spread" and job["state"] in ("queued", "running")
    seen = []
    _until(
        lambda: (
            seen.append(client.get(f"/api/jobs/{job['id']}").json()["progress"]) or seen[-1] > 0.1
        ),
        60,
    )
    stopped = client.delete(f"/api/jobs/{job['id']}").json()
    assert stopped["state"] == "cancelled"
    sp = stopped["result"]["result"]["spread"]
    assert sp["stopped"] is True and sp["requested"] == 40_000
    assert 0 < sp["samples"] < 40_000 and sp["samples"] % 2000 == 0  # whole chunks
    shown = stopped["result"]["shown"]
    assert shown["spread.stopped"]["hidden"] is False
    assert f"Stopped at {sp['samples']} of 40000 samples" in shown["spread.stopped"]["text"]
    # the yield shown is a fraction of the samples done
    assert 0.0 <= sp["yield_start"] <= 1.0
    assert client.get(f"/api/jobs/{job['id']}").json()["state"] == "cancelled"


def test_jobs_of_the_other_panels_end_with_their_answer(client):
    body = {"fields": TEXTS, "f_measured": "990k"}
    r = client.post("/api/sheet/reconcile/jobs", json=body)
    assert r.status_code == 202
    job_id = r.json()["id"]
    _until(
        lambda: client.get(f"/api/jobs/{job_id}").json()["state"] not in ("queued", "running"), 60
    )
    done = client.get(f"/api/jobs/{job_id}").json()
    assert done["state"] == "done" and done["progress"] == 1.0
    assert done["result"]["shown"]["stopped"]["hidden"] is True
    # a bad request is refused before it becomes a job
    bad = client.post("/api/sheet/reconcile/jobs", json={"fields": {"Lx": "1"}})
    assert bad.status_code == 422
    # and a job whose input the core refuses ends failed, naming the field
    r = client.post("/api/sheet/spread/jobs", json={"fields": TEXTS, "samples": "0"})
    job_id = r.json()["id"]
    _until(lambda: client.get(f"/api/jobs/{job_id}").json()["state"] == "failed", 60)
    error = client.get(f"/api/jobs/{job_id}").json()["error"]
    assert error["status"] == 422 and error["problems"][0]["field"] == "samples"


@pytest.mark.parametrize("job_id", ["nope", "x" * 65])
def test_unknown_job_is_404_or_422(client, job_id):
    for method in ("get", "delete"):
        r = getattr(client, method)(f"/api/jobs/{job_id}")
        assert r.status_code == (422 if len(job_id) > 64 else 404)


def test_a_client_that_goes_away_stops_its_work():
    design = json.loads((SAMPLES_DIR / "clapp-clock-1M.json").read_text(encoding="utf-8"))
    # 100 000 samples: some 15 s of work on this machine
    body = {"design": design, "samples": 100_000, "seed": 1}
    app = create_app()
    with serving(app) as url:
        work = app.state.work
        with httpx.Client(base_url=url, timeout=1.0) as c, pytest.raises(httpx.TimeoutException):
            c.post("/api/spread", json=body)
        assert work._outstanding["spread"] == 1  # still at it when the client left
        # stopped at its next chunk, long before its 100 000 samples are done
        _until(lambda: work._outstanding["spread"] == 0, 8)


# ---- the workers' priority, memory and life ------------------------------------------


def _scheduling() -> tuple[int, int]:
    """The calling process's scheduling policy and niceness (in a worker)."""
    return os.sched_getscheduler(0), os.getpriority(os.PRIO_PROCESS, 0)


@pytest.mark.skipif(not hasattr(os, "SCHED_IDLE"), reason="Linux's idle scheduling class")
def test_heavy_workers_run_in_the_idle_scheduling_class():
    work = workers.Work()
    work.start("process")
    try:
        job = work.submit("sweep", _scheduling, with_progress=False, keep=True)
        assert job.finished.wait(60)
        policy, _ = work.get(job.id).result
        assert policy == os.SCHED_IDLE
    finally:
        work.shutdown()


def test_background_lowers_the_priority_of_every_thread_of_its_process():
    import multiprocessing

    ctx = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(1, mp_context=ctx) as pool:
        kind = pool.submit(workers.background).result(timeout=60)
        policy, nice = pool.submit(_scheduling).result(timeout=60)
    if kind == "idle":
        assert policy == os.SCHED_IDLE
    else:  # where the idle class is refused: the lowest niceness instead
        assert kind == "nice" and nice == workers.WORKER_NICE


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    return True


def _allocate(megabytes: int) -> int:
    """Hold ``megabytes`` of memory for a moment; the worker's process id."""
    block = bytearray(megabytes * 2**20)
    block[:: 2**12] = b"x" * len(block[:: 2**12])  # touched, so resident
    return os.getpid()


def test_a_heavy_worker_that_grew_ends_after_its_work_and_its_memory_goes_back():
    """A worker whose memory grew past workers.RENEW_BYTES is gone once its job has
    ended, and the next job runs in a fresh one; one that did a small job stays."""
    work = workers.Work()
    work.start("process")
    try:
        small = work.submit("spread", _allocate, 1, with_progress=False, keep=True)
        assert small.finished.wait(60)
        kept = work.get(small.id).result
        big_mb = 3 * workers.RENEW_BYTES // 2**20
        big = work.submit("spread", _allocate, big_mb, with_progress=False, keep=True)
        assert big.finished.wait(60)
        pid = work.get(big.id).result
        assert pid != os.getpid()
        _until(lambda: not _alive(pid), 30)
        if kept != pid:  # the small job's worker was not the one that grew
            _until(lambda: not _alive(kept), 30)  # its pool was let go with it
        after = work.submit("spread", _allocate, 1, with_progress=False, keep=True)
        assert after.finished.wait(60)
        fresh = work.get(after.id).result
        assert fresh not in (pid, kept, os.getpid())
        again = work.submit("spread", _allocate, 1, with_progress=False, keep=True)
        assert again.finished.wait(60)
        assert _alive(fresh)  # a small job does not end its worker
    finally:
        work.shutdown()


def _sleeper(seconds: float) -> None:
    time.sleep(seconds)


def _watched(server: int) -> None:
    workers.watch(server)
    time.sleep(120)


def test_a_worker_ends_when_its_server_is_gone():
    """A worker whose server was killed (not let go) ends by itself instead of
    waiting for work forever, also while the dead server is not yet collected by
    its parent (which may wait for the pipes the worker holds)."""
    import multiprocessing

    ctx = multiprocessing.get_context("spawn")
    server = ctx.Process(target=_sleeper, args=(120,))
    server.start()
    worker = ctx.Process(target=_watched, args=(server.pid,))
    worker.start()
    try:
        time.sleep(3 * workers.WATCH_S)
        assert worker.is_alive()  # its server is still there
        os.kill(server.pid, signal.SIGKILL)  # not collected: a zombie until joined
        worker.join(30)  # a hang detector, not a timing bound
        assert worker.exitcode == 0
    finally:
        for p in (server, worker):
            if p.is_alive():
                p.kill()
            p.join()


def test_a_process_that_ended_is_gone_before_it_is_collected():
    child = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(120)"])
    try:
        assert not workers.gone(child.pid)
        child.kill()
        _until(lambda: workers.gone(child.pid), 30)  # a zombie: still there to a signal
    finally:
        child.kill()
        child.wait()
    assert workers.gone(child.pid)
