"""The one error shape of the API (app/web/errors.py), pinned with exact bodies."""

from __future__ import annotations

import pytest


def test_field_error_exact_body(client, sample):
    sample["tank"]["C2"] = "-1"
    r = client.post("/api/analyze", json=sample)
    assert r.status_code == 422
    assert r.json() == {
        "status": 422,
        "error": "invalid-input",
        "message": "tank.C2: must be at least 1 fF, got '-1' = -1 F",
        "problems": [
            {
                "field": "tank.C2",
                "message": "must be at least 1 fF, got '-1' = -1 F",
                "type": "greater_than_equal",
            }
        ],
    }


def test_not_found_exact_body(client):
    r = client.get("/api/designs/nope")
    assert r.status_code == 404
    assert r.json() == {
        "status": 404,
        "error": "not-found",
        "message": (
            "no sample design named 'nope'; known: clapp-clock-1M, common-base-carrier-10M, "
            "crystal-clock-10M, follower-test-source-4M, proximity-exciter-150k, varactor-lo-5M"
        ),
        "problems": [],
    }


def test_sweep_cap_exact_body(client, sample):
    r = client.post(
        "/api/sweep",
        json={"design": sample, "param": "RC", "start": "100", "stop": "1k", "points": 1001},
    )
    assert r.status_code == 422
    assert r.json() == {
        "status": 422,
        "error": "invalid-input",
        "message": "points: must be at most 1000, got 1001",
        "problems": [
            {
                "field": "points",
                "message": "must be at most 1000, got 1001",
                "type": "less_than_equal",
            }
        ],
    }


@pytest.mark.parametrize(
    ("method", "url", "kwargs", "status"),
    [
        (
            "post",
            "/api/analyze",
            {"content": b"{not json", "headers": {"content-type": "application/json"}},
            400,
        ),
        ("post", "/api/analyze", {"content": b"plain text"}, 422),
        ("post", "/api/analyze", {"json": [1, 2]}, 422),
        ("get", "/api/analyze", {}, 405),
        ("get", "/no/such/page", {}, 404),
        ("post", "/api/threshold", {"json": {}}, 422),
    ],
)
def test_every_error_has_the_shape(client, method, url, kwargs, status):
    r = getattr(client, method)(url, **kwargs)
    assert r.status_code == status
    body = r.json()
    assert set(body) == {"status", "error", "message", "problems"}
    assert body["status"] == status
    assert body["message"]
    for p in body["problems"]:
        assert set(p) == {"field", "message", "type"}


def test_malformed_json_names_the_body(client):
    r = client.post(
        "/api/analyze", content=b"{not json", headers={"content-type": "application/json"}
    )
    assert r.status_code == 400
    assert r.json()["problems"][0]["field"] == "body"
    # says where parsing stopped
    assert r.json()["problems"][0]["message"] == (
        "is not valid JSON: expecting property name enclosed in double quotes "
        "at line 1, column 2 (character 1)"
    )
