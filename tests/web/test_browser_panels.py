"""The swing, stability and time-domain panels of the sheet in a real Chromium.

Expected figures come from the same server's API, never from numbers typed
into the test.  Transient runs use few cycles to keep the suite fast.
"""

from __future__ import annotations

import pytest

from ringwise.analysis.transient import MIN_CYCLES
from ringwise.figures.curves import budget_bars
from ringwise.web.routers.simulate import SHEET_POINTS
from tests.web.test_browser import Sheet, expected, expected_steady, settle, wait_for

pytestmark = pytest.mark.browser

RUN = "[data-role='run']"
#: Cycles of the short runs (a 60-cycle run takes about 0.2 s of server time).
CYCLES = 60

#: Records the run panel's state and progress as they change, from before the click.
WATCH_RUN = """() => {
  window.runLog = [];
  const panel = document.querySelector("[data-role='run']");
  const bar = document.querySelector("#run-progress");
  const note = () => window.runLog.push([panel.dataset.run, bar.value]);
  new MutationObserver(note).observe(panel, { attributes: true, attributeFilter: ["data-run"] });
  new MutationObserver(note).observe(bar, { attributes: true, attributeFilter: ["value"] });
}"""


def _run_state(sheet: Sheet, state: str) -> None:
    sheet.page.wait_for_function(
        "s => document.querySelector(\"[data-role='run']\").dataset.run === s",
        arg=state,
        timeout=30_000,
    )


def test_stability_panel_shows_the_four_offsets(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    want = expected_steady(client, sheet.inputs())
    points = want["result"]["stability"]["phase_noise"]
    assert [p["offset"] for p in points] == [100.0, 1e3, 10e3, 100e3]
    for i in range(len(points)):
        path = f"stability.phase_noise.{i}.dBc_Hz"
        selector = f".stability-panel [data-field='{path}']"
        wait_for(sheet, selector, want["shown"][path]["raw"])
        assert sheet.attr(selector) == want["shown"][path]["raw"] == repr(points[i]["dBc_Hz"])
        assert sheet.page.text_content(selector) == want["shown"][path]["text"]
    for path in ("stability.Q_loaded", "stability.P_signal", "stability.pushing_Hz_per_V"):
        assert sheet.attr(f"[data-field='{path}']") == want["shown"][path]["raw"]
    rows = sheet.page.locator("[data-role='stress-rows'] tr")
    assert rows.count() == len(want["result"]["stability"]["parts"])
    note = sheet.page.text_content(".stability-panel")
    assert "Leeson's model, for comparison" in note
    assert "power the loaded resonator dissipates" in note
    # the computed phase noise: its points, its figures, its method and its sources
    st = want["result"]["stability"]
    for i in range(len(st["spectrum"])):
        path = f"stability.spectrum.{i}.dBc_Hz"
        wait_for(sheet, f".stability-panel [data-field='{path}']", want["shown"][path]["raw"])
    for path in ("stability.F_effective_dB", "stability.diffusion", "stability.flicker_corner"):
        assert sheet.attr(f".stability-panel [data-field='{path}']") == want["shown"][path]["raw"]
    assert sheet.page.text_content("[data-role='noise-method']") == st["method"]
    assert "perturbation projection vector" in st["method"]
    sources = sheet.page.locator("[data-role='source-rows'] tr")
    assert sources.count() == len(st["sources"]) > 5
    assert sources.nth(0).locator("th").text_content() == st["sources"][0]["name"]
    # the plot draws once it is on screen: computed curve, points and Leeson's beside it
    sheet.page.locator("#plot-noise").scroll_into_view_if_needed()
    sheet.page.wait_for_selector("#plot-noise .main-svg")
    assert sheet.page.locator("#plot-noise .shapelayer path").count() >= 3  # the regions
    legend = sheet.page.text_content("#plot-noise .legend")
    assert "from the circuit's noise sources" in legend and "(comparison)" in legend
    # live: a higher noise factor raises every offset's figure
    sheet.page.fill("[name='F_dB']", "12")
    settle(sheet, client)
    again = expected_steady(client, sheet.inputs())
    path = "stability.phase_noise.1.dBc_Hz"
    wait_for(sheet, f".stability-panel [data-field='{path}']", again["shown"][path]["raw"])
    assert float(again["shown"][path]["raw"]) > float(want["shown"][path]["raw"])
    assert sheet.errors == []


def test_steady_panel_shows_the_periodic_steady_state(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=common-base-carrier-10M")
    want = expected_steady(client, sheet.inputs())
    for path in (
        "steady_state.amp_out",
        "steady_state.amp_be",
        "steady_state.IC_avg",
        "steady_state.P_tank",
        "steady_state.VCE_min",
        "steady_state.thd",
        "steady_state.behaviour",
        "steady_state.output_node",
    ):
        wait_for(sheet, f".outcome [data-field='{path}']", want["shown"][path]["raw"])
        assert (
            sheet.page.text_content(f".outcome [data-field='{path}']")
            == (want["shown"][path]["text"])
        )
    assert "from DC" in sheet.page.text_content(".outcome [data-field='steady_state.IC_avg']")
    assert sheet.page.locator(".swing-note").is_hidden()
    # words and a symbol, never colour alone
    assert sheet.attr(".verdict", "data-icon") == "ok"
    assert sheet.attr(".verdict svg", "aria-label") == "ok"
    assert sheet.page.text_content("[data-role='verdict-label']") == "Starts and settles cleanly"
    assert sheet.errors == []


def test_small_signal_first_then_the_steady_state_and_an_edit_is_never_blocked(
    context, live_server, client
):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.evaluate(
        """() => { window.log = [];
        for (const e of ["ringwise:rendered", "ringwise:steady"])
          document.addEventListener(e, () => window.log.push(e)); }"""
    )
    # two edits in a row: the first's steady state is dropped, the second's arrives
    sheet.page.fill("[name='C2']", "3n3")
    sheet.page.fill("[name='C2']", "3n9")
    full = expected_steady(client, sheet.inputs())
    wait_for(
        sheet,
        ".outcome [data-field='steady_state.amp_out']",
        full["shown"]["steady_state.amp_out"]["raw"],
    )
    log = sheet.page.evaluate("window.log")
    assert log[-1] == "ringwise:steady" and "ringwise:rendered" in log
    assert log.index("ringwise:rendered") < log.index("ringwise:steady")
    assert sheet.attr(".outcome", "data-steady") == "done"
    assert sheet.errors == []


def test_run_shows_progress_then_plots_and_figures(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.evaluate(WATCH_RUN)
    sheet.page.fill("#run-cycles", str(CYCLES))
    sheet.page.click("#run-start")
    _run_state(sheet, "done")
    log = sheet.page.evaluate("window.runLog")
    assert ["running", 0] in log
    assert log[-1] == ["done", 1]
    # the figures are the API's own for the same design and request
    design = expected(client, sheet.inputs())["design"]
    sim = client.post(
        "/api/simulate", json={"design": design, "cycles": CYCLES, "points": SHEET_POINTS}
    ).json()
    f_meas = sheet.attr("[data-field='transient.f_meas']")
    assert f_meas == repr(sim["transient"]["f_meas"])
    assert sheet.page.text_content("[data-field='transient.f_meas']").endswith("Hz")
    assert sheet.attr("[data-field='transient.harmonics_dBc.0']") == repr(
        sim["transient"]["harmonics_dBc"][0]
    )
    assert sheet.page.locator("[data-field='transient.notes'] li").count() >= 1
    for plot in ("#plot-wave", "#plot-envelope", "#plot-spectrum"):
        sheet.page.locator(plot).scroll_into_view_if_needed()
        sheet.page.wait_for_selector(f"{plot} .main-svg")
    assert sheet.page.locator("#plot-spectrum .bars path").count() >= 2
    # an edit after the run marks its figures as of an earlier design
    assert sheet.page.locator(".run-stale").is_hidden()
    sheet.page.fill("[name='C2']", "3n3")
    sheet.page.locator(".run-stale").wait_for(state="visible")
    assert sheet.errors == []


def test_stop_cancels_a_run(context, live_server):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.fill("#run-cycles", "5000")  # long enough to stop half-way
    sheet.page.click("#run-start")
    sheet.page.wait_for_function("() => document.querySelector('#run-progress').value > 0")
    assert sheet.page.is_enabled("#run-stop")
    sheet.page.click("#run-stop")
    _run_state(sheet, "cancelled")
    assert sheet.page.get_attribute(RUN, "data-run") == "cancelled"
    assert sheet.page.evaluate("document.querySelector('#run-progress').value") < 1
    assert sheet.page.text_content("#run-status") == "Stopped"
    assert sheet.page.locator(".run-body").is_hidden()  # no figures from a stopped run
    # the slot is free again: a short run goes through
    sheet.page.fill("#run-cycles", str(MIN_CYCLES))
    sheet.page.click("#run-start")
    _run_state(sheet, "done")
    assert sheet.attr("[data-field='transient.f_meas']") != ""
    assert sheet.errors == []


def test_bad_cycles_say_why_and_keep_the_text(context, live_server):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.fill("#run-cycles", "5")
    sheet.page.click("#run-start")
    _run_state(sheet, "failed")
    error = sheet.page.locator("#run-error")
    assert error.is_visible()
    assert f"must be at least {MIN_CYCLES}" in error.text_content()
    assert sheet.page.input_value("#run-cycles") == "5"
    # Chromium logs the 422 answer itself; nothing else may be logged
    assert all("status of 422" in e for e in sheet.errors), sheet.errors


def test_budget_tells_the_hand_formula_and_prints_each_cost(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=common-base-carrier-10M")
    want = budget_bars(expected(client, sheet.inputs())["result"]["loop"])
    assert want["formula"] == "g_m·RC·C1·C2/(C1+C2)²"
    formula = "[data-role='hand-formula']"
    assert sheet.page.text_content(formula) == want["caption"]
    sheet.page.locator("#plot-budget").scroll_into_view_if_needed()
    sheet.page.wait_for_selector("#plot-budget .main-svg")
    # every bar prints its cost in dB and %; the gain-setting resistor is no bar
    texts = sheet.page.eval_on_selector("#plot-budget", "el => el.data[0].text")
    assert texts == want["text"]
    assert "RC" not in want["elements"]
    printed = sheet.page.locator("#plot-budget .bartext").all_text_contents()
    assert sorted(printed) == sorted(want["text"])
    # live: a lossier coil changes the caption with the answer
    sheet.page.fill("[name='Q_L']", "20")
    settle(sheet, client)
    again = budget_bars(expected(client, sheet.inputs())["result"]["loop"])
    sheet.page.wait_for_function(
        "([sel, t]) => document.querySelector(sel).textContent === t",
        arg=[formula, again["caption"]],
    )
    assert sheet.errors == []
