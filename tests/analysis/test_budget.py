"""Loop-gain budget: each loss made ideal, everything else kept."""

from __future__ import annotations

import math

import pytest

from ringwise.analysis.budget import loop_budget
from ringwise.analysis.operating import solve
from ringwise.design import with_param
from tests.conftest import BASE_CE, design_from


def test_budget_lines_cover_the_losses() -> None:
    design = design_from(BASE_CE, load={"R_load": 10e3})
    solved = solve(design)
    lines = {b.element: b for b in loop_budget(solved, "RC")}
    assert set(lines) >= {"L_loss", "r_pi", "divider", "r_o", "R_load", "RC", "CE", "Cc1", "Cc2"}
    total = sum(b.share for b in lines.values() if b.share)
    assert total == pytest.approx(1.0)
    for b in lines.values():
        assert b.cost_dB == pytest.approx(20 * math.log10(b.gain_without / solved.gain))


def test_lossless_coil_line_equals_a_design_with_huge_Q() -> None:
    # Making the coil ideal in the budget must agree with a design whose coil is
    # nearly lossless (the operating point does not depend on Q_L).
    design = design_from(BASE_CE)
    line = next(b for b in loop_budget(solve(design), "RC") if b.element == "L_loss")
    lossless = solve(with_param(design, "Q_L", 1e6))
    assert line.gain_without == pytest.approx(lossless.gain, rel=1e-4)
    assert line.f_without == pytest.approx(lossless.f_osc, rel=1e-6)


def test_load_line_equals_removing_the_load() -> None:
    design = design_from(BASE_CE, load={"R_load": 3300.0})
    line = next(b for b in loop_budget(solve(design), "RC") if b.element == "R_load")
    unloaded = solve(design_from(BASE_CE))
    assert line.gain_without == pytest.approx(unloaded.gain, rel=1e-9)
    assert line.cost_dB > 0
