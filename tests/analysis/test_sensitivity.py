"""Normalised sensitivities."""

from __future__ import annotations

import pytest

from ringwise.analysis.sensitivity import sensitivities
from ringwise.design import Design
from tests.conftest import BASE_CE, design_from, ideal_data


def test_ideal_tank_sensitivities_follow_the_resonance_formula() -> None:
    # From f = 1/(2π√(L·Cs)): ∂ln f/∂ln L = −1/2 and ∂ln f/∂ln C_i = −½·Cs/C_i
    # (derived from the resonance formula).
    design = Design.model_validate(ideal_data("common-emitter"))
    by_part = {s.part: s for s in sensitivities(design)}
    t = design.tank
    Cs = 1 / (1 / t.C1 + 1 / t.C2)
    assert by_part["L"].S_f == pytest.approx(-0.5, rel=1e-3)
    assert by_part["C1"].S_f == pytest.approx(-0.5 * Cs / t.C1, rel=1e-3)
    assert by_part["C2"].S_f == pytest.approx(-0.5 * Cs / t.C2, rel=1e-3)
    # the gain-setting resistor acts in proportion: ∂ln T/∂ln RC = 1 in the ideal limit
    assert by_part["RC"].S_gain == pytest.approx(1.0, rel=1e-2)


def test_ranked_largest_first() -> None:
    ranked = sensitivities(design_from(BASE_CE))
    scores = [abs(s.S_f or 0) + abs(s.S_gain or 0) for s in ranked]
    assert scores == sorted(scores, reverse=True)
    assert {"L", "C1", "C2", "RC"} <= {s.part for s in ranked[:8]}
