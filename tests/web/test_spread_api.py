"""Spread and synthesis endpoints (app/web/routers/spread.py)."""

from __future__ import annotations

import json

import pytest

from ringwise.analysis.spread import MAX_SAMPLES
from ringwise.web.paths import SAMPLES_DIR


def _sample() -> dict:
    return json.loads(sorted(SAMPLES_DIR.glob("*.json"))[0].read_text(encoding="utf-8"))


def test_spread_returns_yield_and_is_reproducible(client) -> None:
    body = {"design": _sample(), "samples": 200, "seed": 9, "window": {"low": 1e5, "high": 1e8}}
    a = client.post("/api/spread", json=body)
    b = client.post("/api/spread", json=body)
    assert a.status_code == 200
    assert a.json() == b.json()
    s = a.json()["spread"]
    assert s["seed"] == 9 and s["samples"] == 200
    assert 0 <= s["yield_start"] <= 1 and s["in_window"] is not None
    assert s["sensitivities"] and s["f_vs_temperature"]


def test_spread_cap_names_the_field(client) -> None:
    r = client.post("/api/spread", json={"design": _sample(), "samples": MAX_SAMPLES + 1})
    assert r.status_code == 422
    problems = r.json()["problems"]
    assert problems[0]["field"] == "samples"
    assert str(MAX_SAMPLES) in problems[0]["message"]


def test_bad_window_is_a_422(client) -> None:
    body = {"design": _sample(), "samples": 10, "window": {"low": 2e6, "high": 1e6}}
    r = client.post("/api/spread", json=body)
    assert r.status_code == 422
    assert "window" in r.json()["message"]


def test_snap(client) -> None:
    r = client.post("/api/snap", json={"design": _sample(), "series": "E6"})
    assert r.status_code == 200
    out = r.json()
    assert out["design"]["format"] == "ringwise.design"
    assert all(c["before"] != c["after"] for c in out["changes"])
    r = client.post("/api/snap", json={"design": _sample(), "series": "E7"})
    assert r.status_code == 422 and r.json()["problems"][0]["field"] == "series"


def test_synthesize(client) -> None:
    r = client.post(
        "/api/synthesize",
        json={"topology": "common-emitter", "f": 1e6, "Vcc": 12, "IC": 1e-3, "gain": 3},
    )
    assert r.status_code == 200
    out = r.json()
    assert out["gain"] == pytest.approx(3, rel=0.2) and out["reasons"]
    r = client.post("/api/synthesize", json={"f": 1e6, "Vcc": 1.0, "IC": 1e-3})
    assert r.status_code == 422 and "headroom" in r.json()["message"]


def test_reconcile(client) -> None:
    r = client.post("/api/reconcile", json={"design": _sample(), "f_measured": 1.0e6})
    assert r.status_code == 200
    out = r.json()
    assert {f["name"] for f in out["fitted"]} == {"C_scale", "Q_L", "beta"}
    assert out["as_built"]["format"] == "ringwise.design"
    bad = {"design": _sample(), "f_measured": 1e6, "threshold": {"param": "Rx", "value": 1}}
    r = client.post("/api/reconcile", json=bad)
    assert r.status_code == 422 and r.json()["problems"][0]["field"] == "threshold.param"
