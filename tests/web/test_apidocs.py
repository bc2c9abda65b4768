"""/docs served locally, readable operation ids, tags by route, sample examples, gzip."""

from __future__ import annotations

import re
from typing import Any

import pytest

from ringwise.design import Design
from ringwise.web.apidocs import TAGS, tag_of
from ringwise.web.samples import samples


@pytest.fixture(scope="module")
def spec(client) -> dict[str, Any]:
    return client.get("/openapi.json").json()


def _operations(spec: dict[str, Any]):
    for path, operations in spec["paths"].items():
        for method, operation in operations.items():
            yield path, method, operation


def test_operation_ids_are_readable_and_unique(spec) -> None:
    ids = [op["operationId"] for _p, _m, op in _operations(spec)]
    assert len(ids) == len(set(ids))
    for path, method, op in _operations(spec):
        # no generated path-and-method suffix such as post_analyze_api_analyze_post
        assert not op["operationId"].endswith(f"_{method}"), op["operationId"]
        assert re.fullmatch(r"[a-z][a-z_]*", op["operationId"]), path
    assert spec["paths"]["/api/analyze"]["post"]["operationId"] == "post_analyze"


def test_each_route_has_one_tag_matching_its_path(spec) -> None:
    for path, _method, op in _operations(spec):
        assert op["tags"] == [tag_of(path)]
    tags = {op["tags"][0] for p, _m, op in _operations(spec)}
    assert {"standard values", "synthesis", "bench readings", "tolerances"} <= tags
    snap = spec["paths"]["/api/snap"]["post"]["tags"]
    assert snap == ["standard values"]
    assert {t["name"] for t in spec["tags"]} == {t for _p, t, _d in TAGS}


def test_design_examples_are_the_samples(spec) -> None:
    examples = spec["components"]["schemas"]["Design"]["examples"]
    assert [Design.model_validate(e).name for e in examples] == [
        s.document["name"] for s in samples().values()
    ]


def test_docs_page_and_its_assets_are_local(client) -> None:
    page = client.get("/docs")
    assert page.status_code == 200
    sources = re.findall(r'(?:src|href)="([^"]+)"', page.text)
    assert sources and all(s.startswith("/") for s in sources)  # nothing from another host
    for url in sources:
        if url.startswith("/vendor/") or url.startswith("/static/"):
            asset = client.get(url)
            assert asset.status_code == 200, url
    assert "<script>" not in page.text  # no inline script: the CSP stays as strict


def test_text_assets_are_gzipped(client) -> None:
    docs, sheet = client.get("/docs").text, client.get("/").text
    urls = [
        re.search(r'src="(/vendor/swagger-ui-[^"]+\.js)"', docs).group(1),
        re.search(r'src="(/vendor/plotly-[^"]+\.js)"', sheet).group(1),
        re.search(r'src="(/static/sheet\.js\?v=[0-9a-f]+)"', sheet).group(1),
    ]
    for url in urls:
        answer = client.get(url, headers={"Accept-Encoding": "gzip"})
        assert answer.status_code == 200
        assert answer.headers["content-encoding"] == "gzip", url
        assert "immutable" in answer.headers["cache-control"], url
    plain = client.get(urls[2], headers={"Accept-Encoding": "identity"})
    assert "content-encoding" not in plain.headers


@pytest.mark.browser
def test_docs_render_offline_under_the_csp(context, live_server) -> None:
    page = context.new_page()
    violations: list[str] = []
    errors: list[str] = []
    outside: list[str] = []
    page.add_init_script(
        "window.__csp = []; document.addEventListener('securitypolicyviolation',"
        " e => window.__csp.push(e.violatedDirective + ' ' + e.blockedURI));"
    )
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on(
        "request",
        lambda r: outside.append(r.url) if not r.url.startswith(live_server) else None,
    )
    page.goto(f"{live_server}/docs")
    page.wait_for_selector(".opblock-summary-path", timeout=60_000)
    paths = page.locator(".opblock-summary-path").all_inner_texts()
    assert any("/api/analyze" in p for p in paths)
    violations = page.evaluate("window.__csp")
    assert violations == [] and errors == []
    assert [u for u in outside if not u.startswith("data:")] == []
