"""A crystal in place of the coil (app/analysis/crystal.py and its netlist).

External checks, each with its source beside it: the Butterworth–Van Dyke
resonances f_s = 1/(2π√(L₁C₁)) and f_p = f_s·√(1 + C₁/C₀); the frequency
with load capacitance f_s·(1 + C₁/(2(C₀ + C_L))) (IEC 60444 and common
practice, from memory); the negative resistance of an ideal Colpitts
−g_m/(ω²·C1·C2) (textbook, from memory).
"""

from __future__ import annotations

import math

import pytest
from pydantic import ValidationError

from ringwise.analysis.analyze import analyze
from ringwise.analysis.crystal import crystal_figures, presented_impedance
from ringwise.analysis.operating import solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.poles import natural_frequencies
from ringwise.circuit.netlist import Capacitor, Inductor
from ringwise.circuit.topologies import build, series
from ringwise.design import Design
from tests.conftest import BASE_CE, design_from, ideal_data

#: A 10 MHz fundamental crystal, values typical, from memory.
CRYSTAL = {"R_x1": 20, "f_xs": "10M", "C_x1": "15f", "C_x0": "4p"}
PIERCE_TANK = {"L": "10u", "Q_L": 90, "C1": "100p", "C2": "220p"}


def pierce(**crystal):
    return design_from(
        BASE_CE, tank=PIERCE_TANK, bias={**BASE_CE["bias"], "RC": "2k2"},
        crystal={**CRYSTAL, **crystal},
    )  # fmt: skip


def ideal_follower(C_x0: float = 1e-15, R_x1: float = 0.1) -> Design:
    """The crystal Colpitts (common-collector, crystal from base to ground), ideal parts;
    the emitter near 10 V so that RE hardly loads C1 (g_m·RE ≈ 390)."""
    data = ideal_data("common-collector")
    data["bias"].update(RB1=1.2e9, RB2=1e10, RE=1e5)
    data["tank"].update(C1=100e-12, C2=220e-12)
    data["crystal"] = {"R_x1": R_x1, "f_xs": "10M", "C_x1": "15f", "C_x0": C_x0}
    return Design.model_validate(data)


def test_the_crystal_takes_the_coils_place_in_the_netlist() -> None:
    net = build(pierce())
    arm, c1, c0 = net["L"], net["C_x1"], net["C_x0"]
    assert isinstance(arm, Inductor) and isinstance(c1, Capacitor) and isinstance(c0, Capacitor)
    assert arm.R_s == 20
    # f_s = 1/(2π√(L₁C₁)) (Butterworth–Van Dyke, textbook, from memory)
    assert 1 / (2 * math.pi * math.sqrt(arm.L * c1.C)) == pytest.approx(10e6, rel=1e-12)
    # C0 spans the whole crystal: from the arm's first terminal to C_x1's far end
    assert (c0.a, c0.b) == (arm.a, c1.b)


def test_crystal_needs_one_of_its_inductance_or_series_frequency() -> None:
    with pytest.raises(ValidationError, match="L_x1 or its series resonance f_xs"):
        pierce(L_x1="16m")
    by_L = pierce(f_xs=None, L_x1=1 / ((2 * math.pi * 10e6) ** 2 * 15e-15))
    assert solve(by_L).f_osc == pytest.approx(solve(pierce()).f_osc, rel=1e-12)


def test_series_and_parallel_resonances_against_their_closed_forms() -> None:
    s = solve(pierce())
    c = crystal_figures(s, None, natural_frequencies(s.ss, s.tank.f_ideal, s.f_osc))
    # f_s = 1/(2π√(L₁C₁)), f_p = f_s·√(1 + C₁/C₀) (Butterworth–Van Dyke, from memory)
    assert c.f_s == pytest.approx(10e6, rel=1e-12)
    assert c.f_p == pytest.approx(10e6 * math.sqrt(1 + 15e-15 / 4e-12), rel=1e-12)
    # the circuit oscillates where the crystal is inductive, between f_s and f_p
    assert c.f_s < s.f_osc < c.f_p


@pytest.mark.parametrize("C_x0", [1e-15, 3e-12])
def test_frequency_with_the_load_capacitance_follows_iec_60444(C_x0: float) -> None:
    design = ideal_follower(C_x0)
    s = solve(design)
    C_L = series(100e-12, 220e-12)
    # f_L = f_s·(1 + C₁/(2(C₀ + C_L))) (IEC 60444 and common practice, from memory)
    f_L = 10e6 * (1 + 15e-15 / (2 * (C_x0 + C_L)))
    assert (s.f_osc / 10e6 - 1) == pytest.approx(f_L / 10e6 - 1, rel=2e-3)
    c = crystal_figures(s, None, natural_frequencies(s.ss, s.tank.f_ideal, s.f_osc))
    assert c.C_load == pytest.approx(C_L, rel=1e-3)
    # pulling: d/dC_L of the same closed form, ppm per pF
    expected = -15e-15 / (2 * (C_x0 + C_L) ** 2) * 1e-12 * 1e6
    assert c.pulling_ppm_per_pF == pytest.approx(expected, rel=1e-3)


def test_negative_resistance_of_an_ideal_colpitts() -> None:
    s = solve(ideal_follower())
    w = 2 * math.pi * s.f_osc
    Z = presented_impedance(s, s.f_osc)
    # −g_m/(ω²·C1·C2) (textbook, from memory); RE leaves about 0.6 % here
    assert Z.real == pytest.approx(-s.hybrid.gm / (w**2 * 100e-12 * 220e-12), rel=1e-2)


def test_margin_at_one_is_the_loop_gain_threshold() -> None:
    # |R_neg|/R₁ = 1 is where the oscillation stops: both verdicts agree
    s = solve(ideal_follower(R_x1=0.1))
    c = crystal_figures(s, None, natural_frequencies(s.ss, s.tank.f_ideal, s.f_osc))
    for factor, starts in ((0.9, True), (1.1, False)):
        s2 = solve(ideal_follower(R_x1=c.margin * 0.1 * factor))
        assert (s2.gain > 1) is starts


def test_the_result_carries_drive_level_startup_time_and_warnings() -> None:
    r = analyze(pierce(P_xmax="100u"))
    c = r.crystal
    assert c is not None and c.P_drive is not None and c.P_drive > 0
    assert c.startup_time is not None and c.startup_time > 0
    # from 1 µV to the steady amplitude at the growth rate of the dominant poles
    ss = steady_state(solve(pierce()))
    n_tau = math.log(ss.amp_out / 1e-6)
    # (rel 1e-4: the orbit's last digits depend on its warm start)
    assert c.startup_time == pytest.approx(n_tau * r.poles.growth_time, rel=1e-4)
    # the drive level is R₁ times the arm's mean-square current on the orbit
    arm = next(p for p in ss.parts if p.part == "L")
    assert c.P_drive == pytest.approx(20 * arm.I_rms**2, rel=1e-3)
    codes = {w.code for w in r.warnings}
    assert "crystal-overdriven" in codes  # 100 µW rating against a hard-driven Pierce
    assert analyze(design_from(BASE_CE)).crystal is None


def test_spread_margin_at_every_corner_equals_the_single_design_figure() -> None:
    """The spread's batched |R_neg|/R₁ at its worst corner against the sheet's own
    crystal figures for that sample at that temperature (one design, one solve)."""
    from ringwise.analysis.spread import monte_carlo, sample_design, spread_out

    d = pierce()
    r = monte_carlo(d, samples=30, seed=5)
    w = r.crystal_worst
    assert w is not None and r.crystal_margin_min == w["margin"] > 0
    one = sample_design(d, r.draws, w["sample"], w["T_C"])
    s = solve(one)
    c = crystal_figures(s, None, natural_frequencies(s.ss, s.tank.f_ideal, s.f_osc))
    assert c is not None
    assert w["margin"] == pytest.approx(c.margin, rel=1e-6)
    assert w["R_neg"] == pytest.approx(c.R_neg, rel=1e-6)
    # every other corner is no worse: the nominal design's margin is above the worst
    nominal = crystal_figures(solve(d), None, natural_frequencies(*_poles_args(d)))
    assert nominal.margin >= w["margin"]
    assert 0.0 <= r.crystal_margin_yield <= 1.0
    out = spread_out(d, r).spread
    assert out.crystal_worst.margin == pytest.approx(w["margin"])
    assert out.crystal_margin_min == pytest.approx(w["margin"])


def _poles_args(d):
    s = solve(d)
    return s.ss, s.tank.f_ideal, s.f_osc


def test_a_crystal_design_needs_no_coil() -> None:
    """The crystal replaces the coil: L and Q_L may be left out, and the figures are
    those of the same design with an (unused) coil written in."""
    with_coil = pierce()
    data = with_coil.model_dump(mode="json")
    data["tank"].update(L=None, Q_L=None)
    no_coil = Design.model_validate(data)
    assert no_coil.tank.L is None and "L" in build(no_coil)  # the motional arm
    a, b = analyze(with_coil), analyze(no_coil)
    assert b.loop.f_osc == pytest.approx(a.loop.f_osc, rel=1e-12)
    assert b.loop.gain == pytest.approx(a.loop.gain, rel=1e-12)
    assert b.crystal.margin == pytest.approx(a.crystal.margin, rel=1e-9)
    assert b.steady_state.behaviour == a.steady_state.behaviour
    assert b.steady_state.f == pytest.approx(a.steady_state.f, rel=1e-9)
    assert b.crystal.P_drive == pytest.approx(a.crystal.P_drive, rel=1e-4)
    from ringwise.analysis.spread import monte_carlo

    assert monte_carlo(no_coil, samples=10, seed=2).crystal_margin_min > 0
    # a coil design still needs its coil, and says why
    coil = with_coil.model_dump(mode="json")
    coil["crystal"] = None
    coil["tank"]["Q_L"] = None
    with pytest.raises(ValidationError, match=r"tank\.Q_L is required without a crystal"):
        Design.model_validate(coil)
