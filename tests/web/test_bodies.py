"""Request bodies under guard (app/web/bodies.py): bounded JSON, slow bodies, bad JSON."""

from __future__ import annotations

import json
import socket
import threading
from urllib.parse import urlsplit

import httpx2 as httpx
import pytest

from ringwise.units import MAX_DIGITS
from ringwise.web.bodies import BODY_SECONDS, MAX_DEPTH, check_json
from ringwise.web.server import create_app
from tests.web.conftest import serving


def _post(client, body: bytes, path: str = "/api/analyze"):
    return client.post(path, content=body, headers={"content-type": "application/json"})


def test_a_long_integer_is_refused_naming_its_field(client, sample):
    # 5000 digits is past Python's own int-parsing guard; the field is still named
    body = json.dumps(sample).replace('"C2": "4n7"', '"C2": 1' + "0" * 5000)
    assert '"C2": 1000' in body
    r = _post(client, body.encode())
    assert r.status_code == 422
    assert r.json()["problems"] == [
        {
            "field": "tank.C2",
            "message": f"a number of 5001 characters is too long; a number has at most "
            f"{MAX_DIGITS} digits",
            "type": "too_long",
        }
    ]


def test_a_long_integer_under_a_repeated_key_is_still_seen(client, sample):
    body = json.dumps(sample).replace('"tank": {', '"tank": {"C2": 9' + "9" * 900 + ", ", 1)
    r = _post(client, body.encode())
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "tank.C2"


def test_a_400_digit_integer_is_named_under_its_field(client, sample):
    sample["tank"]["C2"] = 10**399
    r = client.post("/api/analyze", json=sample)
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "tank.C2"


@pytest.mark.parametrize("depth", [MAX_DEPTH + 1, 30_000])
def test_deep_nesting_is_refused(client, depth):
    r = _post(client, b"[" * depth + b"]" * depth)
    assert r.status_code == 422
    assert r.json()["problems"][0]["type"] == "too_deep"
    assert str(MAX_DEPTH) in r.json()["message"]


def test_bad_json_says_where_parsing_stopped(client):
    r = _post(client, b'{"design": {"tank": 1,}}')
    assert r.status_code == 400
    assert r.json()["message"].endswith("at line 1, column 23 (character 22)")


@pytest.mark.parametrize("literal", ["NaN", "-Infinity"])
def test_nan_is_refused_naming_its_field(client, sample, literal):
    body = json.dumps(sample).replace('"4n7"', literal)
    r = _post(client, body.encode())
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "tank.C2"


def test_a_byte_order_mark_is_accepted(client, sample):
    r = _post(client, b"\xef\xbb\xbf" + json.dumps(sample).encode())
    assert r.status_code == 200


def test_check_json_passes_ordinary_bodies(sample):
    assert check_json(json.dumps({"design": sample, "points": 50}).encode()) is None


def test_the_heavy_parse_is_refused_while_a_light_request_is_answered(live_server):
    """Sent together: the 4000-digit request is refused by construction (the length
    cap is checked before any pattern runs), the light one is answered.  A
    functional check: both must come back, with these statuses."""
    heavy_url = "/sheet.json?L=" + "9" * 4000
    answers: dict[str, httpx.Response] = {}
    start = threading.Barrier(2)

    def get(key: str, path: str) -> None:
        with httpx.Client(base_url=live_server, timeout=60) as c:
            start.wait()
            answers[key] = c.get(path)

    threads = [
        threading.Thread(target=get, args=("heavy", heavy_url)),
        threading.Thread(target=get, args=("light", "/api/designs")),
    ]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)
    assert answers["light"].status_code == 200
    heavy = answers["heavy"].json()
    assert heavy["ok"] is False
    assert "at most 64 characters" in heavy["fields"]["L"]["error"]


def test_a_slow_body_is_timed_out():
    """A client that declares a body and never sends it gets 408 and the connection
    closed, instead of holding it (and a worker thread) for as long as it likes."""
    seconds = 0.5
    with serving(create_app(body_seconds=seconds)) as url:
        parts = urlsplit(url)
        with socket.create_connection((parts.hostname, parts.port), timeout=30) as s:
            s.sendall(
                b"POST /api/analyze HTTP/1.1\r\nHost: 127.0.0.1\r\n"
                b"Content-Type: application/json\r\nContent-Length: 100\r\n\r\n{"
            )
            answer = b""
            while chunk := s.recv(4096):  # the server closes the connection after the answer
                answer += chunk
    assert answer.startswith(b"HTTP/1.1 408"), answer[:100]
    assert b"request-timeout" in answer


def test_the_body_timeout_is_stated():
    assert BODY_SECONDS <= 30
