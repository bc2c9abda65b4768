"""Admission of the light computations (app/web/light.py)."""

from __future__ import annotations

from starlette.responses import PlainTextResponse
from starlette.testclient import TestClient

from ringwise.web import light


async def _plain(scope, receive, send) -> None:
    await PlainTextResponse("computed")(scope, receive, send)


def test_light_requests_past_the_limit_are_refused_at_once_with_retry_after():
    full = TestClient(light.LightLimit(_plain, limit=0))
    r = full.post("/api/analyze", json={})
    assert r.status_code == 503
    assert r.headers["retry-after"] == str(light.RETRY_AFTER_S)
    assert r.json()["problems"] == [{"field": "request", "message": light.BUSY, "type": "busy"}]
    # what does not compute in the server's process is not counted
    for path in ("/static/sheet.js", "/api/jobs/x", "/api/spread"):
        assert full.get(path).text == "computed"


def test_under_the_limit_every_light_request_goes_through():
    guard = light.LightLimit(_plain, limit=1)
    client = TestClient(guard)
    for path in ("/", "/api/sheet", "/api/csv/sheet/loop", "/sheet.json"):
        assert client.get(path).text == "computed"
    assert guard.running == 0  # every one counted out again
