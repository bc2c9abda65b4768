"""The light computations (app/web/light.py): admission, and their worker processes."""

from __future__ import annotations

import asyncio
import json
import os
import threading
import time
from concurrent.futures import ThreadPoolExecutor

import httpx2 as httpx
import pytest
from starlette.responses import PlainTextResponse
from starlette.testclient import TestClient

from ringwise.web import light, load, workers
from ringwise.web.errors import ApiError
from ringwise.web.samples import sample_texts


async def _plain(scope, receive, send) -> None:
    await PlainTextResponse("computed")(scope, receive, send)


def test_light_requests_past_the_limit_are_refused_at_once_with_retry_after():
    full = TestClient(light.LightLimit(_plain, limit=0))
    r = full.post("/api/analyze", json={})
    assert r.status_code == 503
    assert r.headers["retry-after"] == str(light.RETRY_AFTER_S)
    message = light.BUSY.format(limit=0)
    assert r.json()["problems"] == [{"field": "request", "message": message, "type": "busy"}]
    # what does not compute in the server's process is not counted
    for path in ("/static/sheet.js", "/api/jobs/x", "/api/spread"):
        assert full.get(path).text == "computed"


def test_under_the_limit_every_light_request_goes_through():
    guard = light.LightLimit(_plain, limit=1, local_limit=1)
    client = TestClient(guard)
    for path in ("/", "/api/sheet", "/api/csv/sheet/loop", "/sheet.json", "/api/analyze"):
        assert client.get(path).text == "computed"
    assert guard.running == {"pooled": 0, "local": 0}  # every one counted out again


def test_light_work_in_the_server_s_own_threads_has_a_limit_of_its_own():
    """The light workers' requests and those computed in the server's threads are
    counted apart: a full server-side limit does not refuse an analysis."""
    guard = light.LightLimit(_plain, limit=1, local_limit=0)
    client = TestClient(guard)
    refused = client.post("/api/sheet", json={})
    assert refused.status_code == 503 and refused.headers["retry-after"]
    assert light.BUSY.format(limit=0) == refused.json()["message"]
    assert client.post("/api/analyze", json={}).text == "computed"


# ---- the light worker processes ------------------------------------------------------


def _fails() -> None:
    raise ValueError("the DC solve does not converge")


def _run(coroutine):
    """``coroutine`` run to its end on an event loop of its own, in a thread of its own:
    the browser tests' sync Playwright keeps a loop running in the main thread."""
    with ThreadPoolExecutor(1) as thread:
        return thread.submit(asyncio.run, coroutine).result()


def test_light_work_runs_in_worker_processes_and_answers_json():
    pool = light.Light()
    pool.start("process")
    try:
        answer = _run(pool.json(os.getpid))
        assert answer.media_type == "application/json"
        pid = json.loads(answer.body)
        assert pid != os.getpid()
        # a domain error of the core comes back as the API's 422, naming the design
        with pytest.raises(ApiError) as refused:
            _run(pool.json(_fails))
        assert refused.value.status == 422
        assert refused.value.problems[0]["field"] == "design"
    finally:
        pool.shutdown()


def _niceness() -> int:
    return os.getpriority(os.PRIO_PROCESS, 0)


def test_light_workers_yield_to_the_server_s_event_loop():
    """The light workers run LIGHT_NICE below the server, so the event loop that admits
    and refuses wakes first when the cores are full."""
    pool = light.Light()
    pool.start("process")
    try:
        nice = json.loads(_run(pool.json(_niceness)).body)
        assert nice == min(19, _niceness() + light.LIGHT_NICE)
    finally:
        pool.shutdown()


def test_twenty_people_editing_at_once_are_not_refused(live_server, sample):
    """The goal scenario of ``make load`` (20 people editing) is normal use: 20
    analyses of designs not seen before sent at the same moment are all
    answered, none refused (the limit is sized above it)."""
    count = load.GOAL_LIGHT
    start = threading.Barrier(count)
    statuses: list[int] = []

    def edit(i: int) -> None:
        edited = json.loads(json.dumps(sample))
        edited["name"] = f"edit {i}"
        edited["bias"]["RC"] = 1000 + i
        with httpx.Client(base_url=live_server, timeout=120) as c:
            start.wait()
            statuses.append(c.post("/api/analyze", json=edited).status_code)

    threads = [threading.Thread(target=edit, args=(i,)) for i in range(count)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(180)
    assert statuses == [200] * count


def test_an_analysis_is_answered_while_heavy_work_fills_every_worker(live_server, sample):
    texts = {"fields": sample_texts()["clapp-clock-1M"], "samples": "100000", "seed": "1"}
    with httpx.Client(base_url=live_server, timeout=120) as c:
        # large Monte Carlo runs (several seconds each), one per heavy worker
        jobs = [c.post("/api/sheet/spread/jobs", json=texts).json() for _ in range(workers.WORKERS)]
        try:
            deadline = time.monotonic() + 60
            while any(c.get(f"/api/jobs/{j['id']}").json()["progress"] == 0.0 for j in jobs):
                assert time.monotonic() < deadline
                time.sleep(0.05)
            sample["bias"]["RC"] = 1234.5  # a design not analysed before
            assert c.post("/api/analyze", json=sample).status_code == 200
            states = [c.get(f"/api/jobs/{j['id']}").json()["state"] for j in jobs]
        finally:
            for j in jobs:
                c.delete(f"/api/jobs/{j['id']}")
    # functional, not timed: the analysis was answered while every heavy worker was busy
    assert states == ["running"] * workers.WORKERS
