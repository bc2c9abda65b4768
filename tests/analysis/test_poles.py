"""Natural frequencies: the sign of σ agrees with the loop gain; squegging shows up."""

from __future__ import annotations

import itertools

import pytest

from ringwise.analysis.analyze import analyze
from ringwise.analysis.operating import solve
from ringwise.analysis.poles import natural_frequencies
from tests.conftest import BASE_CE, design_from

GRID = list(
    itertools.product(
        ["47", "100", "220", "470", "1k", "2k2"],  # RC
        ["1n", "2n2", "4n7"],  # C2
        [30, 150],  # Q_L
    )
)


@pytest.mark.parametrize(("RC", "C2", "Q_L"), GRID)
def test_sigma_sign_agrees_with_loop_gain(RC: str, C2: str, Q_L: float) -> None:
    # Bode: det(Y_full) = det(Y_broken)·(1 − T), so a pole crosses the jω axis
    # exactly where T = 1 (Bode, Network Analysis and Feedback Amplifier Design,
    # from memory). Grid points close to the threshold are skipped.
    design = design_from(BASE_CE, bias__RC=RC, tank__C2=C2, tank__Q_L=Q_L)
    solved = solve(design)
    if solved.f_osc is None or abs(solved.gain - 1.0) < 1e-3:
        pytest.skip("no crossing or at the threshold")
    poles = natural_frequencies(solved.ss, solved.tank.f_ideal, solved.f_osc)
    assert poles.dominant is not None
    assert (poles.dominant.sigma > 0) == (solved.gain > 1.0)


def test_pole_of_lossless_tank_at_threshold_sits_near_f_osc() -> None:
    # Near T = 1 the dominant pair is on the jω axis at the oscillation frequency.
    from ringwise.analysis.threshold import find_threshold
    from ringwise.design import with_param

    design = design_from(BASE_CE)
    th = find_threshold(design, "RC")
    at = solve(with_param(design, "RC", th.value * 1.0001))
    poles = natural_frequencies(at.ss, at.tank.f_ideal, at.f_osc)
    assert poles.dominant.f == pytest.approx(at.f_osc, rel=1e-4)
    assert abs(poles.dominant.sigma) < 1e-3 * 2 * 3.14159 * at.f_osc


def test_growth_time_is_reciprocal_sigma() -> None:
    r = analyze(design_from(BASE_CE))
    assert r.poles.sigma > 0
    assert r.poles.growth_time == pytest.approx(1.0 / r.poles.sigma)


def test_second_rhp_pole_is_reported_as_a_low_frequency_loop() -> None:
    # The rule: any growing natural frequency besides the dominant pair is a
    # warning; a low-frequency one names the coupling/bypass loop and defers
    # to the steady state's multipliers (common practice, no source).
    from ringwise.analysis.checks import rule_checks
    from ringwise.analysis.poles import Pole, PoleFigures

    solved = solve(design_from(BASE_CE))
    f = solved.f_osc
    poles = PoleFigures(dominant=Pole(1e5, f), other_rhp=[Pole(300.0, f / 500)])
    found = [w for w in rule_checks(solved, [], poles) if w.code == "extra-rhp-pole"]
    assert len(found) == 1
    assert "low-frequency loop" in found[0].message and "multipliers" in found[0].message
    quiet = PoleFigures(dominant=Pole(1e5, f), other_rhp=[])
    assert not [w for w in rule_checks(solved, [], quiet) if w.code == "extra-rhp-pole"]
