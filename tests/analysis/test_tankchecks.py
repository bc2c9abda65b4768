"""Warnings where the tank stops setting the frequency."""

from __future__ import annotations

import json
import re

import pytest

from ringwise.analysis.analyze import analyze
from ringwise.analysis.tankchecks import (
    JUNCTION_PULL_LIMIT,
    JUNCTION_SHARE_LIMIT,
    LOW_LOADED_Q,
    OFF_TANK_LIMIT,
)
from ringwise.design import Design
from tests.analysis.test_story import EXCITER_455K
from tests.conftest import BASE_CE, SAMPLES, design_from

CODES = ("junction-capacitance", "low-loaded-q", "off-tank-frequency")


def _warnings(design: Design) -> dict[str, str]:
    return {w.code: w.message for w in analyze(design).warnings if w.code in CODES}


def test_small_tank_capacitors_at_7mhz_warn_about_c_pi() -> None:
    # C1 22p, C2 100p, L for 7 MHz: the general-purpose class's C_π (some 24 pF at
    # this bias) is a quarter of C2.
    design = design_from(BASE_CE, tank__C1="22p", tank__C2="100p", tank__L="28.7u", bias__RC="2k2")
    r = analyze(design)
    found = {w.code: w.message for w in r.warnings}
    assert r.small_signal.C_pi / design.tank.C2 > JUNCTION_SHARE_LIMIT
    msg = found["junction-capacitance"]
    assert "C_π = 23.92 pF" in msg and "C2 = 100 pF" in msg
    pull = float(re.search(r"move f_osc ([+-]\d+\.\d) %", msg).group(1)) / 100
    assert pull < -JUNCTION_PULL_LIMIT
    assert "Clapp form" in msg and "Raise C2 to at least 239.2 pF" in msg
    # f_osc is far below the tank's resonance, and the junctions are named as the largest pull
    off = found["off-tank-frequency"]
    assert r.loop.f_osc / r.tank.f_ideal - 1 < -OFF_TANK_LIMIT
    assert "largest pulls: Junction capacitances C_π, C_μ" in off


def test_clapp_design_gets_the_smaller_c3_advice() -> None:
    design = design_from(
        BASE_CE, tank__C1="22p", tank__C2="100p", tank__C3="100p", tank__L="40u", bias__RC="2k2"
    )
    msg = _warnings(design)["junction-capacitance"]
    assert "a smaller C3" in msg


def test_low_loaded_q_names_the_heaviest_load() -> None:
    data = json.loads(json.dumps(EXCITER_455K))
    data["bias"]["RC"] = "265"
    r = analyze(Design.model_validate(data))
    assert r.loop.Q_loaded < LOW_LOADED_Q
    msg = {w.code: w.message for w in r.warnings}["low-loaded-q"]
    assert f"loaded Q = {r.loop.Q_loaded:.2g} is below {LOW_LOADED_Q:g}" in msg
    assert "heaviest load on the tank is RC" in msg
    assert "off-tank-frequency" in {w.code for w in r.warnings}


def test_the_exciter_as_designed_is_left_alone() -> None:
    assert _warnings(Design.model_validate(EXCITER_455K)) == {}


@pytest.mark.parametrize("path", sorted(SAMPLES.glob("*.json")), ids=lambda p: p.stem)
def test_sample_designs_raise_none_of_these(path) -> None:
    assert _warnings(Design.model_validate(json.loads(path.read_text()))) == {}
