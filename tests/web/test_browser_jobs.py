"""A long job on the sheet in a real Chromium (static/jobs.js): real progress, a
Stop button that keeps what was computed, and the partial answer shown as such."""

from __future__ import annotations

import pytest

from ringwise.analysis.spread import MAX_SAMPLES
from tests.web.test_browser import Sheet

pytestmark = pytest.mark.browser

#: A spread long enough to watch and stop: the most samples a spread takes, on the
#: design with the most corners (three temperatures by four tuning voltages), some
#: 15 s of work at full speed (the clock sample's 60 000 had become 2 s, short
#: enough to end before the Stop click on a quiet machine).
SAMPLES = MAX_SAMPLES
DESIGN = "varactor-lo-5M"
BAR = "[data-job='spread'] progress"


def _progress(sheet: Sheet) -> float:
    return sheet.page.eval_on_selector(BAR, "el => el.value")


def test_spread_shows_progress_and_stops_keeping_the_samples_done(context, live_server):
    sheet = Sheet(context, f"{live_server}/?design={DESIGN}")
    page = sheet.page
    page.fill("#spread-samples", str(SAMPLES))
    page.click("#spread-start")
    # the bar moves, as the server's job reports its samples done
    above = "([sel, v]) => document.querySelector(sel).value > v"
    page.wait_for_function(above, arg=[BAR, 0], timeout=60_000)
    first = _progress(sheet)
    page.wait_for_function(above, arg=[BAR, first], timeout=60_000)
    assert 0 < first < _progress(sheet) < 1
    words = page.text_content("[data-job='spread'] [data-role='job-text']")
    assert words.startswith("Running: ") and words.endswith(" % done")  # in words, not colour
    stop = page.locator("#spread-stop")
    assert stop.is_enabled() and stop.text_content() == "Stop"
    stop.click()
    page.wait_for_function(
        "(sel) => document.querySelector(sel).dataset.tool === 'stopped'",
        arg="[data-role='spread']",
        timeout=30_000,
    )
    panel = "[data-role='spread'] "
    done = int(sheet.attr(panel + "[data-field='spread.samples']"))
    assert 0 < done < SAMPLES
    note = page.locator(panel + "[data-field='spread.stopped']")
    assert note.is_visible()
    assert note.text_content().startswith(f"Stopped at {done} of {SAMPLES} samples")
    # the figures are there, of the samples done
    assert 0.0 <= float(sheet.attr(panel + "[data-field='spread.yield_start']")) <= 1.0
    assert page.text_content("#spread-status") == f"Stopped: {done} of {SAMPLES} samples"
    assert page.text_content("[data-job='spread'] [data-role='job-text']").startswith("Stopped at")
    assert stop.is_disabled()
    assert sheet.errors == []
