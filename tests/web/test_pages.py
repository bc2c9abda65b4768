"""The pages (app/web/routers/pages.py): sheet, summary and their JSON twins."""

from __future__ import annotations

import json
import re
import time
from html import unescape

import pytest

from ringwise.web.fields import FIELDS
from ringwise.web.view import SHOWN


def _attr(html: str, selector_attr: str, value: str, attr: str) -> str:
    m = re.search(rf'<[^>]*{selector_attr}="{re.escape(value)}"[^>]*>', html)
    assert m, f"no element with {selector_attr}={value}"
    found = re.search(rf'{attr}="([^"]*)"', m.group(0))
    return unescape(found.group(1)) if found else ""


def test_sheet_opens_on_a_sample(client):
    r = client.get("/")
    assert r.status_code == 200
    html = r.text
    for f in FIELDS:
        assert f'name="{f.name}"' in html
    for path, *_ in SHOWN:
        assert f'data-field="{path}"' in html
    assert _attr(html, "data-field", "startup.verdict", "data-value") == "will-start"
    f_osc = float(_attr(html, "data-field", "loop.f_osc", "data-value"))
    assert 0.9e6 < f_osc < 1.1e6  # the 1 MHz Clapp sample


def test_sheet_has_the_cautions(client):
    html = client.get("/").text
    assert "estimate" in html and "radio regulations" in html and "licensed practice" in html


def test_link_restores_the_typed_text(client):
    html = client.get("/?design=clapp-clock-1M&C2=4.7%20nF&name=Bench%20%3Cb%3E").text
    assert _attr(html, "name", "C2", "value") == "4.7 nF"
    assert 'value="Bench &lt;b&gt;"' in html  # autoescaped, never raw markup
    assert "<b>" not in html.split("<body", 1)[1].split('id="ringwise-view"')[0]


def test_bad_link_is_reported_on_the_page(client):
    html = client.get("/?design=clapp-clock-1M&L=abc&colour=red").text
    assert "colour" in html and "is not a design field" in html
    assert _attr(html, "name", "L", "value") == "abc"
    assert "&#39;abc&#39; is not a number" in html


def test_unknown_topology_is_kept_and_reported(client):
    html = client.get("/?design=clapp-clock-1M&topology=sideways").text
    assert '<option value="sideways" selected>sideways (not known)</option>' in html
    view = client.get("/sheet.json?design=clapp-clock-1M&topology=sideways").json()
    assert view["ok"] is False
    assert view["fields"]["topology"]["error"].startswith("must be one of")


@pytest.mark.parametrize("page", ["/sheet.json", "/summary.json"])
def test_json_twins(client, page):
    view = client.get(f"{page}?design=common-base-carrier-10M").json()
    assert view["ok"] is True
    assert view["result"]["topology"] == "common-base"
    assert view["sweep_param"] == "RC"
    assert view["figures"]["sweep"]["layout"]["xaxis"]["title"]["text"] == "RC (Ω)"


def test_summary(client):
    r = client.get("/summary?design=follower-test-source-4M")
    assert r.status_code == 200
    html = r.text
    assert "Emitter-follower test source, 4 MHz" in html
    # the loop-gain figure is the sheet's own, handed over as data and drawn static
    block = html.split('<script type="application/json" id="ringwise-figures">')[1]
    figures = json.loads(block.split("</script>")[0])
    sheet = client.get("/sheet.json?design=follower-test-source-4M").json()
    assert figures["loop"] == sheet["figures"]["loop"]
    assert 'data-figure="loop"' in html
    for word in ("Parts", "Warnings", "Assumptions", "Cautions", "radio regulations"):
        assert word in html


def test_summary_lists_the_spread_assumptions_and_a_finished_run(client):
    query = "design=clapp-clock-1M"
    html = client.get(f"/summary?{query}").text
    assert "Assumed: resistors ± 1 %" in html and "β 3:1 range" in html
    assert "Time-domain run" not in html
    design = client.get(f"/sheet.json?{query}").json()["design"]
    job = client.post("/api/simulate/jobs", json={"design": design, "cycles": 40}).json()
    for _ in range(600):
        state = client.get(f"/api/simulate/jobs/{job['id']}").json()
        if state["state"] not in ("queued", "running"):
            break
        time.sleep(0.05)
    assert state["state"] == "done"
    html = client.get(f"/summary?{query}&run={job['id']}").text
    assert "Time-domain run (40 cycles" in html
    assert f'data-value="{state["result"]["transient"]["f_meas"]!r}"' in html
    # a run of another design is not shown beside this one
    other = client.get(f"/summary?design=clapp-clock-1M&C2=5n6&run={job['id']}").text
    assert "Time-domain run" not in other


def test_summary_opens_on_the_what_if_choice_of_the_link(client):
    view = client.get("/sheet.json?design=clapp-clock-1M&what_if=RB2").json()
    assert view["sweep_param"] == "RB2" and view["link_problems"] == []


def test_summary_of_an_invalid_design_still_renders(client):
    r = client.get("/summary?design=clapp-clock-1M&L=")
    assert r.status_code == 200
    assert "tank.L" in r.text
