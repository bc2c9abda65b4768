"""Host and Origin checks (app/web/hosts.py) and HEAD (app/web/methods.py)."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient

from ringwise.web.hosts import allowed_hosts
from ringwise.web.server import create_app


@pytest.mark.parametrize("host", ["127.0.0.1:8000", "localhost", "LOCALHOST:9", "[::1]:8000"])
def test_loopback_hosts_are_served(client, host):
    assert client.get("/api/designs", headers={"host": host}).status_code == 200


@pytest.mark.parametrize("host", ["evil.example", "evil.example:8000", "127.0.0.1.evil.example"])
def test_other_hosts_are_refused_without_echo(client, host):
    # a DNS-rebound name reaches 127.0.0.1 under a name of its own: refused, not echoed
    r = client.get("/api/designs", headers={"host": host})
    assert r.status_code == 400
    assert r.json()["problems"][0]["field"] == "host"
    assert "evil" not in r.text
    assert r.headers["content-security-policy"]


def test_a_post_from_a_foreign_origin_is_refused(client, sample):
    r = client.post("/api/analyze", json=sample, headers={"origin": "http://evil.example"})
    assert r.status_code == 403
    assert r.json()["problems"][0]["type"] == "foreign_origin"
    assert "evil" not in r.text
    assert client.post("/api/analyze", json=sample, headers={"origin": "null"}).status_code == 403


def test_a_post_from_the_page_itself_or_without_origin_passes(client, sample):
    own = {"origin": "http://127.0.0.1:8000"}
    assert client.post("/api/analyze", json=sample, headers=own).status_code == 200
    assert client.post("/api/analyze", json=sample).status_code == 200


def test_allowed_hosts_are_added_by_name():
    app = create_app(allow_hosts=["bench-pc.lan", "fd00::5"])
    with TestClient(app, base_url="http://bench-pc.lan:8000") as c:
        assert c.get("/api/designs").status_code == 200
        assert c.get("/api/designs", headers={"host": "[fd00::5]:8000"}).status_code == 200
        assert c.get("/api/designs", headers={"host": "other.lan"}).status_code == 400
    assert allowed_hosts(["fd00::5"])[-1] == "[fd00::5]"


def test_nothing_is_built_from_the_host_header(client):
    # the share link is relative in the page; the browser makes it absolute from its origin
    page = client.get("/", headers={"host": "localhost:1234"}).text
    assert "localhost:1234" not in page
    assert client.get("/static", follow_redirects=False).status_code == 404
    r = client.get("/api/designs/", follow_redirects=False)
    assert "location" not in r.headers


@pytest.mark.parametrize("path", ["/", "/sheet.json", "/api/designs", "/summary.json"])
def test_head_is_answered_where_get_is(client, path):
    got, head = client.get(path), client.head(path)
    assert head.status_code == got.status_code == 200
    assert head.content == b""
    assert head.headers["content-type"] == got.headers["content-type"]


def test_head_where_only_post_is_allowed_is_405(client):
    r = client.head("/api/analyze")
    assert r.status_code == 405
    assert r.headers["allow"] == "POST"
