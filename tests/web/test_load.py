"""The load benchmark's smoke run, and a slow request that must not stall a quick one."""

from __future__ import annotations

import json
import threading
import time

import httpx2 as httpx

from ringwise.web import load
from ringwise.web.paths import SAMPLES_DIR


def test_load_smoke_run_stops_by_itself_without_errors():
    t0 = time.monotonic()
    figures = load.run(clients=5, seconds=2.0, max_requests=400)
    elapsed = time.monotonic() - t0
    assert figures["errors"] == 0, figures["error_kinds"]
    assert figures["analyze"]["count"] > 0
    assert figures["requests"] <= 400
    assert elapsed < 2.0 + load.REQUEST_TIMEOUT  # bounded: the deadline plus one request
    assert "p99" in load.report(figures, 5)


def test_a_long_sweep_does_not_stall_an_analyze(live_server):
    design = json.loads((SAMPLES_DIR / "clapp-clock-1M.json").read_text(encoding="utf-8"))
    # The batched sweep is now quicker than an analyze; a large Monte Carlo is the
    # long request (several seconds of work on its own).
    sweep = {"design": design, "samples": 100_000, "seed": 1}
    done: dict[str, float] = {}

    def post(kind: str, path: str, body: dict) -> None:
        with httpx.Client(base_url=live_server, timeout=60) as c:
            assert c.post(path, json=body).status_code == 200
        done[kind] = time.monotonic()

    slow = threading.Thread(target=post, args=("sweep", "/api/spread", sweep))
    slow.start()
    time.sleep(0.2)  # the long request is under way
    started = time.monotonic()
    post("analyze", "/api/analyze", design)
    slow.join(timeout=60)
    assert done["analyze"] < done["sweep"], "the analyze waited for the sweep"
    assert done["analyze"] - started < 1.0
