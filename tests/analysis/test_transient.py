"""Nonlinear transient: integrator checks, the reference solver, growth rate, squegging."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from ringwise.analysis.operating import solve
from ringwise.analysis.poles import natural_frequencies
from ringwise.analysis.reference import reference_run
from ringwise.analysis.transient import SimulationError, _crossings, integrate, run, unwarp
from ringwise.circuit.mna import assemble
from ringwise.circuit.netlist import GROUND, NPN, Capacitor, Inductor, Netlist, NPNParams, Resistor
from ringwise.design import with_param
from tests.conftest import BASE_CE, design_from, load_sample, sample_paths


def test_trapezoidal_rule_conserves_a_lossless_LC() -> None:
    # The trapezoidal rule is symplectic on a linear oscillator: no numerical
    # damping, and a phase error of (ωh)²/12 per radian (Hairer, Nørsett &
    # Wanner, Solving ODEs I, from memory). A transistor is present but starved
    # (I_S tiny, terminals tied down), so the circuit is a pure LC.
    L, C = 10e-6, 1e-9
    off = NPNParams(IS=1e-40, beta=100, beta_R=1, VA=100, VT=0.025, fT=1e9, C_mu=0)
    net = Netlist(
        (
            Capacitor("C", "a", GROUND, C),
            Inductor("L", "a", GROUND, L, 0.0),
            NPN("Q", "qc", "qb", "qe", off),
            Resistor("Rc", "qc", GROUND, 1.0),
            Resistor("Rb", "qb", GROUND, 1.0),
            Resistor("Re", "qe", GROUND, 1.0),
        )
    )
    system = assemble(net)
    x0 = np.zeros(system.layout.size)
    x0[system.layout.node["a"]] = 1.0
    f0 = 1 / (2 * math.pi * math.sqrt(L * C))
    cycles = 1000
    trace = integrate(system, x0, 1 / (f0 * 128), cycles / f0, "a")
    v = trace.v_out
    first, last = np.abs(v[: 128 * 2]).max(), np.abs(v[-128 * 2 :]).max()
    assert last == pytest.approx(first, rel=1e-3)
    assert first == pytest.approx(1.0, rel=1e-3)
    cross = _crossings(trace.t, v)
    f_d = (len(cross) - 1) / (cross[-1] - cross[0])
    # The rule's frequency warping is known exactly (bilinear map, see unwarp):
    # uncorrected the period is (ωh)²/12 ≈ 2e-4 long, corrected it is exact.
    assert f0 / f_d == pytest.approx(1 + (2 * math.pi / 128) ** 2 / 12, abs=2e-5)
    assert unwarp(f_d, 1 / (f0 * 128)) == pytest.approx(f0, rel=1e-4)


def test_transient_matches_scipy_radau() -> None:
    # Reference library: scipy.integrate.solve_ivp (Radau, rtol 1e-7) on the same
    # equations. Amplitude within 1 %, frequency within 0.1 %.
    design = load_sample(next(p for p in sample_paths() if "common-base" in p.name))
    cycles = 40
    ours = run(design, cycles=cycles)
    t, vo, _vb, _ve, f_ref = reference_run(design, cycles)
    tail = t >= t[-1] - 10 / f_ref
    ref_amp = 0.5 * (vo[tail].max() - vo[tail].min())
    cross = _crossings(t[tail], vo[tail] - vo[tail].mean())
    ref_f = (len(cross) - 1) / (cross[-1] - cross[0])
    assert ours.amp_out_peak == pytest.approx(ref_amp, rel=0.01)
    assert ours.f_meas == pytest.approx(ref_f, rel=1e-3)


def _envelope_rate(design, cycles: float) -> float:
    """Growth (or decay) rate of the envelope while it is still small, 1/s."""
    tr = run(design, cycles=cycles, points=20000)
    t, env = np.array(tr.envelope_t), np.array(tr.envelope)
    linear = env < 0.05 * env.max()  # small-signal part of the record
    linear &= t > 0.1 * t[-1]  # after the kick's own transient
    slope, _ = np.polyfit(t[linear], np.log(env[linear]), 1)
    return slope


def test_below_threshold_decays_and_above_grows_at_sigma() -> None:
    # Near threshold the envelope grows (or decays) as e^{σt} with σ the real part
    # of the dominant poles (small-signal theory; the check is within 10 %).
    base = design_from(BASE_CE)
    from ringwise.analysis.threshold import find_threshold

    th = find_threshold(base, "RC").value
    above = with_param(base, "RC", th * 1.15)
    below = with_param(base, "RC", th * 0.85)
    for design, grows in ((above, True), (below, False)):
        s = solve(design)
        sigma = natural_frequencies(s.ss, s.tank.f_ideal, s.f_osc).dominant.sigma
        assert (sigma > 0) == grows
        rate = _envelope_rate(design, 60)
        assert rate == pytest.approx(sigma, rel=0.10)


def test_squegging_is_detected_and_warned_before_simulating() -> None:
    # High margin with slow bias capacitors: the envelope collapses and rebuilds.
    from ringwise.analysis.analyze import analyze

    clapp = load_sample(next(p for p in sample_paths() if "clapp" in p.name))
    squegger = clapp.model_copy(
        update={
            "bias": clapp.bias.model_copy(update={"RC": 330.0, "CE": 220e-9}),
            "coupling": clapp.coupling.model_copy(update={"Cc1": 100e-9, "Cc2": 100e-9}),
        }
    )
    # the steady state's multipliers say so before any run: a real multiplier
    # above 1 (the envelope drifts off the orbit) or a complex pair outside
    r = analyze(squegger)
    assert {"squegging", "unstable-orbit"} & {w.code for w in r.warnings}
    assert r.verdict.code in ("squegs", "unstable") and r.verdict.icon == "stop"
    tr = run(squegger, cycles=300)
    assert tr.squegging
    assert any("squegging" in n for n in tr.notes)
    calm = run(clapp, cycles=200)
    assert not calm.squegging and calm.settled


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.name)
def test_sample_transients_report_everything(path) -> None:
    if load_sample(path).crystal is not None:
        pytest.skip(
            "a crystal builds up over thousands of cycles; its startup time comes from "
            "the growth rate (tests/analysis/test_crystal.py)"
        )
    tr = run(load_sample(path), cycles=150)
    assert not tr.squegging
    # settled only once the slowest deviation (the steady state's largest
    # multiplier) has had time to fall to 1 %; otherwise the run says so
    assert tr.settled or any("periods to fall to 1 %" in n for n in tr.notes)
    assert tr.f_meas == pytest.approx(solve(load_sample(path)).f_osc, rel=0.02)
    assert 0 < tr.thd < 0.5
    assert len(tr.harmonics_dBc) == 6 and all(h < 0 for h in tr.harmonics_dBc)
    assert 0 < tr.t_startup_90 < tr.cycles_run / tr.f_meas
    assert tr.amp_out_pp == pytest.approx(2 * tr.amp_out_peak)


def test_caps_on_requested_work() -> None:
    d = load_sample(sample_paths()[0])
    with pytest.raises(SimulationError, match="cycles must be between"):
        run(d, cycles=1e6)
    with pytest.raises(SimulationError, match="points must be between"):
        run(d, cycles=100, points=10**7)


def test_progress_is_reported_and_cancels() -> None:
    from ringwise.analysis.transient import SimulationCancelledError

    d = load_sample(sample_paths()[0])
    seen: list[float] = []
    run(d, cycles=60, progress=lambda f: seen.append(f) or True)
    assert seen and all(0 < a < b <= 1 for a, b in itertools.pairwise(seen))
    with pytest.raises(SimulationCancelledError):
        run(d, cycles=60, progress=lambda f: False)


def test_settled_is_judged_against_the_slowest_multiplier():
    """A run shorter than the steady state's settling time is not called settled, and says why."""
    from ringwise.analysis.periodic import steady_state
    from tests.conftest import load_sample, sample_paths

    design = load_sample(next(p for p in sample_paths() if p.stem == "proximity-exciter-150k"))
    slow = steady_state(solve(design)).settle_cycles
    r = run(design, cycles=100)
    assert slow > 1000 and not r.settled
    assert any("Floquet multiplier" in n for n in r.notes)


def test_the_step_control_halves_grows_back_and_keeps_its_bound(monkeypatch) -> None:
    # A tolerance 100x tighter makes the local-error control halve the step at
    # every current pulse and grow it back after: the steps taken in stretches
    # must still obey the control's bound, step by step (Nagel, SPICE2, 1975:
    # trapezoidal LTE from divided differences, from memory), and the amplitude
    # stays that of the default run (within 0.5 %, common practice, no source).
    import ringwise.analysis.transient as transient

    d = load_sample(next(p for p in sample_paths() if "clapp" in p.name))
    loose = run(d, cycles=60)
    monkeypatch.setattr(transient, "LTE_TOL", transient.LTE_TOL / 100)
    solved = solve(d)
    system, x0 = transient.transient_system(solved)
    h0 = 1.0 / (solved.f_osc * transient.STEPS_PER_CYCLE)
    trace = integrate(system, x0, h0, 60 / solved.f_osc, transient.T1)
    assert trace.rejected > 0 and trace.steps == len(trace.t) - 1
    dt = np.diff(trace.t)
    level = np.rint(np.log2(h0 / dt))
    assert np.allclose(dt, h0 / 2**level, rtol=1e-6) and level.max() <= transient.MAX_HALVINGS
    assert np.any(np.diff(level) < 0), "the step never grew back"
    # every step judged (four equal intervals up to it, above the smallest step)
    # kept its third difference within the bound of the swing before it
    v = trace.v_out
    scale = np.maximum.accumulate(np.maximum(np.abs(v - v[0]), transient.KICK_VOLTS))
    for j in range(4, len(v)):
        if level[j - 1] < transient.MAX_HALVINGS and np.all(level[j - 4 : j] == level[j - 1]):
            err = abs(v[j] - 3 * v[j - 1] + 3 * v[j - 2] - v[j - 3]) / 12
            assert err <= transient.LTE_TOL * scale[j - 1], j
    tight = run(d, cycles=60)
    assert tight.rejected_steps == trace.rejected
    assert tight.amp_out_peak == pytest.approx(loose.amp_out_peak, rel=5e-3)
