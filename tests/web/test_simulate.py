"""The transient endpoints (app/web/routers/simulate.py): a run, the caps, the jobs."""

from __future__ import annotations

import json
import time

import pytest

from ringwise.analysis.transient import MAX_CYCLES, MAX_POINTS, MIN_CYCLES
from ringwise.errors import DesignError
from ringwise.web.routers import simulate as sim

#: Few cycles keep the suite fast; the figures are checked against the core elsewhere.
CYCLES = 40
POINTS = 200


def _no_nan(text: str) -> object:
    def refuse(name: str) -> None:
        raise AssertionError(f"{name} in the answer")

    return json.loads(text, parse_constant=refuse)


def _wait(client, job_id: str, timeout: float = 30.0) -> dict:
    deadline = time.monotonic() + timeout
    while True:
        body = client.get(f"/api/simulate/jobs/{job_id}").json()
        if body["state"] not in ("queued", "running") or time.monotonic() > deadline:
            return body
        time.sleep(0.05)


def test_simulate_good_run(client, sample):
    r = client.post("/api/simulate", json={"design": sample, "cycles": CYCLES, "points": POINTS})
    assert r.status_code == 200
    body = _no_nan(r.text)
    assert body["format"] == "ringwise.simulation"
    t = body["transient"]
    assert t["f_meas"] > 0 and t["amp_out_peak"] > 0
    assert 0 < len(t["waveform"]["t"]) <= POINTS
    assert len(t["waveform"]["v_out"]) == len(t["waveform"]["v_be"]) == len(t["waveform"]["t"])
    assert t["cycles_run"] == pytest.approx(CYCLES, rel=0.01)


@pytest.mark.parametrize(
    ("key", "value", "message", "kind"),
    [
        ("cycles", MAX_CYCLES + 1, f"must be at most {MAX_CYCLES}", "less_than_equal"),
        ("cycles", MIN_CYCLES - 1, f"must be at least {MIN_CYCLES}", "greater_than_equal"),
        ("points", MAX_POINTS + 1, f"must be at most {MAX_POINTS}", "less_than_equal"),
        ("points", sim.MIN_POINTS - 1, f"must be at least {sim.MIN_POINTS}", "greater_than_equal"),
    ],
)
@pytest.mark.parametrize("url", ["/api/simulate", "/api/simulate/jobs"])
def test_caps_are_422_naming_the_field(client, sample, url, key, value, message, kind):
    body = {"design": sample, "cycles": CYCLES, "points": POINTS, key: value}
    r = client.post(url, json=body)
    assert r.status_code == 422
    text = f"{message}, got {value}"
    assert r.json() == {
        "status": 422,
        "error": "invalid-input",
        "message": f"{key}: {text}",
        "problems": [{"field": key, "message": text, "type": kind}],
    }


def test_caps_are_in_the_openapi_schema(client):
    schema = client.get("/openapi.json").json()
    props = schema["components"]["schemas"]["SimulateRequest"]["properties"]
    assert props["cycles"]["maximum"] == MAX_CYCLES
    assert props["cycles"]["minimum"] == MIN_CYCLES
    assert props["points"]["maximum"] == MAX_POINTS
    assert str(MAX_CYCLES) in props["cycles"]["description"]
    assert {"/api/simulate", "/api/simulate/jobs", "/api/simulate/jobs/{job_id}"} <= set(
        schema["paths"]
    )


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"cycles": "many"}, "cycles"),
        ({"cycles": 40.5}, "cycles"),
        ({"extra": 1}, "extra"),
        ({"design": {"tank": {}}}, "design.supply"),
    ],
)
def test_bad_requests_name_the_field(client, sample, change, field):
    body = {"design": sample, "cycles": CYCLES, **change}
    r = client.post("/api/simulate", json=body)
    assert r.status_code == 422
    assert field in [p["field"] for p in r.json()["problems"]]


@pytest.mark.parametrize(
    ("error", "status"),
    [(DesignError("no DC operating point"), 422), (ArithmeticError("overflow"), 422)],
)
def test_a_domain_error_is_422_and_a_failed_job(inline_client, sample, monkeypatch, error, status):
    # the app without its lifespan runs the work in threads, where the patch holds
    client = inline_client

    def fails(*args, **kwargs):
        raise error

    monkeypatch.setattr(sim, "simulate", fails)
    body = {"design": sample, "cycles": CYCLES, "points": POINTS}
    r = client.post("/api/simulate", json=body)
    assert r.status_code == status
    assert r.json()["problems"] == [
        {"field": "design", "message": str(error), "type": "domain_error"}
    ]
    job = client.post("/api/simulate/jobs", json=body)
    assert job.status_code == 202
    done = _wait(client, job.json()["id"])
    assert done["state"] == "failed"
    assert done["error"] == {
        "status": status,
        "error": "invalid-input",
        "message": f"design: {error}",
        "problems": [{"field": "design", "message": str(error), "type": "domain_error"}],
    }


def test_a_bug_in_a_job_is_reported_not_raised(inline_client, sample, monkeypatch):
    client = inline_client

    def breaks(*args, **kwargs):
        raise RuntimeError("a bug")

    monkeypatch.setattr(sim, "simulate", breaks)
    body = {"design": sample, "cycles": CYCLES, "points": POINTS}
    job = client.post("/api/simulate/jobs", json=body)
    done = _wait(client, job.json()["id"])
    assert done["state"] == "failed"
    assert done["error"]["message"] == "unexpected error in the simulate; please report it"
    assert "a bug" not in json.dumps(done)


def test_job_runs_to_done_with_progress(client, sample):
    r = client.post(
        "/api/simulate/jobs", json={"design": sample, "cycles": CYCLES, "points": POINTS}
    )
    assert r.status_code == 202
    job = r.json()
    # just started: the solver may already have reported a little progress
    assert job["state"] in ("queued", "running") and 0.0 <= job["progress"] < 1.0
    assert len(job["id"]) >= 24  # 18 random bytes, URL-safe base64
    done = _wait(client, job["id"])
    assert done["state"] == "done" and done["progress"] == 1.0
    assert done["result"]["transient"]["f_meas"] > 0
    _no_nan(client.get(f"/api/simulate/jobs/{job['id']}").text)


def test_job_ids_are_random(client, sample):
    body = {"design": sample, "cycles": MIN_CYCLES, "points": POINTS}
    ids = []
    for _ in range(2):
        r = client.post("/api/simulate/jobs", json=body)
        ids.append(r.json()["id"])
        _wait(client, ids[-1])
    assert ids[0] != ids[1]


def test_cancel_stops_the_run(client, sample):
    r = client.post("/api/simulate/jobs", json={"design": sample, "cycles": 3000, "points": 200})
    job_id = r.json()["id"]
    deadline = time.monotonic() + 20
    while client.get(f"/api/simulate/jobs/{job_id}").json()["progress"] == 0.0:
        assert time.monotonic() < deadline
        time.sleep(0.02)
    cancelled = client.delete(f"/api/simulate/jobs/{job_id}")
    assert cancelled.status_code == 200
    # the answer waits for the worker to stop
    assert cancelled.json()["state"] == "cancelled"
    assert 0 < cancelled.json()["progress"] < 1
    after = client.get(f"/api/simulate/jobs/{job_id}").json()
    assert after["state"] == "cancelled" and "result" not in after
    # cancelling again, or a finished job, changes nothing
    assert client.delete(f"/api/simulate/jobs/{job_id}").json()["state"] == "cancelled"


@pytest.mark.parametrize("method", ["get", "delete"])
@pytest.mark.parametrize("job_id", ["nope", "x" * 24, "x" * 65])
def test_unknown_job_is_404_or_422(client, method, job_id):
    r = getattr(client, method)(f"/api/simulate/jobs/{job_id}")
    assert r.status_code == (422 if len(job_id) > 64 else 404)
    body = r.json()
    assert set(body) == {"status", "error", "message", "problems"}
    if r.status_code == 404:
        assert body["error"] == "not-found" and "no simulation job" in body["message"]


def test_runs_beyond_the_slots_are_refused_with_429(client, sample):
    long_run = {"design": sample, "cycles": MAX_CYCLES, "points": POINTS}
    held = [client.post("/api/simulate/jobs", json=long_run) for _ in range(sim.MAX_RUNNING)]
    try:
        assert [r.status_code for r in held] == [202] * sim.MAX_RUNNING
        body = {"design": sample, "cycles": CYCLES, "points": POINTS}
        for url in ("/api/simulate", "/api/simulate/jobs"):
            r = client.post(url, json=body)
            assert r.status_code == 429
            assert r.json()["error"] == "too-many-requests"
            assert int(r.headers["retry-after"]) > 0
            assert f"at most {sim.MAX_RUNNING}" in r.json()["message"]
    finally:
        for r in held:
            client.delete(f"/api/simulate/jobs/{r.json()['id']}")
    # the stopped runs free their slots
    assert client.post("/api/simulate", json=body).status_code == 200


def test_finite_replaces_nan():
    assert sim._finite({"a": [1.0, float("nan")], "b": float("inf"), "c": "x"}) == {
        "a": [1.0, None],
        "b": None,
        "c": "x",
    }
