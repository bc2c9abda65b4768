"""Speed figures of the web layer, for ``make bench`` (printed, never asserted).

:func:`bench_web` measures

- the median server time of ``POST /api/analyze`` over the sample designs
  (in process, FastAPI's TestClient; target 10 ms), and
- when Chromium is installed, in headless Chromium at 1440 × 1200 px
  (the verdict and the loop, what-if and reactance plots on screen):

  - **edit**: the median time from a committed edit of C2 (its ``change``
    event, as when the user presses Enter or leaves the field) to the
    verdict, the figures and every visible plot redrawn (the sheet's
    ``ringwise:rendered`` event, fired once the plots are drawn), over
    :data:`EDITS` edits; target 150 ms, aim 100 ms;
  - **what-if**: from the same edit to the what-if plot redrawn
    (``ringwise:swept``); target 250 ms;
  - **drag**: :data:`DRAG_STEPS` steps of the RC slider, one every
    :data:`DRAG_STEP_MS` ms; the longest task that blocked the page meanwhile
    (Chromium's Long Tasks API reports every task over 50 ms; none means
    none was), and the time from the last step to the sheet showing it.

Every edit is a design not seen before, so the server's memory of recent
analyses does not flatter the figures.  On a shared machine the figures are
noisy: read them with the load in mind.
"""

from __future__ import annotations

import json
import shutil
import statistics
import tempfile
import threading
import time
from typing import Final

from ringwise.web.paths import SAMPLES_DIR

ANALYZE_TARGET_S: Final = 0.010
EDIT_TARGET_S: Final = 0.150
EDIT_AIM_S: Final = 0.100
WHAT_IF_TARGET_S: Final = 0.250
#: The longest a slider drag may block the page at a time, s.
BLOCK_TARGET_S: Final = 0.050
ANALYZE_REPEATS: Final = 10
EDITS: Final = 20
DRAG_STEPS: Final = 40
DRAG_STEP_MS: Final = 30
VIEWPORT: Final = {"width": 1440, "height": 1200}
#: C2 values typed in turn; every edit is a design not seen before.
EDIT_VALUES: Final = tuple(f"{4.0 + 0.05 * i:.2f}n" for i in range(40))
CHROMIUM_ARGS: Final = (
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
)

_EDIT_JS: Final = """async (text) => {
  const el = document.querySelector("[name='C2']");
  const wait = (name) => new Promise((resolve) =>
    document.addEventListener(name, (e) => resolve(e.detail), { once: true }));
  const rendered = wait("ringwise:rendered");
  const swept = wait("ringwise:swept");
  const t0 = performance.now();
  el.value = text;
  el.dispatchEvent(new Event("change", { bubbles: true }));
  const a = await rendered;
  const b = await swept;
  return [a.at - t0, b.at - t0];
}"""

_DRAG_JS: Final = """async ([steps, every]) => {
  const slider = document.querySelector("[data-ladder='RC']");
  const longest = [];
  const watch = new PerformanceObserver((list) => {
    for (const e of list.getEntries()) longest.push(e.duration);
  });
  watch.observe({ type: "longtask" });
  const start = Number(slider.value);
  const top = Number(slider.max);
  let last = 0;
  for (let i = 1; i <= steps; i++) {
    slider.value = String((start + i) % (top + 1));
    slider.dispatchEvent(new Event("input", { bubbles: true }));
    last = performance.now();
    await new Promise((r) => setTimeout(r, every));
  }
  const want = document.querySelector("[name='RC']").value;
  await new Promise((resolve) => {
    document.addEventListener("ringwise:rendered", function on(e) {
      if (new URLSearchParams(e.detail.query).get("RC") !== want) return;
      document.removeEventListener("ringwise:rendered", on);
      resolve();
    });
  });
  const settled = performance.now() - last;
  await new Promise((r) => setTimeout(r, 200));
  watch.disconnect();
  return { longest: longest.length ? Math.max(...longest) : 0, over: longest.length, settled };
}"""


def _api_median() -> float:
    from fastapi.testclient import TestClient

    from ringwise.analysis.analyze import forget
    from ringwise.web.server import create_app

    docs = [json.loads(p.read_text(encoding="utf-8")) for p in sorted(SAMPLES_DIR.glob("*.json"))]
    times = []
    with TestClient(create_app(), base_url="http://127.0.0.1") as client:
        for doc in docs:
            client.post("/api/analyze", json=doc)  # warm up
            for _ in range(ANALYZE_REPEATS):
                forget()  # measure the analysis, not the memory of it
                t0 = time.perf_counter()
                client.post("/api/analyze", json=doc).raise_for_status()
                times.append(time.perf_counter() - t0)
    return statistics.median(times)


def _browser() -> dict[str, float]:
    import socket

    import uvicorn
    from playwright.sync_api import sync_playwright

    from ringwise.web.server import create_app

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server = uvicorn.Server(
        uvicorn.Config(create_app(), host="127.0.0.1", port=port, log_level="warning")
    )
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    while not server.started:
        time.sleep(0.02)
    try:
        with tempfile.TemporaryDirectory() as profile, sync_playwright() as p:
            ctx = p.chromium.launch_persistent_context(
                profile,
                executable_path=shutil.which("chromium"),
                headless=True,
                args=list(CHROMIUM_ARGS),
                viewport=VIEWPORT,
            )
            page = ctx.new_page()
            page.goto(f"http://127.0.0.1:{port}/?design=clapp-clock-1M")
            page.wait_for_selector("html[data-ready='1']")
            page.wait_for_selector("#plot-sweep .main-svg")
            page.evaluate(_EDIT_JS, "2n2")  # warm up
            pairs = [
                page.evaluate(_EDIT_JS, EDIT_VALUES[i % len(EDIT_VALUES)]) for i in range(EDITS)
            ]
            drag = page.evaluate(_DRAG_JS, [DRAG_STEPS, DRAG_STEP_MS])
            ctx.close()
    finally:
        server.should_exit = True
        thread.join(timeout=5)
    return {
        "edit": statistics.median(a for a, _ in pairs) / 1e3,
        "what_if": statistics.median(b for _, b in pairs) / 1e3,
        "longest_block": drag["longest"] / 1e3,
        "blocks_over_50ms": drag["over"],
        "drag_settled": drag["settled"] / 1e3,
    }


def _line(label: str, value: float, target: float, extra: str = "") -> str:
    return (
        f"  {label:<44} {value * 1e3:8.1f} ms  (target ≤ {target * 1e3:.0f} ms{extra})"
        f"  ratio {value / target:5.2f}"
    )


def bench_web() -> list[str]:
    """The web speed figures as printed lines (see the module docstring)."""
    lines = ["web layer:", _line("POST /api/analyze, median", _api_median(), ANALYZE_TARGET_S)]
    if shutil.which("chromium") is None:
        return [*lines, "  browser: skipped (apt-get install chromium)"]
    b = _browser()
    aim = f", aim {EDIT_AIM_S * 1e3:.0f} ms"
    return [
        *lines,
        "  headless Chromium, 1440 x 1200 px (noisy on a shared machine):",
        _line("edit -> verdict and visible plots, median", b["edit"], EDIT_TARGET_S, aim),
        _line("edit -> what-if plot, median", b["what_if"], WHAT_IF_TARGET_S),
        _line(
            f"slider drag ({DRAG_STEPS} steps): longest block",
            b["longest_block"],
            BLOCK_TARGET_S,
            f"; {b['blocks_over_50ms']} tasks over 50 ms",
        ),
        f"  {'slider drag: last step -> sheet shows it':<44} {b['drag_settled'] * 1e3:8.1f} ms",
    ]


if __name__ == "__main__":  # pragma: no cover
    for line in bench_web():
        print(line)
