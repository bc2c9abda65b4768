"""The sheet's on-demand panels in a real Chromium: spread and yield, standard
values, from targets, bench readings, and the tolerance inputs in the link and
the design file.

Expected figures come from the same server's API (``/api/sheet/...``), never
from numbers typed into the test.  Spreads use few samples to keep it quick.
"""

from __future__ import annotations

import json

import pytest

from tests.web.test_browser import Sheet, _export, expected, settle

pytestmark = pytest.mark.browser

#: Samples of the browser spreads (a few hundred take a fraction of a second).
SAMPLES = "300"


def _tool_done(sheet: Sheet, name: str, state: str = "done") -> None:
    sheet.page.wait_for_function(
        "([n, s]) => document.querySelector(`[data-role='${n}']`).dataset.tool === s",
        arg=[name, state],
        timeout=30_000,
    )


def test_spread_shows_yield_and_histograms_and_marks_stale(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    page = sheet.page
    page.fill("#spread-samples", SAMPLES)
    page.fill("#spread-low", "900k")
    page.fill("#spread-high", "1.1M")
    page.click("#spread-start")
    _tool_done(sheet, "spread")
    want = client.post(
        "/api/sheet/spread",
        json={
            "fields": sheet.inputs(),
            "samples": SAMPLES,
            "window_low": "900k",
            "window_high": "1.1M",
        },
    ).json()
    panel = "[data-role='spread'] "
    for path in (
        "spread.yield_start",
        "spread.yield_margin",
        "spread.in_window",
        "spread.f_osc.p50",
    ):
        assert sheet.attr(panel + f"[data-field='{path}']") == want["shown"][path]["raw"]
        assert page.text_content(panel + f"[data-field='{path}']") == want["shown"][path]["text"]
    assert want["result"]["spread"]["window"] == [900e3, 1.1e6]
    for t in want["temperatures"]:
        path = f"spread.yield_by_temperature.{t}"
        assert sheet.attr(panel + f"[data-field='{path}']") == want["shown"][path]["raw"]
    first = want["result"]["spread"]["sensitivities"][0]["part"]
    assert sheet.attr(panel + "[data-field='spread.sensitivities.0.part']") == first
    for plot in ("#plot-f-hist", "#plot-gain-hist", "#plot-sens", "#plot-temp"):
        page.locator(plot).scroll_into_view_if_needed()
        page.wait_for_selector(f"{plot} .main-svg")
    assert page.locator("#plot-f-hist .shapelayer path").count() == 2  # the window's ends
    assert page.locator("#plot-gain-hist .shapelayer path").count() == 2  # gain 1 and the margin
    stale = page.locator("[data-role='spread'] .tool-stale")
    assert stale.is_hidden()
    page.fill("[name='C2']", "2n2")
    stale.wait_for(state="visible")
    assert sheet.errors == []


def test_spread_bad_input_names_the_field_and_a_new_run_supersedes(context, live_server):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    page = sheet.page
    page.fill("#spread-samples", "many")
    page.click("#spread-start")
    _tool_done(sheet, "spread", "failed")
    assert "samples" in page.text_content("#spread-error")
    assert page.input_value("#spread-samples") == "many"  # kept as typed
    page.fill("#spread-samples", "2000")
    page.click("#spread-start")
    page.fill("#spread-samples", SAMPLES)
    page.click("#spread-start")  # supersedes the first run
    _tool_done(sheet, "spread")
    assert sheet.attr("[data-role='spread'] [data-field='spread.samples']") == SAMPLES
    # the refused run's 422 is logged by Chromium itself; nothing else may be
    assert [e for e in sheet.errors if "status of 422" not in e] == []


def test_snap_preview_apply_and_undo(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    page = sheet.page
    page.fill("[name='RC']", "1234")
    page.fill("[name='C2']", "2.345n")
    settle(sheet, client)
    typed = sheet.inputs()
    page.select_option("#snap-series", "E12")
    page.click("#snap-preview")
    _tool_done(sheet, "snap")
    want = client.post("/api/sheet/snap", json={"fields": typed, "series": "E12"}).json()
    assert {"RC", "C2"} <= set(want["changed"])
    for path in ("f_before", "f_after", "gain_before", "gain_after", "f_change"):
        assert sheet.attr(f"[data-role='snap'] [data-field='{path}']") == want["shown"][path]["raw"]
    assert page.locator("[data-role='snap-rows'] tr").count() == len(want["rows"])
    page.click("#snap-apply")
    page.wait_for_function("() => document.querySelector(\"[name='RC']\").value !== '1234'")
    settle(sheet, client)
    assert sheet.inputs() == want["fields"]
    assert page.input_value("[name='RC']") == "1.2k"  # E12 (IEC 60063) has 1.2, not 1.23
    after = expected(client, sheet.inputs())
    assert sheet.attr("[data-field='loop.f_osc']") == after["shown"]["loop.f_osc"]["raw"]
    assert after["result"]["loop"]["f_osc"] == want["result"]["f_after"]
    page.click("#snap-undo")
    page.wait_for_function("() => document.querySelector(\"[name='RC']\").value === '1234'")
    settle(sheet, client)
    assert sheet.inputs() == typed
    assert sheet.errors == []


def test_snap_keeping_the_frequency_shows_the_trim(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    page = sheet.page
    page.fill("[name='C3']", "347p")
    page.fill("[name='L']", "82.7u")
    settle(sheet, client)
    typed = sheet.inputs()
    page.select_option("#snap-series", "E12")
    page.check("#snap-keep-f")
    page.click("#snap-preview")
    _tool_done(sheet, "snap")
    body = {"fields": typed, "series": "E12", "keep_frequency": True}
    want = client.post("/api/sheet/snap", json=body).json()
    assert want["result"]["trimmed"]
    trim = page.locator("[data-role='snap'] [data-field='trim']")
    assert trim.is_visible()
    assert trim.text_content() == want["shown"]["trim"]["text"]
    assert trim.text_content().startswith("C3 trimmed from")
    page.click("#snap-apply")
    page.wait_for_function("() => document.querySelector(\"[name='C3']\").value !== '347p'")
    settle(sheet, client)
    assert sheet.inputs() == want["fields"]
    after = expected(client, sheet.inputs())
    assert after["result"]["loop"]["f_osc"] == pytest.approx(want["result"]["f_after"], rel=1e-12)
    # unticked, the trim line goes away on the next preview
    page.uncheck("#snap-keep-f")
    page.click("#snap-preview")
    _tool_done(sheet, "snap")
    assert trim.is_hidden()
    assert sheet.errors == []


def test_from_targets_fills_the_sheet(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    page = sheet.page
    page.select_option("#synth-topology", "common-base")
    page.fill("#synth-f", "2M")
    page.fill("#synth-Vcc", "9")
    page.fill("#synth-IC", "2m")
    page.click("#synth-run")
    _tool_done(sheet, "synth")
    settle(sheet, client)
    assert page.input_value("[name='topology']") == "common-base"
    assert page.input_value("[name='Vcc']") == "9"
    reasons = page.locator("[data-role='synth'] [data-field='reasons'] li")
    assert reasons.count() >= 3
    view = expected(client, sheet.inputs())
    assert view["ok"]
    f = view["result"]["loop"]["f_osc"]
    assert abs(f / 2e6 - 1) < 0.1  # issue 5: within the E-series grid step (E24 ≈ 10 %)
    # the synthesis solves its design in a batch, the sheet alone: equal to rounding
    assert abs(float(sheet.attr("[data-role='synth'] [data-field='f_osc']")) / f - 1) < 1e-12
    assert sheet.errors == []


def test_from_targets_keeps_the_load_and_offers_the_clapp_form(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    page = sheet.page
    page.fill("[name='R_load']", "6k8")
    page.fill("[name='Q_L']", "100")
    settle(sheet, client)
    page.fill("#synth-f", "7M")
    page.fill("#synth-Vcc", "12")
    page.fill("#synth-IC", "2m")
    page.check("#synth-clapp")
    page.click("#synth-run")
    _tool_done(sheet, "synth")
    settle(sheet, client)
    assert page.input_value("[name='R_load']") == "6k8"
    assert page.input_value("[name='Q_L']") == "100"
    assert page.input_value("[name='C3']") != ""
    miss = page.text_content("[data-role='synth'] [data-field='miss']")
    assert miss.endswith(" %") and abs(float(miss.split()[0])) < 0.2
    reasons = page.locator("[data-role='synth'] [data-field='reasons'] li").all_text_contents()
    assert any(r.startswith("Kept as set: Q_L = 100, the load R_load = 6.8 kΩ") for r in reasons)
    assert any(r.startswith("C3 = ") for r in reasons)
    # ask it to choose the load: the load goes
    page.check("#synth-choose_load")
    page.click("#synth-run")
    page.wait_for_function("() => document.querySelector(\"[name='R_load']\").value === ''")
    assert sheet.errors == []


def test_bench_readings_show_the_explanation_and_load_as_built(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    page = sheet.page
    settle(sheet, client)
    before = sheet.inputs()
    f_nominal = expected(client, before)["result"]["loop"]["f_osc"]
    bench_f = f"{f_nominal * 1.03:.6g}"
    page.fill("#bench-f", bench_f)
    page.click("#bench-run")
    _tool_done(sheet, "bench")
    want = client.post(
        "/api/sheet/reconcile", json={"fields": before, "f_measured": bench_f}
    ).json()
    explanation = page.text_content("[data-role='bench'] [data-field='explanation']")
    assert explanation == want["result"]["explanation"] and "capacitance" in explanation
    fitted = want["result"]["fitted"]
    assert page.locator("[data-role='bench-fitted'] tr").count() == len(fitted)
    path = "readings.f.as_built_model"
    assert sheet.attr(f"[data-role='bench'] [data-field='{path}']") == want["shown"][path]["raw"]
    page.click("#bench-load")
    settle(sheet, client)
    assert sheet.inputs() == want["fields"] != before
    f_built = expected(client, sheet.inputs())["result"]["loop"]["f_osc"]
    assert abs(f_built / float(bench_f) - 1) < 2e-3  # the fit's own f reading (SIGMA_F 0.1 %)
    assert sheet.errors == []


TOLERANCE_TEXTS = {
    "tol_R": "0.02",
    "tol_C": "30m",
    "T_min": "-20",
    "T_max": "70",
    "L_tempco_ppm": "50",
    "tol_parts": "C1=0.01; L=0.05",
}


def test_tolerance_fields_round_trip_by_link_and_file(context, live_server, client, tmp_path):
    source = Sheet(context, f"{live_server}/?design=clapp-clock-1M")
    for name, text in TOLERANCE_TEXTS.items():
        source.page.fill(f"[name='{name}']", text)
    source.page.select_option("[name='diel_C2']", "X7R")
    settle(source, client)
    link = source.page.input_value("#share-url")
    again = Sheet(context, link)
    assert again.inputs() == source.inputs()
    exported = _export(source)
    doc = json.loads(exported)
    assert doc["tolerances"]["per_part"] == {"C1": 0.01, "L": 0.05}
    assert doc["tolerances"]["dielectric"] == {"C2": "X7R"}
    file = tmp_path / "design.json"
    file.write_bytes(exported)
    target = Sheet(context, f"{live_server}/?design=proximity-exciter-150k")
    target.page.set_input_files("#import-file", str(file))
    target.page.wait_for_function(
        "() => document.querySelector(\"[name='T_min']\").value === '-20'"
    )
    settle(target, client)
    assert target.inputs() == source.inputs()
    assert _export(target) == exported
    assert source.errors == again.errors == target.errors == []
