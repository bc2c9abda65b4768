"""Stability figures: Leeson's formula, loaded Q, pushing, pulling, stresses."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from ringwise.analysis.analyze import analyze
from ringwise.analysis.operating import solve
from ringwise.analysis.stability import leeson
from ringwise.design import Design, with_param
from tests.conftest import BASE_CE, design_from, ideal_data, load_sample, sample_paths


def test_leeson_hand_example() -> None:
    # Leeson, Proc. IEEE 1966, in the form 2FkT/P_s of Lee & Hajimiri, IEEE JSSC
    # 35(3), 2000 (both from memory). Hand arithmetic with f0 = 10 MHz, Q_L = 20,
    # P_s = 1 mW, F = 6 dB (3.981), fc = 10 kHz, T = 290 K:
    # floor = 2·F·k·T/P_s = 2 × 3.981 × 4.004e-21 / 1e-3 = 3.188e-17 → −164.96 dB;
    # at Δf = 1 kHz: (f0/(2·Q·Δf))² = 250² = 62500, (1 + fc/Δf) = 11
    # → −164.96 + 10·log10(62501·11) = −164.96 + 58.37 = −106.59 dBc/Hz.
    k = 1.380649e-23
    floor = 2 * 10**0.6 * k * 290 / 1e-3
    hand = 10 * math.log10(floor * (1 + 250**2) * 11)
    assert hand == pytest.approx(-106.59, abs=0.01)
    assert leeson(1e3, 10e6, 20.0, 1e-3, 6.0, 10e3, 290.0) == pytest.approx(hand, abs=1e-9)
    # Far out only the floor (and the flicker term's tail) remains.
    far = leeson(1e9, 10e6, 20.0, 1e-3, 6.0, 10e3, 290.0)
    assert far == pytest.approx(10 * math.log10(floor), abs=0.01)


def test_noise_slopes_in_the_three_regions() -> None:
    # 1/f³ below the flicker corner (−30 dB/decade), 1/f² between it and the
    # Leeson corner (−20 dB/decade), flat above (Leeson 1966, from memory).
    args = (10e6, 20.0, 1e-3, 6.0, 1e3, 290.0)
    d3 = leeson(1.0, *args) - leeson(10.0, *args)
    d2 = leeson(1e4, *args) - leeson(1e5, *args)
    assert d3 == pytest.approx(30.0, abs=0.5)
    assert d2 == pytest.approx(20.0, abs=0.5)


def test_loaded_Q_is_the_parallel_RLC_value_when_only_a_resistor_loads_the_tank() -> None:
    # With the transistor reduced to a pure transconductance (ideal limit) and a
    # resistor R the only loss, the loop's phase slope gives the parallel RLC's
    # Q = R·√(C/L) (Sedra & Smith / any circuits text, from memory). In the CE
    # form R sits across C1 and the tank looks, from there, like L in parallel
    # with C_s with its inductive branch stepped up: referred to the full coil,
    # R appears as R·((C1 + C2)/C2)²; Q = R'·√(C_s/L).
    data = ideal_data("common-emitter")
    design = Design.model_validate(data)
    s = solve(design)
    t = design.tank
    R_ref = design.bias.RC * ((t.C1 + t.C2) / t.C2) ** 2
    Cs = t.C1 * t.C2 / (t.C1 + t.C2)
    assert float(s.loop.Q_loaded) == pytest.approx(R_ref * math.sqrt(Cs / t.L), rel=0.02)


def test_pushing_is_the_difference_of_two_full_analyses(base_ce) -> None:
    """At full amplitude: the steady state's frequency at Vcc ± 1 %."""
    r = analyze(base_ce)
    step = 0.01 * base_ce.supply.Vcc
    hi = analyze(with_param(base_ce, "Vcc", base_ce.supply.Vcc + step)).steady_state.f
    lo = analyze(with_param(base_ce, "Vcc", base_ce.supply.Vcc - step)).steady_state.f
    assert r.stability.pushing_Hz_per_V == pytest.approx((hi - lo) / (2 * step), rel=1e-4)


def test_small_signal_answer_has_pushing_but_no_amplitude_figures(base_ce) -> None:
    r = analyze(base_ce, large_signal=False)
    step = 0.01 * base_ce.supply.Vcc
    hi = analyze(with_param(base_ce, "Vcc", base_ce.supply.Vcc + step)).loop.f_osc
    lo = analyze(with_param(base_ce, "Vcc", base_ce.supply.Vcc - step)).loop.f_osc
    assert r.stability.pushing_Hz_per_V == pytest.approx((hi - lo) / (2 * step), rel=1e-6)
    assert r.steady_state is None and r.stability.P_signal is None and r.stability.parts == []
    assert r.verdict.code == "pending"


def test_resistive_load_does_not_pull_the_ideal_common_emitter_tank() -> None:
    # Analytic: with the collector node driven by an ideal transconductance, the
    # zero-phase condition of T is C1 + C2/(1 − ω²L·C2) = 0, i.e. ω² = 1/(L·C_s),
    # whatever conductance sits across C1 (derivation: nodal equations of the
    # π-network, by hand). So a resistive load there shifts nothing.
    data = ideal_data("common-emitter")
    data["load"] = {"R_load": 2200.0}
    r = analyze(Design.model_validate(data))
    assert abs(r.stability.pulling_Hz) < 1e-6 * r.loop.f_osc


def test_real_load_pulls_and_is_reported(base_ce) -> None:
    loaded = design_from(BASE_CE, load={"R_load": 1000.0})
    r = analyze(loaded)
    assert r.stability.pulling_Hz != 0
    assert r.stability.pulling_Hz_per_ohm is not None


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.name)
def test_samples_have_stability_figures(path) -> None:
    r = analyze(load_sample(path))
    st = r.stability
    assert [p.offset for p in st.phase_noise] == [100.0, 1e3, 10e3, 100e3]
    values = [p.dBc_Hz for p in st.phase_noise]
    assert all(b < a for a, b in itertools.pairwise(values))
    assert values[-1] < -80
    assert values[-1] > -200
    assert len(st.curve.offset) == len(st.curve.dBc_Hz) > 10
    coil = next(p for p in st.parts if p.part == "L")
    # Leeson's P_s: the loaded resonator's loss ω·L·I_rms²/Q_loaded (Lee & Hajimiri 2000)
    w = 2 * math.pi * r.steady_state.f
    L = solve(load_sample(path)).netlist["L"].L  # the coil, or a crystal's motional arm
    assert st.P_signal == pytest.approx(w * L * coil.I_rms**2 / st.Q_loaded, rel=1e-9)
    # the computed phase noise beside it: shares add to 100 % (common practice, no source)
    assert "perturbation projection vector" in st.method
    assert sum(s.share_1k for s in st.sources) == pytest.approx(1.0, abs=1e-9)
    assert sum(s.share_100k for s in st.sources) == pytest.approx(1.0, abs=1e-9)
    assert 0.0 < st.F_effective_dB < 30.0
    computed = [p.dBc_Hz for p in st.spectrum]
    assert all(b < a for a, b in itertools.pairwise(computed))
    assert st.diffusion > 0 and st.flicker_corner > 0
    assert coil.I_rms > 0 and all(np.isfinite(p.V_peak) for p in st.parts)
    assert st.pushing_Hz_per_V is not None


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.stem)
def test_pushing_at_amplitude_is_the_derivative_full_solves_converge_to(path) -> None:
    """Pushing from the orbit's own first-order neighbours against central
    differences of full shooting solves at Vcc ± 0.4 % and ± 0.2 %, extrapolated
    to a zero step (Richardson: the difference's error is even in the step), within
    1e-3 (implicit differentiation of a periodic orbit; common practice, no source)."""
    from ringwise.analysis.periodic import steady_state
    from ringwise.analysis.stability import pushing_at_amplitude

    design = load_sample(path)
    s = solve(design)
    ss = steady_state(s, warm=False)
    if ss.orbit is None:
        pytest.skip("no orbit")
    V = design.supply.Vcc

    def difference(k: float) -> float:
        hi, lo = (
            steady_state(solve(with_param(design, "Vcc", V * (1 + sign * k))), warm=False).f
            for sign in (1, -1)
        )
        return (hi - lo) / (2 * k * V)

    d1, d2 = difference(0.004), difference(0.002)
    limit = d2 + (d2 - d1) / 3.0
    assert pushing_at_amplitude(s, ss) == pytest.approx(limit, rel=1e-3)
