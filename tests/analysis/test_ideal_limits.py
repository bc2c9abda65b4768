"""The full model against the hand method in the limit where the hand method is exact.

Losses off, β and VA huge, C_mu = 0, fT huge, coupling and bypass huge: the
oscillation frequency must be 1/(2π√(L·Cs)), the loop gain the hand figure and
the threshold its reciprocal. Source: standard textbook Colpitts analysis
(e.g. Sedra & Smith, *Microelectronic Circuits*, oscillator chapter; Razavi,
*RF Microelectronics*, oscillator chapter for the common-base form), from memory.
"""

from __future__ import annotations

import math

import pytest
from numpy.testing import assert_allclose

from ringwise.analysis.analyze import analyze
from ringwise.design import Design
from tests.conftest import ideal_data


@pytest.mark.parametrize("clapp", [None, 220e-12])
def test_common_emitter_ideal_limit(clapp: float | None) -> None:
    data = ideal_data("common-emitter")
    data["tank"]["C3"] = clapp
    design = Design.model_validate(data)
    r = analyze(design)
    t = design.tank
    Cs = 1.0 / (1 / t.C1 + 1 / t.C2 + (1 / clapp if clapp else 0.0))
    f_hand = 1.0 / (2 * math.pi * math.sqrt(t.L * Cs))
    gm = r.small_signal.gm
    assert_allclose(r.loop.f_osc, f_hand, rtol=1e-3)
    assert_allclose(r.loop.gain, gm * design.bias.RC * t.C1 / t.C2, rtol=1e-2)
    assert_allclose(r.startup.threshold_RC, 1.0 / (gm * t.C1 / t.C2), rtol=1e-2)
    assert r.tank.feedback_ratio == pytest.approx(t.C1 / t.C2)


def test_common_base_ideal_limit() -> None:
    # Hand figure for the common-base form: g_m·R·C1·C2/(C1+C2)², R across L
    # (Razavi, RF Microelectronics, oscillator chapter, from memory). The hand
    # figure also assumes R ≫ X_L and RE ≫ X_C2, so bias at 10 µA with large resistors.
    data = ideal_data("common-base")
    data["bias"].update({"RC": 100e3, "RE": 180e3})
    design = Design.model_validate(data)
    r = analyze(design)
    t = design.tank
    gm = r.small_signal.gm
    k = t.C1 * t.C2 / (t.C1 + t.C2) ** 2
    assert_allclose(r.loop.f_osc, 1 / (2 * math.pi * math.sqrt(t.L * r.tank.C_series)), rtol=1e-3)
    assert_allclose(r.loop.gain_ideal, gm * design.bias.RC * k, rtol=1e-12)
    # RE carries the bias but sits across C2 in this form; the hand figure takes it
    # as an AC open, which is what the budget's "RE made ideal" line computes.
    without_RE = next(b for b in r.loop.budget if b.element == "RE")
    assert_allclose(without_RE.gain_without, gm * design.bias.RC * k, rtol=1e-2)
    # With RE in place: tapped-capacitor transformation, RE appears across L as
    # RE·((C1+C2)/C1)² (standard impedance transformation of a capacitive tap,
    # e.g. Clarke & Hess, Communication Circuits, from memory).
    R_RE = design.bias.RE * ((t.C1 + t.C2) / t.C1) ** 2
    R_total = 1.0 / (1.0 / design.bias.RC + 1.0 / R_RE)
    assert_allclose(r.loop.gain, gm * R_total * k, rtol=1e-2)
    assert_allclose(r.startup.threshold_RC, 1.0 / (gm * k - 1.0 / R_RE), rtol=1e-2)


def test_common_collector_ideal_limit() -> None:
    # Common-collector: RE across C1 (collector at signal ground), hand figure g_m·RE·C1/C2.
    design = Design.model_validate(ideal_data("common-collector"))
    r = analyze(design)
    t = design.tank
    gm = r.small_signal.gm
    assert_allclose(r.loop.f_osc, 1 / (2 * math.pi * math.sqrt(t.L * r.tank.C_series)), rtol=1e-3)
    assert_allclose(r.loop.gain, gm * design.bias.RE * t.C1 / t.C2, rtol=1e-2)
