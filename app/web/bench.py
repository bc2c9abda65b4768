"""Speed figures of the web layer, for ``make bench`` (printed, never asserted).

:func:`bench_web` measures

- the median server time of ``POST /api/analyze`` over the sample designs
  (in process, FastAPI's TestClient; target 10 ms), and
- when Chromium is installed, the median time in headless Chromium from an
  input change to the indicator and plots redrawn, over 20 edits, measured in
  the page with ``performance.now()`` up to the sheet's ``ringwise:rendered``
  event (indicator, figures, schematic, loop, reactance and budget plots) and
  ``ringwise:swept`` (the what-if plot, fetched after); target 150 ms.  The
  figure includes the sheet's input debounce.
"""

from __future__ import annotations

import json
import shutil
import statistics
import tempfile
import threading
import time
from typing import Any, Final

from ringwise.web.paths import SAMPLES_DIR

ANALYZE_TARGET_S: Final = 0.010
EDIT_TARGET_S: Final = 0.150
ANALYZE_REPEATS: Final = 10
EDITS: Final = 20
#: The input debounce of static/sheet.js (DEBOUNCE_MS there), included in the edit times.
SHEET_DEBOUNCE_S: Final = 0.060
#: C2 values the edits cycle through (all valid for the 1 MHz sample).
#: C2 values typed in turn; every edit is a design not seen before, so the
#: server's memory of recent analyses does not flatter the figure.
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
  el.dispatchEvent(new Event("input", { bubbles: true }));
  const a = await rendered;
  const b = await swept;
  return [a.at - t0, b.at - t0];
}"""


def _api_median() -> float:
    from fastapi.testclient import TestClient

    from ringwise.analysis.analyze import forget
    from ringwise.web.server import create_app

    docs = [json.loads(p.read_text(encoding="utf-8")) for p in sorted(SAMPLES_DIR.glob("*.json"))]
    times = []
    with TestClient(create_app()) as client:
        for doc in docs:
            client.post("/api/analyze", json=doc)  # warm up
            for _ in range(ANALYZE_REPEATS):
                forget()  # measure the analysis, not the memory of it
                t0 = time.perf_counter()
                client.post("/api/analyze", json=doc).raise_for_status()
                times.append(time.perf_counter() - t0)
    return statistics.median(times)


def _browser_medians() -> tuple[float, float]:
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
            )
            page = ctx.new_page()
            page.goto(f"http://127.0.0.1:{port}/?design=clapp-clock-1M")
            page.wait_for_selector("html[data-ready='1']")
            page.evaluate(_EDIT_JS, "2n2")  # warm up
            pairs = [
                page.evaluate(_EDIT_JS, EDIT_VALUES[i % len(EDIT_VALUES)]) for i in range(EDITS)
            ]
            ctx.close()
    finally:
        server.should_exit = True
        thread.join(timeout=5)
    return (
        statistics.median(a for a, _ in pairs) / 1e3,
        statistics.median(b for _, b in pairs) / 1e3,
    )


def bench_web() -> dict[str, Any]:
    """Median times in seconds, with their targets (see the module docstring)."""
    figures: dict[str, Any] = {
        "api_analyze_median_s": _api_median(),
        "api_analyze_target_s": ANALYZE_TARGET_S,
        "edit_target_s": EDIT_TARGET_S,
        "edit_debounce_s": SHEET_DEBOUNCE_S,
    }
    if shutil.which("chromium") is None:
        figures["browser"] = "skipped: apt-get install chromium poppler-utils"
        return figures
    rendered, swept = _browser_medians()
    figures["browser"] = "headless chromium"
    figures["edit_to_indicator_and_plots_median_s"] = rendered
    figures["edit_to_what_if_plot_median_s"] = swept
    return figures


if __name__ == "__main__":  # pragma: no cover
    for key, value in bench_web().items():
        print(
            f"{key:<40} {value * 1e3:8.1f} ms" if isinstance(value, float) else f"{key:<40} {value}"
        )
