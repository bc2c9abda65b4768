"""The variants' inputs in a real Chromium: the RF-choke collector feed.

Expected figures come from the same server's API, never from numbers typed
into the test.
"""

from __future__ import annotations

import pytest

from tests.web.test_browser import (
    VERDICT,
    Sheet,
    expected,
    expected_steady,
    settle,
    wait_for,
)

pytestmark = pytest.mark.browser

THRESHOLD_PARAM = "[data-field='startup.threshold_param']"


def test_choosing_the_choke_feed_switches_the_inputs_and_the_threshold(
    context, live_server, client, artifacts
):
    sheet = Sheet(context, f"{live_server}/?design=proximity-exciter-150k")
    page = sheet.page
    assert page.input_value("[name='feed']") == "resistor"
    # the choke's inputs are idle with the resistor feed, RC is not
    assert "idle" in page.get_attribute("[data-input='L_ch']", "class")
    assert "idle" not in page.get_attribute("[data-input='RC']", "class")
    page.fill("[name='L_ch']", "10m")
    page.fill("[name='Q_ch']", "40")
    page.select_option("[name='feed']", "choke")
    settle(sheet, client)
    want = expected(client, sheet.inputs())
    assert want["ok"]
    wait_for(sheet, THRESHOLD_PARAM, "Q_ch")
    assert sheet.attr(VERDICT) == want["shown"]["startup.verdict"]["raw"]
    assert "idle" in page.get_attribute("[data-input='RC']", "class")
    assert "idle" not in page.get_attribute("[data-input='L_ch']", "class")
    # RC as typed is kept (nothing the user typed is lost) and the link carries the choke
    assert page.input_value("[name='RC']") == "10k"
    assert "feed=choke" in page.url and "L_ch=10m" in page.url
    # a self-resonance near f_osc is warned about on the page
    page.fill("[name='f_ch']", "180k")
    settle(sheet, client)
    page.locator("text=choke's self-resonance").first.wait_for()
    page.screenshot(path=str(artifacts / "choke-feed.png"), full_page=True)
    # the schematic draws the choke in RC's place
    assert page.locator(".schematic-wrap:not([hidden]) [data-part='L_ch']").is_visible()
    assert not page.locator(".schematic-wrap:not([hidden]) [data-part='RC']").is_visible()
    assert sheet.errors == []


def test_the_load_panel_shows_the_power_and_follows_a_buffer_capacitance(
    context, live_server, client
):
    sheet = Sheet(context, f"{live_server}/?design=common-base-carrier-10M")
    page = sheet.page
    power = "[data-field='output.P_dBm']"
    want = expected_steady(client, sheet.inputs())
    # the power comes with the steady state, the sheet's second answer
    wait_for(sheet, power, want["shown"]["output.P_dBm"]["raw"])
    assert page.text_content(power).endswith("dBm")
    page.fill("[name='C_load']", "5p")
    page.fill("[name='change']", "0.2")
    settle(sheet, client)
    want = expected_steady(client, sheet.inputs())
    wait_for(sheet, power, want["shown"]["output.P_dBm"]["raw"])
    assert sheet.attr("[data-field='output.pull_ppm']") == want["shown"]["output.pull_ppm"]["raw"]
    assert "C_load=5p" in page.url
    assert sheet.errors == []


def test_the_varactor_lo_shows_its_panel_and_plot_and_a_fixed_tank_hides_them(
    context, live_server, client
):
    sheet = Sheet(context, f"{live_server}/?design=varactor-lo-5M")
    page = sheet.page
    panel = "[data-panel='tuning']"
    ratio = "[data-field='tuning.K_ratio']"
    want = expected(client, sheet.inputs())
    assert sheet.attr(ratio) == want["shown"]["tuning.K_ratio"]["raw"]
    # the plot of f_osc and K against the tuning voltage is drawn once on screen
    page.locator("#plot-tuning").scroll_into_view_if_needed()
    page.wait_for_selector("#plot-tuning .main-svg")
    # the steady state at both ends and the middle comes with the second answer
    steady = expected_steady(client, sheet.inputs())
    behaviour = "[data-field='tuning.points.2.behaviour']"
    wait_for(sheet, behaviour, steady["shown"]["tuning.points.2.behaviour"]["raw"])
    # a wider range: the figures follow the edit
    page.fill("[name='V_min']", "1")
    settle(sheet, client)
    want = expected(client, sheet.inputs())
    wait_for(sheet, ratio, want["shown"]["tuning.K_ratio"]["raw"])
    # clearing the varactor's fields gives the fixed tank back, and the panel goes
    for name in ("V_tune", "C_v", "C_j0", "phi_j", "m_j", "R_v", "R_tune", "V_min", "V_max"):
        page.fill(f"[name='{name}']", "")
    page.select_option("[name='v_preset']", "")
    page.select_option("[name='place']", "")
    settle(sheet, client)
    page.wait_for_selector(panel, state="hidden")
    assert sheet.errors == []


def test_the_crystal_clock_shows_its_panel_and_a_coil_design_hides_it(context, live_server, client):
    sheet = Sheet(context, f"{live_server}/?design=crystal-clock-10M")
    page = sheet.page
    panel = "[data-panel='crystal']"
    assert page.is_visible(panel)
    want = expected(client, sheet.inputs())
    margin = "[data-field='crystal.margin']"
    assert sheet.attr(margin) == want["shown"]["crystal.margin"]["raw"]
    # a higher-ESR part: the margin falls and the rule's warning appears
    page.fill("[name='R_x1']", "80")
    settle(sheet, client)
    want = expected(client, sheet.inputs())
    wait_for(sheet, margin, want["shown"]["crystal.margin"]["raw"])
    page.locator("[data-code='crystal-margin']").wait_for()
    # clearing the crystal's fields gives the coil back, and the panel goes
    for name in ("R_x1", "f_xs", "C_x1", "C_x0", "P_xmax"):
        page.fill(f"[name='{name}']", "")
    settle(sheet, client)
    page.wait_for_selector(panel, state="hidden")
    assert sheet.errors == []
