"""Rule checks: each warning fires on the design it describes, and not on a sound one."""

from __future__ import annotations

import dataclasses

from ringwise.analysis.budget import loop_budget
from ringwise.analysis.checks import (
    P_DEVICE_WARN,
    STIFF_DIVIDER,
    Finding,
    rule_checks,
    steady_checks,
)
from ringwise.analysis.criteria import VCE_HEADROOM
from ringwise.analysis.operating import solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.poles import natural_frequencies
from ringwise.circuit.topologies import GAIN_SETTER
from tests.conftest import BASE_CE, design_from


def _codes(design) -> list[str]:
    s = solve(design)
    budget = loop_budget(s, GAIN_SETTER[design.topology]) if s.f_osc else []
    poles = natural_frequencies(s.ss, s.tank.f_ideal, s.f_osc)
    found = rule_checks(s, budget, poles)
    assert all(isinstance(f, Finding) and f.message for f in found)
    return [f.code for f in found]


def test_sound_design_has_no_rule_warnings() -> None:
    assert _codes(design_from(BASE_CE)) == []


def test_cut_off_and_saturated() -> None:
    assert "cut-off" in _codes(design_from(BASE_CE, bias__RB1="10M", bias__RB2="1k"))
    assert "saturated" in _codes(design_from(BASE_CE, bias__RC="100k"))


def test_soft_divider() -> None:
    # Divider current below STIFF_DIVIDER × the base current (common practice).
    codes = _codes(design_from(BASE_CE, bias__RB1="3M9", bias__RB2="1M"))
    assert STIFF_DIVIDER > 1 and "soft-divider" in codes


def test_headroom_from_the_one_limit() -> None:
    """The steady state's lowest V_CE against the one headroom limit."""
    s = solve(design_from(BASE_CE))
    ss = steady_state(s)
    low = dataclasses.replace(ss, VCE_min=0.9 * VCE_HEADROOM)
    high = dataclasses.replace(ss, VCE_min=1.1 * VCE_HEADROOM)
    assert "low-headroom" in [f.code for f in steady_checks(s, low)]
    assert "low-headroom" not in [f.code for f in steady_checks(s, high)]


def test_extreme_ratio_and_small_coupling() -> None:
    assert "extreme-ratio" in _codes(design_from(BASE_CE, tank__C1="100p", tank__C2="2n2"))
    assert "coupling-reactance" in _codes(design_from(BASE_CE, coupling__Cc1="100p"))


def test_hot_device() -> None:
    # Dissipation above P_DEVICE_WARN: a low emitter resistor on a high supply.
    hot = design_from(BASE_CE, supply={"Vcc": 30.0}, bias__RE="100", bias__RC="10")
    s = solve(hot)
    assert s.op.P_device > P_DEVICE_WARN
    assert "hot-device" in _codes(hot)
