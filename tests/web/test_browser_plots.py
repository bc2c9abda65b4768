"""The plots in Chromium: tick labels never overlap and stay inside their plot at
1024, 1440 and 1920 px, and the main plots take at least half the content width
on a wide screen.  Tick-label boxes are measured in the page."""

from __future__ import annotations

import pytest

pytestmark = pytest.mark.browser

READY = "html[data-ready='1']"
WIDTHS = (1024, 1440, 1920)
PLOTS = ("#plot-loop", "#plot-sweep", "#plot-reactance", "#plot-budget", "#plot-noise")
MAIN_PLOTS = ("#plot-loop", "#plot-sweep")

_BOXES = """el => {
  const boxes = [];
  for (const t of el.querySelectorAll('g.xtick text, g.ytick text, g.y2tick text')) {
    const r = t.getBoundingClientRect();
    if (r.width > 0 && t.textContent.trim())
      boxes.push({text: t.textContent, x: r.left, y: r.top, w: r.width, h: r.height});
  }
  const o = el.getBoundingClientRect();
  return {boxes, plot: {x: o.left, y: o.top, w: o.width, h: o.height}};
}"""


def _overlap(a: dict, b: dict) -> float:
    w = min(a["x"] + a["w"], b["x"] + b["w"]) - max(a["x"], b["x"])
    h = min(a["y"] + a["h"], b["y"] + b["h"]) - max(a["y"], b["y"])
    return max(w, 0.0) * max(h, 0.0)


@pytest.mark.parametrize("width", WIDTHS)
@pytest.mark.parametrize("design", ["clapp-clock-1M", "proximity-exciter-150k"])
def test_tick_labels_never_overlap(context, live_server, artifacts, width, design):
    page = context.new_page()
    page.set_viewport_size({"width": width, "height": 1000})
    page.goto(f"{live_server}/?design={design}")
    page.wait_for_selector(READY)
    for sel in PLOTS:
        page.locator(sel).scroll_into_view_if_needed()
        page.wait_for_selector(f"{sel} .main-svg")
    page.wait_for_selector("#plot-sweep g.xtick text")
    for sel in PLOTS:
        got = page.eval_on_selector(sel, _BOXES)
        boxes, plot = got["boxes"], got["plot"]
        assert len(boxes) >= 4, sel
        for i, a in enumerate(boxes):
            # inside the plot's own box (not cut off at its edge), 1 px of slack
            assert plot["x"] - 1 <= a["x"] and a["x"] + a["w"] <= plot["x"] + plot["w"] + 1, (
                sel,
                a,
            )
            for b in boxes[i + 1 :]:
                assert _overlap(a, b) < 1.0, (sel, width, a["text"], b["text"])
    if width >= 1440:
        content = page.eval_on_selector(
            ".sheet",
            "el => el.clientWidth - parseFloat(getComputedStyle(el).paddingLeft)"
            " - parseFloat(getComputedStyle(el).paddingRight)",
        )
        for sel in MAIN_PLOTS:
            assert page.eval_on_selector(sel, "el => el.clientWidth") >= content / 2 - 1, sel
    if design == "clapp-clock-1M":
        page.screenshot(path=str(artifacts / f"sheet-{width}.png"), full_page=True)
    page.close()


_BAR_TEXTS = """el => {
  const box = (t) => {
    const r = t.getBoundingClientRect();
    return {text: t.textContent, x: r.left, y: r.top, w: r.width, h: r.height};
  };
  const shown = (sel) => [...el.querySelectorAll(sel)].filter((t) => t.textContent.trim());
  const texts = shown('.bartext, .annotation-text').map(box);
  const labels = shown('g.ytick text').map(box);
  const o = el.getBoundingClientRect();
  return {texts, labels, plot: {x: o.left, w: o.width}, bars: el.data[0].x.length};
}"""


@pytest.mark.parametrize(
    "design",
    [
        "clapp-clock-1M",
        "common-base-carrier-10M",
        "crystal-clock-10M",
        "follower-test-source-4M",
        "proximity-exciter-150k",
    ],
)
def test_budget_values_are_printed_whole(context, live_server, artifacts, design):
    # every bar's value text inside the plot and clear of the category labels, at
    # every width (a negative bar's text sits right of zero, not over its label)
    page = context.new_page()
    page.goto(f"{live_server}/?design={design}")
    page.wait_for_selector(READY)
    for width in WIDTHS:
        page.set_viewport_size({"width": width, "height": 1000})
        page.locator("#plot-budget").scroll_into_view_if_needed()
        page.wait_for_selector("#plot-budget .main-svg")
        page.wait_for_function(
            "w => { const el = document.querySelector('#plot-budget');"
            " return el._fullLayout && Math.abs(el._fullLayout.width - el.clientWidth) < 2; }",
            arg=width,
        )
        got = page.eval_on_selector("#plot-budget", _BAR_TEXTS)
        plot = got["plot"]
        assert len(got["texts"]) == got["bars"], (design, width)
        for t in got["texts"]:
            assert plot["x"] - 1 <= t["x"] and t["x"] + t["w"] <= plot["x"] + plot["w"] + 1, (
                design,
                width,
                t,
            )
            for label in got["labels"]:
                assert _overlap(t, label) < 1.0, (design, width, t["text"], label["text"])
        page.locator("#plot-budget").screenshot(
            path=str(artifacts / f"budget-{design}-{width}.png")
        )
    page.close()
