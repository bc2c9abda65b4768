"""Plot data (app/figures/curves.py)."""

from __future__ import annotations

import math

import pytest

from ringwise.analysis.analyze import analyze
from ringwise.analysis.operating import solve
from ringwise.analysis.story import REST_SHOWN_DB
from ringwise.design import Design
from ringwise.figures import curves
from ringwise.web.samples import samples


@pytest.fixture(params=sorted(samples()))
def design(request) -> Design:
    return Design.model_validate(samples()[request.param].document)


def test_loop_curve_passes_through_the_result(design):
    solved = solve(design)
    c = curves.loop_curve(solved)
    result = analyze(design)
    k = c["f"].index(c["f_osc"])
    assert c["magnitude"][k] == pytest.approx(result.loop.gain, rel=1e-9)
    # 1e-3°: a crystal's phase slope (Q of tens of thousands) turns the crossing
    # search's frequency tolerance into some 1e-4° (common practice, no source)
    assert c["phase_deg"][k] == pytest.approx(0.0, abs=1e-3)
    assert c["f"] == sorted(c["f"])


def test_reactances_cross_at_the_ideal_resonance(design):
    if design.crystal is not None:
        pytest.skip("a crystal design's tank is the crystal's: the L-C chart does not apply")
    result = analyze(design)
    r = curves.reactance_curves(design, result.tank.C_series, result.tank.f_ideal)
    lines = {line["part"]: line["X"] for line in r["lines"]}
    k = min(range(len(r["f"])), key=lambda i: abs(math.log(r["f"][i] / result.tank.f_ideal)))
    assert r["f"][k] == pytest.approx(result.tank.f_ideal)
    # X_L = ωL and X_C = 1/(ωC) are equal at ω0 = 1/√(L·C) (textbook, from memory)
    assert lines["L"][k] == pytest.approx(lines["C_series"][k], rel=1e-9)


def test_reactance_values():
    doc = samples()["clapp-clock-1M"].document
    d = Design.model_validate({**doc, "tank": {**doc["tank"], "L": "100u"}})
    r = curves.reactance_curves(d, 1e-9, 1e6)
    k = min(range(len(r["f"])), key=lambda i: abs(r["f"][i] - 1e6))
    X_L = next(line["X"] for line in r["lines"] if line["part"] == "L")
    # 100 µH at 1 MHz: 2π·1e6·1e-4 = 628.3 Ω (hand calculation, common practice, no source)
    assert X_L[k] == pytest.approx(628.3185, rel=1e-6)


def test_sweep_range_shows_the_threshold():
    assert curves.sweep_range(330.0, 50.0) == pytest.approx((50.0 / 3, 990.0))
    assert curves.sweep_range(330.0, None) == pytest.approx((33.0, 3300.0))
    lo, hi = curves.sweep_range(1.0, 1e9)  # a far threshold: the current value stays in view
    assert hi / lo <= curves.SWEEP_MAX_RATIO
    assert lo < 1.0 < hi


def test_what_if_and_budget(design):
    result = analyze(design).model_dump(mode="json")
    param = result["startup"]["threshold_param"]
    s = curves.what_if(design, param, result["startup"]["threshold_value"])
    assert len(s["values"]) == curves.SWEEP_POINTS
    assert s["values"][0] < s["current"] < s["values"][-1]
    if s["threshold"] is not None:
        assert s["values"][0] < s["threshold"] < s["values"][-1]
    bars = curves.budget_bars(result["loop"])
    listed = [c for c, e in zip(bars["cost_dB"], bars["elements"], strict=True) if e != "rest"]
    assert listed == sorted(listed, reverse=True)
    assert sum(bars["cost_dB"]) == pytest.approx(bars["gap_dB"], abs=REST_SHOWN_DB)
    assert len(bars["text"]) == len(bars["labels"])
    # the gain-setting resistor is in the hand formula, not among the losses
    assert result["startup"]["threshold_param"] not in bars["elements"]
    assert bars["formula"] and f"= {bars['hand']:.4g}" in bars["numbers"]
