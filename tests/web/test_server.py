"""App-level behaviour (app/web/server.py): headers, offline assets, serve()."""

from __future__ import annotations

import re

import pytest

from ringwise.web import light, server, workers
from ringwise.web.assets import plotly_js, static_url
from ringwise.web.server import _is_loopback, create_app


def test_security_headers(client):
    r = client.get("/")
    csp = r.headers["content-security-policy"]
    assert "script-src 'self'" in csp
    assert "default-src 'self'" in csp
    assert r.headers["x-content-type-options"] == "nosniff"


def test_every_script_and_style_is_local(client):
    html = client.get("/").text
    for url in re.findall(r'(?:src|href)="([^"]+)"', html):
        assert url.startswith(("/", "#", "http://testserver/")), url
    assert "<script>" not in html  # no inline code (the JSON data blocks are not run)


def test_plotly_is_served_from_the_package_with_its_version(client):
    vendored = plotly_js()
    assert re.fullmatch(r"/vendor/plotly-\d+\.\d+\.\d+-[0-9a-f]{10}\.min\.js", vendored.url)
    assert vendored.url in client.get("/").text
    r = client.get(vendored.url)
    assert r.status_code == 200
    assert r.content == vendored.path.read_bytes()
    assert "immutable" in r.headers["cache-control"]
    assert client.get("/vendor/plotly-0.0.0-0000000000.min.js").status_code == 404


def test_static_urls_carry_a_content_hash(client):
    url = static_url("sheet.js")
    assert re.fullmatch(r"/static/sheet\.js\?v=[0-9a-f]{10}", url)
    r = client.get(url)
    assert r.status_code == 200
    assert "javascript" in r.headers["content-type"]


def test_openapi_schema_lists_the_endpoints(client):
    paths = client.get("/openapi.json").json()["paths"]
    for p in (
        "/api/analyze",
        "/api/sweep",
        "/api/threshold",
        "/api/designs",
        "/api/designs/{name}",
    ):
        assert p in paths


def test_unknown_default_design_is_refused():
    with pytest.raises(ValueError, match="no sample design named 'nope'"):
        create_app("nope")


@pytest.mark.parametrize(
    ("host", "loopback"),
    [
        ("127.0.0.1", True),
        ("localhost", True),
        ("::1", True),
        ("0.0.0.0", False),
        ("10.1.2.3", False),
    ],
)
def test_loopback(host, loopback):
    assert _is_loopback(host) is loopback


def test_serve_warns_when_exposed(monkeypatch, capsys):
    import uvicorn

    calls = []
    monkeypatch.setattr(uvicorn, "run", lambda app, **kw: calls.append(kw))
    server.serve(host="0.0.0.0", port=8123, design="clapp-clock-1M")
    out = capsys.readouterr()
    assert "http://0.0.0.0:8123/" in out.out
    assert "no authentication" in out.err
    assert calls == [
        {
            "host": "0.0.0.0",
            "port": 8123,
            "log_level": "warning",
            "timeout_keep_alive": server.KEEP_ALIVE_S,
        }
    ]
    # kept-alive connections outlive every Retry-After we send (a client coming back
    # on time must not race the close)
    assert max(workers.RETRY_AFTER_S, light.RETRY_AFTER_S) < server.KEEP_ALIVE_S
    server.serve(host="127.0.0.1", port=8124)
    assert "no authentication" not in capsys.readouterr().err


def test_serve_refuses_an_unknown_design(capsys):
    from ringwise.web import server

    with pytest.raises(SystemExit) as info:
        server.serve(design="nope")
    assert info.value.code == 2
    assert "no sample design named 'nope'" in capsys.readouterr().err


def test_the_app_opens_a_design_file_of_the_users(sample):
    from fastapi.testclient import TestClient

    from ringwise.web.server import create_app

    mine = {**sample, "name": "my own bench oscillator", "tank": {**sample["tank"], "L": "82u"}}
    with TestClient(create_app(document=mine), base_url="http://127.0.0.1") as c:
        sheet = c.get("/sheet.json").json()
        assert sheet["fields"]["name"]["text"] == "my own bench oscillator"
        assert sheet["fields"]["L"]["text"] == "82u"
        # the samples stay reachable by name
        assert c.get("/sheet.json?design=clapp-clock-1M").json()["fields"]["L"]["text"] == "100u"
