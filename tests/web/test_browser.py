"""The sheet in a real Chromium against the real server (static/sheet.js and the pages).

Expected figures come from the same server's API (the sheet must show exactly
what the API computes), never from numbers typed into the test.
"""

from __future__ import annotations

import json
import re
import subprocess
from pathlib import Path
from typing import Any
from urllib.parse import urlparse

import pytest

pytestmark = pytest.mark.browser

READY = "html[data-ready='1']"
VERDICT = "[data-field='startup.verdict']"
F_OSC = "[data-field='loop.f_osc']"
#: How long a finished page is watched for a late, stale answer, ms.
SETTLE_MS = 600


class Sheet:
    """A page of the sheet, with what it logged and every URL it requested."""

    def __init__(self, context: Any, url: str) -> None:
        self.page = context.new_page()
        self.errors: list[str] = []
        self.requests: list[str] = []
        self.page.on(
            "console", lambda m: m.type == "error" and self.errors.append(f"console: {m.text}")
        )
        self.page.on("pageerror", lambda e: self.errors.append(f"page: {e}"))
        self.page.on("request", lambda r: self.requests.append(r.url))
        self.page.goto(url)
        self.page.wait_for_selector(READY)

    def inputs(self) -> dict[str, str]:
        return self.page.eval_on_selector_all(
            "#design-form [name]", "els => Object.fromEntries(els.map(e => [e.name, e.value]))"
        )

    def figures(self) -> list[list[str]]:
        return self.page.eval_on_selector_all(
            ".outcome [data-field]",
            "els => els.map(e => [e.dataset.field, e.dataset.value || '', e.textContent.trim()])",
        )

    def attr(self, selector: str, name: str = "data-value") -> str:
        return self.page.get_attribute(selector, name) or ""


def expected(client, texts: dict[str, str]) -> dict[str, Any]:
    """What the sheet must show for these texts, from the API."""
    return client.post("/api/sheet", json={"fields": texts}).json()


def expected_steady(client, texts: dict[str, str]) -> dict[str, Any]:
    """What the sheet shows once the steady state has arrived, from the API."""
    return client.post("/api/sheet/steady", json={"fields": texts}).json()


def wait_for(sheet: Sheet, selector: str, value: str) -> None:
    sheet.page.wait_for_function(
        "([sel, v]) => document.querySelector(sel)?.dataset.value === v", arg=[selector, value]
    )


def settle(sheet: Sheet, client) -> None:
    """Wait until the page shows the API's answer for what its form now holds."""
    want = expected(client, sheet.inputs())
    if want["ok"]:
        wait_for(sheet, F_OSC, want["shown"]["loop.f_osc"]["raw"])
    sheet.page.wait_for_function(
        "s => document.querySelector('.outcome').dataset.state === s",
        arg="fresh" if want["ok"] else "stale",
    )


def test_page_loads_offline_without_errors(context, live_server, artifacts):
    sheet = Sheet(context, f"{live_server}/")
    sheet.page.wait_for_selector("#plot-sweep .main-svg")
    assert sheet.errors == []
    for url in sheet.requests:
        parsed = urlparse(url)
        assert parsed.scheme in ("data", "blob") or parsed.hostname == "127.0.0.1", url
    assert sheet.page.locator("#plot-loop .main-svg").count() > 0
    sheet.page.screenshot(path=str(artifacts / "sheet.png"), full_page=True)


def test_typing_c2_updates_f_osc_and_indicator(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    before = sheet.attr(F_OSC)
    sheet.page.fill("[name='C2']", "3n3")
    want = expected(client, sheet.inputs())
    wait_for(sheet, F_OSC, want["shown"]["loop.f_osc"]["raw"])
    assert sheet.attr(F_OSC) != before
    assert sheet.attr(VERDICT) == want["result"]["startup"]["verdict"]
    # the one verdict: the small-signal one first, then the steady state's
    full = expected_steady(client, sheet.inputs())
    wait_for(sheet, ".verdict", full["shown"]["verdict"]["raw"])
    assert (
        sheet.page.text_content("[data-role='verdict-label']") == full["shown"]["verdict"]["text"]
    )
    assert sheet.attr(".verdict", "data-icon") == full["result"]["verdict"]["icon"]
    assert sheet.page.text_content("[data-shown='C2']") == "3.3 nF"
    assert "C2=3n3" in sheet.page.url
    assert sheet.errors == []


def test_dragging_rc_below_threshold_stops_it(context, live_server):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    assert sheet.attr(VERDICT) == "will-start"
    threshold = float(sheet.attr("[data-field='startup.threshold_value']"))
    slider = sheet.page.locator("[data-ladder='RC']")
    box = slider.bounding_box()
    fraction = int(slider.input_value()) / int(slider.get_attribute("max"))
    y = box["y"] + box["height"] / 2
    sheet.page.mouse.move(box["x"] + fraction * box["width"], y)
    sheet.page.mouse.down()
    sheet.page.mouse.move(box["x"] + 2, y, steps=8)
    sheet.page.mouse.up()
    # the drag passes through several steps; wait for the answer to the last one
    sheet.page.locator("[data-shown='RC']").filter(has_text=re.compile(r"^1 Ω$")).wait_for()
    wait_for(sheet, VERDICT, "will-not-start")
    assert "will not start" in sheet.page.text_content("[data-role='verdict-label']").lower()
    # dragged to the slider's left end: its first E24 step, 1 Ω, far below the threshold
    assert sheet.page.input_value("[name='RC']") == "1"
    assert threshold > 1.0
    assert sheet.errors == []


_WATCH_SHEET_REQUESTS = """() => {
  window.__sheet = { open: 0, most: 0, sent: 0, aborted: 0 };
  const send = window.fetch;
  window.fetch = async (url, options) => {
    if (url !== "/api/sheet") return send(url, options);
    const w = window.__sheet;
    w.sent += 1; w.open += 1; w.most = Math.max(w.most, w.open);
    try {
      return await send(url, options);
    } catch (err) {
      if (err.name === "AbortError") w.aborted += 1;
      throw err;
    } finally { w.open -= 1; }
  };
}"""

_DRAG_STEPS = """async ([steps, every]) => {
  const slider = document.querySelector("[data-ladder='RC']");
  const start = Number(slider.value);
  for (let i = 1; i <= steps; i++) {
    slider.value = String(start - 1 - (i % 10));
    slider.dispatchEvent(new Event("input", { bubbles: true }));
    await new Promise((r) => setTimeout(r, every));
  }
}"""


def test_a_drag_keeps_one_request_open_and_ends_on_its_last_step(context, live_server, client):
    # the server finishes every request it gets, so a drag sends one at a time (the
    # newest texts when the last answers), never a pile of aborted ones; and the sheet
    # follows the slider during the drag, not only once it stops
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.evaluate(_WATCH_SHEET_REQUESTS)
    steps = 30
    sheet.page.evaluate(_DRAG_STEPS, [steps, 15])
    settle(sheet, client)
    watched = sheet.page.evaluate("() => window.__sheet")
    assert watched["most"] == 1 and watched["aborted"] == 0
    assert 2 <= watched["sent"] < steps
    want = expected(client, sheet.inputs())
    assert sheet.attr("[data-field='loop.gain']") == want["shown"]["loop.gain"]["raw"]
    assert sheet.errors == []


def settle_steady(sheet: Sheet, client) -> None:
    """Wait until the page shows the steady-state answer for what its form now holds."""
    settle(sheet, client)
    sheet.page.wait_for_function(
        "() => document.querySelector('.outcome').dataset.steady === 'done'"
    )


def test_plots_off_screen_come_with_the_steady_state(context, live_server, client):
    # an edit's first answer carries only the plots on screen; one off screen keeps
    # what it showed, dimmed, until the steady answer's figure is drawn on sight
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.wait_for_selector("#plot-sweep .main-svg")
    asked: list[dict] = []
    sheet.page.on(
        "request", lambda r: r.url.endswith("/api/sheet") and asked.append(r.post_data_json)
    )
    sheet.page.fill("[name='C2']", "3n3")
    sheet.page.press("[name='C2']", "Enter")
    settle_steady(sheet, client)
    assert [a["figures"] for a in asked] == [["loop"]]  # 1440 × 1000: the budget is below
    assert sheet.page.get_attribute("#plot-loop", "data-stale") is None
    assert sheet.page.get_attribute("#plot-reactance", "data-stale") == ""
    want = expected_steady(client, sheet.inputs())["figures"]
    assert (
        sheet.page.eval_on_selector("#plot-loop", "el => el.data[0].y")
        == (want["loop"]["data"][0]["y"])
    )
    sheet.page.locator("#plot-reactance").scroll_into_view_if_needed()
    sheet.page.wait_for_function(
        "() => !('stale' in document.querySelector('#plot-reactance').dataset)"
    )
    assert (
        sheet.page.eval_on_selector("#plot-reactance", "el => el.data[0].y")
        == (want["reactance"]["data"][0]["y"])
    )
    assert sheet.errors == []


def test_copied_link_restores_the_design(context, live_server, client):
    context.grant_permissions(["clipboard-read", "clipboard-write"], origin=live_server)
    sheet = Sheet(context, f"{live_server}/?design=common-base-carrier-10M")
    sheet.page.fill("[name='name']", "Bench unit #2 · 10 MHz <test> & µ")
    sheet.page.fill("[name='C2']", "1.2 nF")
    sheet.page.fill("[name='R_load']", "")
    settle_steady(sheet, client)
    sheet.page.click("#copy-link")
    sheet.page.wait_for_function("() => document.querySelector('#tool-status').textContent !== ''")
    link = sheet.page.evaluate("navigator.clipboard.readText()")
    assert link == sheet.page.input_value("#share-url")
    first_inputs, first_figures = sheet.inputs(), sheet.figures()
    sheet.page.close()
    again = Sheet(context, link)  # a fresh page, opened on the copied link alone
    assert again.inputs() == first_inputs
    assert again.figures() == first_figures
    assert again.errors == []


def test_stale_answers_never_overwrite_newer_ones(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    for text in ("1n5", "2n2", "3n3", "6n8", "4n7", "10n"):
        sheet.page.fill("[name='C2']", text)
        sheet.page.wait_for_timeout(70)  # past the debounce: requests overlap in flight
    want = expected(client, sheet.inputs())["shown"]["loop.f_osc"]["raw"]
    wait_for(sheet, F_OSC, want)
    sheet.page.wait_for_timeout(SETTLE_MS)
    assert sheet.attr(F_OSC) == want


def test_bad_input_keeps_the_text_and_says_why(context, live_server):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.fill("[name='L']", "47uF")
    error = sheet.page.locator("[data-error='L']")
    error.wait_for(state="visible")
    assert "takes 'H'" in error.text_content()
    assert sheet.page.input_value("[name='L']") == "47uF"
    assert sheet.page.get_attribute(".outcome", "data-state") == "stale"
    assert sheet.errors == []


def test_bad_link_parameters_are_reported(context, live_server):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M&colour=red&C2=1n&C2=2n")
    notice = sheet.page.locator("[data-role='link-problems']")
    assert notice.is_visible()
    assert "colour" in notice.text_content()
    assert "appears 2 times" in notice.text_content()
    assert sheet.errors == []


def _export(sheet: Sheet) -> bytes:
    with sheet.page.expect_download() as download:
        sheet.page.click("#export-link")
    return Path(download.value.path()).read_bytes()


def test_export_import_round_trip(context, live_server, client, tmp_path):
    source = Sheet(context, f"{live_server}/?design=follower-test-source-4M")
    source.page.fill("[name='C1']", "1.5n")
    source.page.fill("[name='name']", "Round trip")
    settle(source, client)
    exported = _export(source)
    doc = json.loads(exported)
    assert doc["format"] == "ringwise.design" and doc["version"] == 1
    assert doc["tank"]["C1"] == "1.5n"
    file = tmp_path / "design.json"
    file.write_bytes(exported)

    target = Sheet(context, f"{live_server}/?design=proximity-exciter-150k")
    target.page.set_input_files("#import-file", str(file))
    target.page.wait_for_function(
        "() => document.querySelector(\"[name='name']\").value === 'Round trip'"
    )
    settle(target, client)
    assert target.inputs() == source.inputs()
    assert target.figures() == source.figures()
    assert _export(target) == exported

    dropped = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    dropped.page.evaluate(
        """text => {
            const dt = new DataTransfer();
            dt.items.add(new File([text], "design.json", {type: "application/json"}));
            const init = {dataTransfer: dt, bubbles: true, cancelable: true};
            document.dispatchEvent(new DragEvent("drop", init));
        }""",
        exported.decode(),
    )
    dropped.page.wait_for_function(
        "() => document.querySelector(\"[name='name']\").value === 'Round trip'"
    )
    assert dropped.inputs() == source.inputs()
    assert source.errors == target.errors == dropped.errors == []


def test_import_of_a_bad_file_says_why_and_changes_nothing(context, live_server, tmp_path):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    before = sheet.inputs()
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"format": "ringwise.design", "version": 1, "tank": {"Lx": 1}}))
    sheet.page.set_input_files("#import-file", str(bad))
    notice = sheet.page.locator("[data-role='import-problems']")
    notice.wait_for(state="visible")
    assert "tank.Lx" in notice.text_content()
    not_json = tmp_path / "not.json"
    not_json.write_text("{nope")
    sheet.page.set_input_files("#import-file", str(not_json))
    notice.filter(has_text="not JSON").wait_for(state="visible")
    assert sheet.inputs() == before


def _pages(pdfinfo: str, pdf: bytes, tmp_path, name: str) -> int:
    path = tmp_path / name
    path.write_bytes(pdf)
    out = subprocess.run([pdfinfo, str(path)], capture_output=True, text=True, check=True).stdout
    return int(re.search(r"^Pages:\s+(\d+)", out, re.M).group(1))


@pytest.mark.parametrize(
    "query",
    [
        "design=clapp-clock-1M",
        "design=common-base-carrier-10M",
        "design=follower-test-source-4M",
        "design=proximity-exciter-150k",
        "design=crystal-clock-10M",
        "design=clapp-clock-1M&RC=10&name=" + "A long design name " * 8,  # will not start
    ],
)
def test_summary_prints_on_one_page(context, live_server, pdfinfo, tmp_path, artifacts, query):
    page = context.new_page()
    errors: list[str] = []
    page.on("console", lambda m: m.type == "error" and errors.append(m.text))
    page.goto(f"{live_server}/summary?{query}")
    page.wait_for_selector("html[data-ready='1']")
    # the loop-gain figure is drawn as a static plot (no mode bar, no hover)
    assert page.locator("[data-figure='loop'] .main-svg").count() > 0
    assert page.locator("[data-figure='loop'] .modebar").count() == 0
    # the printed link is the page's own origin and the design's query
    assert page.text_content(".sum-link a").startswith(f"{live_server}/?")
    for paper in ("A4", "Letter"):
        pdf = page.pdf(format=paper, print_background=True)
        assert _pages(pdfinfo, pdf, tmp_path, f"summary-{paper}.pdf") == 1, paper
    if query == "design=clapp-clock-1M":
        page.screenshot(path=str(artifacts / "summary.png"), full_page=True)
        (artifacts / "summary-A4.pdf").write_bytes(page.pdf(format="A4", print_background=True))
    assert errors == []


#: static/sheet.js's TYPING_PAUSE_MS: typing recomputes only after this long a pause.
TYPING_PAUSE_MS = 450
_LOG_TYPING = """() => {
  window.__typed = [];
  const log = (kind, value) => __typed.push([kind, value, performance.now()]);
  document.addEventListener("input", (e) => log("input", e.target.value), true);
  const send = window.fetch;
  window.fetch = (url, options) => {
    if (url === "/api/sheet") log("sent", JSON.parse(options.body).fields.RC);
    return send(url, options);
  };
}"""


def test_typing_never_computes_a_half_typed_value(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.evaluate(_LOG_TYPING)
    field = sheet.page.locator("[name='RC']")
    field.fill("")
    field.press_sequentially("262", delay=120)  # a person typing, keys 120 ms apart
    field.press("Enter")
    settle(sheet, client)
    log = sheet.page.evaluate("__typed")
    inputs = [(v, t) for kind, v, t in log if kind == "input"]
    sent = [v for kind, v, _ in log if kind == "sent"]
    assert sent and sent[-1] == "262"
    for value in sent:
        # a value is computed only once the user paused on it (on a loaded machine the
        # keys may come slower than typed): never one typing went on from at once
        times = [t for v, t in inputs if v == value]
        later = [t for _, t in inputs if times and t > times[-1]]
        assert not later or later[0] - times[-1] >= TYPING_PAUSE_MS, (value, log)
    want = expected(client, sheet.inputs())["fields"]["RC"]["display"]
    assert sheet.page.text_content("[data-shown='RC']") == want  # 262 Ω, from the API
    assert sheet.errors == []


def test_link_carries_the_what_if_choice_and_the_panels_inputs(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.select_option("#sweep-param", "RB2")
    sheet.page.fill("#spread-samples", "5000")
    sheet.page.fill("#bench-f", "1.012M")
    sheet.page.select_option("#snap-series", "E12")
    link = sheet.page.input_value("#share-url")
    assert urlparse(link).netloc == urlparse(live_server).netloc  # the page's own origin
    for part in ("what_if=RB2", "spread_samples=5000", "bench_f=1.012M", "snap_series=E12"):
        assert part in link, part
    assert "run_cycles" not in link  # left as it was: not in the link
    again = Sheet(context, link)
    assert again.page.input_value("#sweep-param") == "RB2"
    assert again.page.input_value("#spread-samples") == "5000"
    assert again.page.input_value("#bench-f") == "1.012M"
    assert again.page.input_value("#snap-series") == "E12"
    assert again.page.locator("[data-role='link-problems']").is_hidden()
    assert again.errors == []
