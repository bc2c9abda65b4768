"""Hardening of the local server: headers on every answer, caps, traversal, data-only links.

The browser half (scripts from a link never run in real Chromium) is in
test_security_browser.py; the fuzzing in test_fuzz_*.py.
"""

from __future__ import annotations

import builtins
import http.client
import io
import json
import os
import tempfile
from urllib.parse import quote, urlencode, urlparse

import pytest

from ringwise.analysis.threshold import MAX_SWEEP_POINTS
from ringwise.analysis.transient import MAX_CYCLES, MAX_POINTS
from ringwise.web.assets import plotly_js, static_url
from ringwise.web.paths import SAMPLES_DIR
from ringwise.web.server import CONTENT_SECURITY_POLICY, MAX_BODY_BYTES

#: Markup a shared link might smuggle in (the classic probes: a script
#: element, an attribute break-out with an event handler, a javascript: URL).
PAYLOADS = (
    "<script>window.__pwned=1</script>",
    '"><img src=x onerror="window.__pwned=1">',
    "'><svg onload=alert(1)>",
    "javascript:alert(1)",
)
NAME = "Bench <b>unit</b> " + PAYLOADS[0] + PAYLOADS[1]


def _error_shape(body: dict) -> None:
    assert set(body) == {"status", "error", "message", "problems"}
    for p in body["problems"]:
        assert set(p) >= {"field", "message", "type"}


# --- 4. headers on every kind of answer ------------------------------------------------


def _answers(client, sample) -> dict[str, object]:
    big = b'{"x": "' + b"a" * MAX_BODY_BYTES + b'"}'
    return {
        "html sheet": client.get("/"),
        "html summary": client.get("/summary?design=clapp-clock-1M"),
        "json api": client.get("/api/designs"),
        "json page twin": client.get("/sheet.json"),
        "json analyze": client.post("/api/analyze", json=sample),
        "openapi": client.get("/openapi.json"),
        "static js": client.get(static_url("sheet.js")),
        "static css": client.get(static_url("ringwise.css")),
        "vendored plotly": client.get(plotly_js().url),
        "export attachment": client.get("/api/export?design=clapp-clock-1M"),
        "error 404": client.get("/no/such/page"),
        "error 404 api": client.get("/api/designs/nope"),
        "error 405": client.put("/api/analyze"),
        "error 413": client.post(
            "/api/import", content=big, headers={"content-type": "application/json"}
        ),
        "error 422": client.post("/api/analyze", json={}),
    }


def test_every_kind_of_answer_carries_csp_and_nosniff(client, sample):
    for kind, r in _answers(client, sample).items():
        assert r.headers.get("content-security-policy") == CONTENT_SECURITY_POLICY, kind
        assert r.headers.get("x-content-type-options") == "nosniff", kind


def test_csp_allows_only_the_apps_own_scripts():
    directives = dict(d.split(" ", 1) for d in CONTENT_SECURITY_POLICY.split("; "))
    assert directives["script-src"] == "'self'"  # no inline, no eval, no other origin
    assert directives["object-src"] == "'none'"
    assert directives["base-uri"] == "'none'"
    assert directives["frame-ancestors"] == "'none'"
    for value in directives.values():
        assert "http:" not in value and "https:" not in value and "*" not in value


def test_error_answers_have_the_one_shape(client, sample):
    for kind, r in _answers(client, sample).items():
        if r.status_code >= 400:
            _error_shape(r.json())
            assert r.json()["status"] == r.status_code, kind


def test_405_lists_every_method_of_the_path(client):
    r = client.request("PUT", "/api/simulate/jobs/abc")
    assert r.status_code == 405
    assert set(r.headers["allow"].split(", ")) == {"GET", "HEAD", "DELETE"}
    assert client.request("TRACE", "/api/analyze").headers["allow"] == "POST"


# --- 4. local by default ---------------------------------------------------------------


def test_ringwise_serve_binds_loopback_unless_told(monkeypatch, capsys):
    import uvicorn

    from ringwise.cli import main

    calls = []
    monkeypatch.setattr(uvicorn, "run", lambda app, **kw: calls.append(kw))
    assert main(["serve"]) == 0
    assert calls[-1]["host"] == "127.0.0.1"
    assert "no authentication" not in capsys.readouterr().err
    assert main(["serve", "--host", "0.0.0.0", "--port", "8765"]) == 0
    assert calls[-1]["host"] == "0.0.0.0" and calls[-1]["port"] == 8765
    err = capsys.readouterr().err
    assert "WARNING" in err and "no authentication" in err


# --- 3. bounded work: body cap and the documented caps ------------------------------------


def test_body_over_the_cap_is_413_naming_the_cap(client):
    big = json.dumps({"format": "ringwise.design", "version": 1, "name": "x" * MAX_BODY_BYTES})
    r = client.post("/api/import", content=big, headers={"content-type": "application/json"})
    assert r.status_code == 413
    _error_shape(r.json())
    assert str(MAX_BODY_BYTES) in r.json()["message"]
    assert r.json()["problems"][0]["field"] == "body"


def test_chunked_body_over_the_cap_is_413(client):
    def chunks():
        yield b'{"name": "'
        for _ in range(MAX_BODY_BYTES // 1000 + 2):
            yield b"x" * 1000
        yield b'"}'

    r = client.post("/api/analyze", content=chunks(), headers={"content-type": "application/json"})
    assert "content-length" not in r.request.headers  # really sent chunked
    assert r.status_code == 413
    assert str(MAX_BODY_BYTES) in r.json()["message"]


def test_body_at_the_cap_is_read(client, sample):
    padded = json.dumps(sample).encode()
    padded += b" " * (MAX_BODY_BYTES - len(padded))  # JSON allows trailing whitespace
    assert len(padded) == MAX_BODY_BYTES
    r = client.post("/api/analyze", content=padded, headers={"content-type": "application/json"})
    assert r.status_code == 200


def test_not_utf8_is_400_like_bad_json(client):
    r = client.post(
        "/api/analyze", content=b"\xff\xfe{", headers={"content-type": "application/json"}
    )
    assert r.status_code == 400
    assert r.json()["problems"][0]["field"] == "body"


def test_every_cap_is_in_the_openapi_descriptions(client):
    schema = client.get("/openapi.json").json()
    components = schema["components"]["schemas"]
    for path, operations in schema["paths"].items():
        for method, op in operations.items():
            if "requestBody" in op:
                assert str(MAX_BODY_BYTES) in op["responses"]["413"]["description"], (method, path)
            for code, response in op["responses"].items():
                if code[0] in "45":
                    ref = response["content"]["application/json"]["schema"]["$ref"]
                    assert ref == "#/components/schemas/ErrorOut", (method, path, code)
    points = components["SweepRequest"]["properties"]["points"]
    assert points["maximum"] == MAX_SWEEP_POINTS and str(MAX_SWEEP_POINTS) in points["description"]
    sim = components["SimulateRequest"]["properties"]
    assert (
        sim["cycles"]["maximum"] == MAX_CYCLES and str(MAX_CYCLES) in sim["cycles"]["description"]
    )
    assert (
        sim["points"]["maximum"] == MAX_POINTS and str(MAX_POINTS) in sim["points"]["description"]
    )


@pytest.mark.parametrize(
    ("path", "body", "field", "cap"),
    [
        ("/api/sweep", {"param": "RC", "start": 10, "stop": 1e4}, "points", MAX_SWEEP_POINTS),
        ("/api/simulate", {}, "cycles", MAX_CYCLES),
        ("/api/simulate", {}, "points", MAX_POINTS),
        ("/api/simulate/jobs", {}, "cycles", MAX_CYCLES),
    ],
)
def test_over_a_work_cap_is_422_naming_the_cap(client, sample, path, body, field, cap):
    r = client.post(path, json={"design": sample, **body, field: cap + 1})
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == field
    assert str(cap) in r.json()["message"]


# --- 1. validation: dead designs answer normally, no NaN in JSON ---------------------------


def _strict_json(text: str) -> object:
    def refuse(constant: str) -> None:
        raise AssertionError(f"{constant} in a JSON answer")

    return json.loads(text, parse_constant=refuse)


@pytest.mark.parametrize(
    ("change", "why"),
    [
        ({"bias": {"RB2": 1e-3}}, "base at ground: transistor cut off"),
        ({"bias": {"RB1": 1e-3}}, "base at the supply: saturated"),
        ({"bias": {"RC": 1.0}}, "far below the threshold: no oscillation"),
        ({"tank": {"Q_L": 0.01}}, "a tank with no Q"),
        ({"device": {"beta": 1, "preset": None}}, "a transistor with no gain"),
        ({"supply": {"Vcc": 0.01}}, "10 mV supply"),
    ],
)
def test_dead_designs_give_a_normal_answer(client, sample, change, why):
    for section, values in change.items():
        sample[section].update(values)
    r = client.post("/api/analyze", json=sample)
    assert r.status_code in (200, 422), why
    result = _strict_json(r.text)
    if r.status_code == 422:  # a domain error of the core: said with a message, never a 500
        assert result["message"], why
        return
    assert result["startup"]["verdict"] != "will-start", why
    texts = client.post("/api/import", json=sample).json()["fields"]
    view = client.post("/api/sheet", json={"fields": texts})
    assert view.status_code == 200
    _strict_json(view.text)


@pytest.mark.parametrize(
    ("section", "part", "value", "region", "code"),
    [
        ("bias", "RB2", 1e-3, "cut-off", "cut-off"),  # base held at ground
        ("bias", "RB1", 1e-3, "saturation", "saturated"),  # base held at the supply
        ("supply", "Vcc", 0.01, "cut-off", "cut-off"),  # 10 mV: below any V_BE
    ],
)
def test_dead_design_explains_its_state(client, sample, section, part, value, region, code):
    sample[section][part] = value
    r = client.post("/api/analyze", json=sample)
    assert r.status_code == 200
    result = r.json()
    assert result["operating_point"]["region"] == region
    assert code in [w["code"] for w in result["warnings"]]
    assert result["startup"]["verdict"] == "will-not-start"


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity", "1e999"])
def test_non_finite_numbers_in_a_request_are_refused(client, sample, literal):
    # Starlette's JSON parser reads NaN, Infinity and 1e999 (= inf); the bounds must stop them
    sample["tank"]["L"] = "@"
    body = json.dumps(sample).replace('"@"', literal)
    r = client.post("/api/analyze", content=body, headers={"content-type": "application/json"})
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "tank.L"
    texts = client.post("/api/import", json={**sample, "tank": {**sample["tank"], "L": "47u"}})
    sweep = json.dumps({"fields": texts.json()["fields"], "threshold_hint": "@"})
    sweep = sweep.replace('"@"', literal)
    r = client.post("/api/sheet/sweep", content=sweep, headers={"content-type": "application/json"})
    assert r.status_code in (200, 422)
    _strict_json(r.text)


# --- 5. traversal: samples from a fixed list, static files only from static/ ----------------


@pytest.mark.parametrize(
    "name",
    [
        "../pyproject.toml",
        "../../etc/passwd",
        "/etc/passwd",
        "..%2Fpyproject.toml",
        "%2e%2e%2fpyproject.toml",
        "%252e%252e%252fpyproject.toml",
        "clapp-clock-1M.json",
        "CLAPP-CLOCK-1M",
        "clapp-clock-1M%00",
        "",
    ],
)
def test_sample_link_is_a_name_never_a_path(client, name):
    r = client.get("/sheet.json?" + urlencode({"design": name}))
    assert r.status_code == 200  # the default sample, with the link's problem said
    problems = r.json()["link_problems"]
    if name:
        assert [p["field"] for p in problems] == ["design"]
    assert "[build-system]" not in r.text and "root:" not in r.text


def _raw_get(base: str, path: str) -> tuple[int, bytes]:
    """GET a path exactly as written (no client-side normalisation of ``..``)."""
    url = urlparse(base)
    conn = http.client.HTTPConnection(url.hostname, url.port, timeout=10)
    try:
        conn.putrequest("GET", path, skip_accept_encoding=True)
        conn.endheaders()
        r = conn.getresponse()
        return r.status, r.read()
    finally:
        conn.close()


@pytest.mark.parametrize(
    "path",
    [
        "/static/../pyproject.toml",
        "/static/../../../../etc/passwd",
        "/static/%2e%2e/pyproject.toml",
        "/static/..%2fpyproject.toml",
        "/static/%2e%2e%2f%2e%2e%2fpyproject.toml",
        "/static//etc/passwd",
        "/static/%2fetc%2fpasswd",
        "/vendor/../pyproject.toml",
        "/api/designs/../../pyproject.toml",
        "/api/designs/%2e%2e%2f%2e%2e%2fpyproject.toml",
        "/api/designs//etc/passwd",
        "/api/designs/%2fetc%2fpasswd",
    ],
)
def test_traversal_on_the_wire_is_404(live_server, path):
    status, body = _raw_get(live_server, path)
    assert status == 404, (path, body[:200])
    assert b"[build-system]" not in body and b"root:" not in body


# --- 5. imports: capped, format-checked, nothing written ------------------------------------


def test_import_over_the_cap_is_refused_with_the_cap(client, sample):
    sample["name"] = "n" * MAX_BODY_BYTES
    r = client.post("/api/import", json=sample)
    assert r.status_code == 413
    assert str(MAX_BODY_BYTES) in r.json()["message"]


@pytest.mark.parametrize(
    "body",
    [b"", b"null", b"[]", b'"a design"', b"{nope", b'{"format": "ringwise.design"}', b"<svg/>"],
)
def test_import_of_what_is_not_a_design_file_says_why(client, body):
    r = client.post("/api/import", content=body, headers={"content-type": "application/json"})
    # what is not JSON at all is 400 (saying where parsing stopped), the rest 422
    assert r.status_code == (400 if body in (b"{nope", b"<svg/>") else 422)
    _error_shape(r.json())
    assert r.json()["message"]


def test_the_server_writes_nothing(client, sample, tmp_path, monkeypatch):
    cwd, tmp = tmp_path / "cwd", tmp_path / "tmp"
    cwd.mkdir()
    tmp.mkdir()
    monkeypatch.chdir(cwd)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp))
    for var in ("TMPDIR", "TEMP", "TMP"):
        monkeypatch.setenv(var, str(tmp))
    samples_before = {p.name: p.read_bytes() for p in SAMPLES_DIR.glob("*.json")}
    writes: list[str] = []
    real_open, real_os_open = builtins.open, os.open

    def spy_open(file, mode="r", *args, **kwargs):
        if any(c in mode for c in "wax+"):
            writes.append(f"open({file!r}, {mode!r})")
        return real_open(file, mode, *args, **kwargs)

    def spy_os_open(path, flags, *args, **kwargs):
        if flags & (os.O_WRONLY | os.O_RDWR | os.O_CREAT):
            writes.append(f"os.open({path!r})")
        return real_os_open(path, flags, *args, **kwargs)

    monkeypatch.setattr(builtins, "open", spy_open)
    monkeypatch.setattr(io, "open", spy_open)
    monkeypatch.setattr(os, "open", spy_os_open)
    sample["name"] = NAME
    imported = client.post("/api/import", json=sample)
    assert imported.status_code == 200
    exported = client.get("/api/export?" + imported.json()["query"])
    assert exported.status_code == 200
    client.post("/api/import", json={"format": "other"})
    client.post("/api/import", content=b"x" * (MAX_BODY_BYTES + 1))
    client.get("/?" + imported.json()["query"])
    monkeypatch.undo()
    assert writes == []
    assert list(cwd.iterdir()) == [] and list(tmp.iterdir()) == []
    assert {p.name: p.read_bytes() for p in SAMPLES_DIR.glob("*.json")} == samples_before


# --- 5. markup from a link or a file is text in every page and file -----------------------


def _link(**fields: str) -> str:
    return urlencode({"design": "clapp-clock-1M", **fields}, quote_via=quote)


def test_markup_in_a_link_is_escaped_in_the_pages(client):
    query = _link(name=NAME, C2=PAYLOADS[1], R_load=PAYLOADS[2])
    query += "&" + quote(PAYLOADS[0]) + "=1"  # an unknown parameter named with markup
    for page in ("/", "/summary"):
        html = client.get(f"{page}?{query}").text
        for payload in (*PAYLOADS[:3], NAME):
            assert payload not in html, (page, payload)
        assert "&lt;script&gt;window.__pwned=1&lt;/script&gt;" in html, page
        assert "<img src=x" not in html and "<svg onload" not in html, page
        # the only scripts are the app's own files and inert JSON data blocks
        assert html.count("<script") == html.count('<script type="application/json"') + (
            html.count("<script src=") + html.count('<script type="module" src=')
        )


def test_markup_is_kept_as_typed_in_the_data(client):
    query = _link(name=NAME, C2=PAYLOADS[1])
    view = client.get(f"/sheet.json?{query}").json()
    assert view["fields"]["name"]["text"] == NAME
    assert view["fields"]["C2"]["text"] == PAYLOADS[1]
    assert view["fields"]["C2"]["error"]  # not a capacitance, said beside the field


def test_markup_in_the_name_is_plain_json_in_the_exported_file(client):
    r = client.get("/api/export?" + _link(name=NAME))
    assert r.status_code == 200
    assert r.headers["content-type"] == "application/json"
    assert r.headers["x-content-type-options"] == "nosniff"
    disposition = r.headers["content-disposition"]
    filename = disposition.split("filename=", 1)[1]
    assert filename.startswith('"ringwise-') and filename.endswith('.json"')
    assert all(c.isalnum() or c in '-."' for c in filename), filename
    assert r.json()["name"] == NAME
