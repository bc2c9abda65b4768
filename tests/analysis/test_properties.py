"""Monotonic properties over random designs (hypothesis).

Adding inductor loss, base loading or a load resistor can only take loop gain
away and push the threshold collector resistor up: every loss is a positive
conductance in parallel with the tank's (standard oscillator analysis, e.g.
Sedra & Smith's oscillator chapter, from memory).
"""

from __future__ import annotations

from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from ringwise.analysis.operating import solve
from ringwise.analysis.threshold import find_threshold
from ringwise.design import Design, with_param

SETTINGS = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def ce_designs(draw) -> Design:
    L = draw(st.floats(1e-6, 1e-3))
    C2 = draw(st.floats(220e-12, 22e-9))
    ratio = draw(st.floats(0.2, 1.0))
    RE = draw(st.sampled_from([470.0, 1e3, 2.2e3]))
    data = {
        "topology": "common-emitter",
        "supply": {"Vcc": draw(st.floats(6.0, 15.0))},
        "bias": {"RB1": 39e3, "RB2": 10e3, "RC": draw(st.floats(300.0, 3e3)), "RE": RE,
                 "CE": 1e-6},
        "tank": {"L": L, "Q_L": draw(st.floats(30.0, 200.0)), "C1": ratio * C2, "C2": C2},
        "coupling": {"Cc1": 1e-6, "Cc2": 1e-6},
        "device": {"preset": "general-purpose", "beta": draw(st.floats(80.0, 400.0))},
    }  # fmt: skip
    design = Design.model_validate(data)
    solved = solve(design)
    # Comfortable headroom, so that the Early effect near saturation does not mix in.
    assume(solved.op.region.value == "active" and solved.op.VCE > 2.0)
    assume(solved.f_osc is not None)
    assume(1.2 < solved.gain < 50)
    return design


@SETTINGS
@given(ce_designs(), st.floats(1.5, 10.0))
def test_more_inductor_loss_lowers_gain_and_raises_threshold(design: Design, k: float) -> None:
    lossier = with_param(design, "Q_L", design.tank.Q_L / k)
    assert solve(lossier).gain < solve(design).gain
    a, b = find_threshold(design, "RC").value, find_threshold(lossier, "RC").value
    assert a is not None
    assert b is None or b > a


@SETTINGS
@given(ce_designs(), st.floats(300.0, 30e3))
def test_a_load_lowers_gain_and_raises_threshold(design: Design, R_load: float) -> None:
    loaded = with_param(design, "R_load", R_load)
    assert solve(loaded).gain < solve(design).gain
    a, b = find_threshold(design, "RC").value, find_threshold(loaded, "RC").value
    assert b is None or b > a


@SETTINGS
@given(ce_designs(), st.floats(1.5, 5.0))
def test_base_loading_lowers_gain_and_raises_threshold(design: Design, k: float) -> None:
    # Lower β: lower r_π at the base (and a little less collector current).
    loaded = with_param(design, "beta", design.device.beta / k)
    assert solve(loaded).gain < solve(design).gain
    a, b = find_threshold(design, "RC").value, find_threshold(loaded, "RC").value
    assert b is None or b > a
