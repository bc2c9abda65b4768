"""The load benchmark's smoke run, and a slow request that must not stall a quick one."""

from __future__ import annotations

import json
import time

import httpx2 as httpx

from ringwise.web import load
from ringwise.web.paths import SAMPLES_DIR
from ringwise.web.samples import sample_texts


def test_load_smoke_run_stops_by_itself_without_errors():
    t0 = time.monotonic()
    figures = load.run(clients=5, seconds=2.0, max_requests=400, heavy=1)
    elapsed = time.monotonic() - t0
    assert figures["errors"] == 0, figures["error_kinds"]
    assert figures["analyze"]["count"] > 0
    assert figures["requests"] <= 400
    assert elapsed < 2.0 + load.REQUEST_TIMEOUT  # bounded: the deadline plus one request
    assert "p99" in load.report(figures, 5)


def test_a_long_spread_does_not_stall_an_analyze(live_server):
    design = json.loads((SAMPLES_DIR / "clapp-clock-1M.json").read_text(encoding="utf-8"))
    texts = {"fields": sample_texts()["clapp-clock-1M"], "samples": "100000", "seed": "1"}
    with httpx.Client(base_url=live_server, timeout=60) as c:
        # a large Monte Carlo (several seconds of work on its own), in a worker process
        job = c.post("/api/sheet/spread/jobs", json=texts).json()
        try:
            deadline = time.monotonic() + 30
            while c.get(f"/api/jobs/{job['id']}").json()["progress"] == 0.0:
                assert time.monotonic() < deadline
                time.sleep(0.05)
            assert c.post("/api/analyze", json=design).status_code == 200
            running = c.get(f"/api/jobs/{job['id']}").json()
        finally:
            c.delete(f"/api/jobs/{job['id']}")
    # functional, not timed: the analyze was answered while the spread still ran
    assert running["state"] == "running", "the analyze waited for the spread"
