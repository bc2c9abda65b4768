"""Shooting-Newton periodic steady state and its Floquet multipliers.

External checks and their sources are named beside each test.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from ringwise.analysis import transient
from ringwise.analysis.floquet import classify
from ringwise.analysis.operating import solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.reference import integrate_reference
from ringwise.analysis.steady import (
    STEPS_PER_PERIOD,
    _linearisation,
    _trajectory,
    shoot,
    warped_period,
)
from ringwise.analysis.stepper import Dynamics, _Stepper
from ringwise.analysis.transient import transient_system
from ringwise.circuit.topologies import GAIN_SETTER, T1
from ringwise.design import Design, get_param, with_param


def _van_der_pol(eps: float) -> Dynamics:
    """A lossless 1 F / 1 H tank with a cubic conductance i = ε(v³/3 − v) across it.

    Node row: v' + i_L + ε(v³/3 − v) = 0; coil row: v − i_L' = 0; so
    v'' − ε(1 − v²)v' + v = 0, van der Pol's equation.
    """

    def phi(v0: float, _v1: float) -> tuple:
        return (eps * (v0**3 / 3.0 - v0), 0.0, 0.0, 0.0, eps * (v0 * v0 - 1.0), 0.0, 0.0, 0.0)

    C = np.array([[1.0, 0.0], [0.0, -1.0]])
    G = np.array([[0.0, 1.0], [1.0, 0.0]])
    P = np.array([[1.0, 0.0], [0.0, 0.0]])
    W = np.array([[1.0, 0.0], [0.0, 0.0]])
    return Dynamics(C, G, np.zeros(2), P, W, phi)


def _vdp_orbit(eps: float):
    dyn = _van_der_pol(eps)
    return shoot(dyn, np.array([0.0, 1.5]), warped_period(1.0 / (2 * math.pi)), np.ones(2))


@pytest.mark.parametrize("eps", [0.05, 0.1, 0.2])
def test_van_der_pol_amplitude_and_frequency(eps):
    orbit = _vdp_orbit(eps)
    v = orbit.x[:-1, 0]
    # Strogatz, Nonlinear Dynamics and Chaos, §7.6 (two-timing), from memory:
    # r → 2 as ε → 0 and ω = 1 − ε²/16 + O(ε³).
    assert v.max() == pytest.approx(2.0, abs=0.02 * eps / 0.2)
    assert 2 * math.pi * orbit.f == pytest.approx(1.0 - eps**2 / 16.0, abs=3e-5 + eps**3 / 50)


@pytest.mark.parametrize("eps", [0.05, 0.1])
def test_van_der_pol_multipliers(eps):
    orbit = _vdp_orbit(eps)
    fl = classify(orbit.monodromy, orbit.flow)
    # the trivial multiplier of an autonomous oscillator is 1 (common practice, no source)
    assert abs(fl.trivial - 1.0) < 1e-6
    # Averaged amplitude equation r' = (ε r/2)(1 − r²/4) (Strogatz §7.6, from memory):
    # its slope at r = 2 is −ε, so the other multiplier is exp(−ε·2π) to O(ε²).
    assert fl.multipliers.size == 1
    assert fl.multipliers[0].real == pytest.approx(math.exp(-2 * math.pi * eps), rel=2 * eps**2)
    assert fl.behaviour == "settles"


def test_damped_tank_multipliers_match_exp_sigma_T():
    """A series R-L-C with nothing nonlinear: the monodromy over T is exp(A·T)."""
    R, L, Cap = 0.05, 1.0, 1.0
    C = np.array([[Cap, 0.0], [0.0, -L]])
    G = np.array([[0.0, 1.0], [1.0, -R]])
    zero = np.zeros((2, 2))

    def phi(_a: float, _b: float) -> tuple:
        return (0.0,) * 8

    dyn = Dynamics(C, G, np.zeros(2), zero, zero, phi)
    T = 2 * math.pi
    N = STEPS_PER_PERIOD
    stepper = _Stepper(dyn)
    X, _phi, J = _trajectory(stepper, np.array([1.0, 0.0]), T / N, N)
    _S, Phi, _d = _linearisation(stepper, np.full(N, T / N), X, J)
    mu = np.linalg.eigvals(Phi)
    # Linear ODE: Floquet multipliers exp(λT), λ = −σ ± jω_d with σ = R/2L
    # (any circuits text, e.g. Desoer & Kuh, Basic Circuit Theory, from memory).
    sigma = R / (2 * L)
    assert np.abs(mu) == pytest.approx([math.exp(-sigma * T)] * 2, rel=1e-4)


# --- the circuits ------------------------------------------------------------

SAMPLES = sorted((Path(__file__).resolve().parents[2] / "sample_designs").glob("*.json"))
#: Periods the reference integration runs from the orbit's start, and the last
#: ones it is measured over.
REFERENCE_PERIODS = 8
MEASURED_PERIODS = 3


def _sample(path: Path) -> Design:
    return Design.model_validate(json.loads(path.read_text(encoding="utf-8")))


def _reference_figures(design: Design, ss) -> tuple[float, float, float]:
    """f, fundamental amplitude and THD at t1 from SciPy's LSODA on the same equations."""
    solved = solve(design)
    system, _x = transient_system(solved)
    T = ss.orbit.T
    t_end = REFERENCE_PERIODS * T
    t = np.linspace(0.0, t_end, REFERENCE_PERIODS * 256 + 1)
    full = integrate_reference(system, ss.orbit.x[0], t_end, t, rtol=1e-8, method="LSODA")
    v = full[:, system.layout.node[T1]]
    tail = t >= t_end - (MEASURED_PERIODS + 0.5) * T
    tt, vv = t[tail], v[tail]
    k = np.nonzero((vv[:-1] - vv.mean() < 0) & (vv[1:] - vv.mean() >= 0))[0]
    c = vv.mean()
    cross = tt[k] + (c - vv[k]) / (vv[k + 1] - vv[k]) * (tt[k + 1] - tt[k])
    n = len(cross) - 1
    f = n / (cross[-1] - cross[0])
    grid = np.linspace(cross[0], cross[-1], 256 * n, endpoint=False)
    spec = np.abs(np.fft.rfft(np.interp(grid, tt, vv))) / len(grid) * 2
    fund = spec[n]
    thd = math.sqrt(sum(spec[k * n] ** 2 for k in range(2, 8))) / fund
    return f, fund, thd


def _at_gain(base: Design, gain: float) -> Design:
    """``base`` with its gain-setting resistor moved until the loop gain is ``gain``."""
    setter = GAIN_SETTER[base.topology]
    value = get_param(base, setter)

    def miss(log_r: float) -> float:
        return solve(with_param(base, setter, math.exp(log_r))).gain - gain

    grid = math.log(value) + np.linspace(-3.0, 3.0, 25)
    signs = [miss(x) > 0 for x in grid]
    i = next(k for k in range(len(grid) - 1) if signs[k] != signs[k + 1])
    return with_param(base, setter, math.exp(brentq(miss, grid[i], grid[i + 1], xtol=1e-6)))


def _check_against_reference(design: Design):
    """The orbit settles and its f, amplitude and THD agree with the reference within 0.5 %."""
    ss = steady_state(solve(design), warm=False)
    assert ss.behaviour == "settles"
    # SciPy solve_ivp LSODA (rtol 1e-8) on the same equations, from the orbit's start
    f, amp, thd = _reference_figures(design, ss)
    assert ss.f == pytest.approx(f, rel=5e-3)
    assert ss.amp_out == pytest.approx(amp, rel=5e-3)
    assert ss.thd == pytest.approx(thd, rel=5e-3, abs=1e-4)
    return ss


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_samples_match_a_long_lsoda_run(path):
    ss = _check_against_reference(_sample(path))
    # the trivial multiplier (common practice, no source)
    assert abs(ss.trivial_multiplier - 1.0) < 1e-6


#: A sample of each form whose gain-setting resistor reaches the loop gains tested.
FORM_SAMPLES = {
    "common-emitter": "clapp-clock-1M",
    "common-base": "common-base-carrier-10M",
    "common-collector": "follower-test-source-4M",
}


def _form_base(topology: str, gain: float = 3.0) -> Design:
    """The form's sample; the follower with C2 halved above a loop gain of 5 (its RE alone
    cannot take it there)."""
    base = _sample(next(p for p in SAMPLES if p.stem == FORM_SAMPLES[topology]))
    if topology == "common-collector" and gain > 5.0:
        base = with_param(base, "C2", get_param(base, "C2") / 2)
    return base


@pytest.mark.parametrize("gain", [2.0, 4.0, 6.0, 9.0])
@pytest.mark.parametrize("topology", ["common-emitter", "common-base", "common-collector"])
def test_loop_gain_designs_match_a_long_lsoda_run(topology, gain):
    _check_against_reference(_at_gain(_form_base(topology, gain), gain))


def _pd455() -> Design:
    """The 455 kHz common-emitter design of the issue (general-purpose class)."""
    return Design.model_validate(
        {
            "name": "period-doubling 455k",
            "topology": "common-emitter",
            "supply": {"Vcc": "12"},
            "bias": {"RB1": "47k", "RB2": "10k", "RE": "2k2", "CE": "220n", "RC": "2k2"},
            "tank": {"L": "330u", "Q_L": "30", "C1": "470p", "C2": "2n2"},
            "coupling": {"Cc1": "470n", "Cc2": "47n"},
            "device": {"preset": "general-purpose"},
        }
    )


def test_455k_design_period_doubles_and_its_transient_shows_f_over_2():
    design = _pd455()
    ss = steady_state(solve(design), warm=False)
    assert ss.behaviour == "period-doubling"
    worst = ss.multipliers[0]
    assert worst.imag == 0.0 and worst.real < -1.0
    # our own transient: alternate peaks differ, a line at f/2 (common practice, no source)
    run = transient.run(design, cycles=300)
    assert any(n.startswith("period-doubled") for n in run.notes)
    assert any(n.startswith("subharmonic f/2") for n in run.notes)
    # the envelope is drawn per pair of periods: a line, not a band
    env = np.array(run.envelope[-40:])
    assert np.mean(np.abs(np.diff(env))) < 0.02 * np.mean(env)
    t, v = np.array(run.t), np.array(run.v_out)
    grid = np.linspace(t[0], t[-1], 4096)
    spec = np.abs(np.fft.rfft(np.interp(grid, t, v) - np.mean(v)))
    f_axis = np.fft.rfftfreq(len(grid), grid[1] - grid[0])
    fund = spec[np.argmin(np.abs(f_axis - run.f_meas))]
    half = spec[np.argmin(np.abs(f_axis - run.f_meas / 2))]
    assert half > 0.03 * fund


def _squegger() -> Design:
    """Common-emitter Clapp at loop gain ≈ 9 whose emitter bypass R_E·C_E is ≈ 320 periods."""
    return Design.model_validate(
        {
            "name": "squegging 1M",
            "topology": "common-emitter",
            "supply": {"Vcc": "24"},
            "bias": {"RB1": "22k", "RB2": "6k8", "RC": "1k5", "RE": "2k2", "CE": "150n"},
            "tank": {"L": "100u", "Q_L": "30", "C1": "2n2", "C2": "4n7", "C3": "330p"},
            "coupling": {"Cc1": "10n", "Cc2": "10n"},
            "device": {"preset": "general-purpose", "beta": 200, "IS": "10f", "VA": 100,
                       "fT": "300M", "C_mu": "3p5"},
        }
    )  # fmt: skip


#: Periods over which the reference runs measure the growth of a deviation.
GROWTH_PERIODS = 25


def test_loop_gain_9_design_with_a_slow_emitter_bypass_squegs():
    design = _squegger()
    solved = solve(design)
    assert 8.5 < solved.gain < 9.5
    assert 200 < design.bias.RE * design.bias.CE * solved.f_osc < 500
    ss = steady_state(solved, warm=False)
    assert ss.behaviour == "squegs"
    worst = ss.multipliers[0]
    assert abs(worst) > 1.0 and worst.imag != 0.0
    # The pair measured independently: SciPy's solve_ivp (LSODA, rtol 1e-10) from the
    # orbit's start, once as it is and once nudged along the pair's eigenvector; the
    # difference of the two runs, sampled once a period and projected on the pair's
    # left eigenvector, is multiplied by μ each period (Floquet theory, e.g. Parker &
    # Chua, Practical Numerical Algorithms for Chaotic Systems, ch. 2, from memory).
    o = ss.orbit
    system, _x = transient_system(solved)
    mu, right = np.linalg.eig(o.monodromy)
    i = int(np.argmin(np.abs(mu - worst)))
    mu_left, left = np.linalg.eig(o.monodromy.T)
    lvec = left[:, int(np.argmin(np.abs(mu_left - mu[i])))]
    nudge = np.zeros_like(o.x[0])
    r = right[:, i].real
    nudge[o.dynamic] = r / np.max(np.abs(r)) * 1e-3 * np.max(np.abs(o.x[0]))
    t = np.arange(GROWTH_PERIODS + 1) / ss.f
    a = integrate_reference(system, o.x[0], t[-1], t, rtol=1e-10, method="LSODA")
    b = integrate_reference(system, o.x[0] + nudge, t[-1], t, rtol=1e-10, method="LSODA")
    z = (b - a)[:, o.dynamic] @ lvec
    measured = np.sum(z[1:] * np.conj(z[:-1])) / np.sum(np.abs(z[:-1]) ** 2)
    assert abs(measured - worst) < 2e-3
    # our own transient from the DC point: the envelope collapses and rebuilds, again
    # and again (common practice, no source)
    run = transient.run(design, cycles=600)
    assert run.squegging and not run.settled
    assert not any(n.startswith("period-doubled") for n in run.notes)
    env = np.array(run.envelope)
    late = env[len(env) // 3 :]
    assert late.max() > 20 * late.min()
    high = late > 0.5 * late.max()
    assert np.count_nonzero(high[1:] & ~high[:-1]) >= 3  # rebuilt at least three times
    assert any(n.startswith("envelope modulation") for n in run.notes)


def test_clean_design_at_loop_gain_3_settles():
    design = _at_gain(_form_base("common-emitter"), 3.0)
    ss = steady_state(solve(design), warm=False)
    assert ss.behaviour == "settles"
    assert 0 < ss.settle_cycles < math.inf
    assert all(abs(m) < 1.0 for m in ss.multipliers)


def test_no_orbit_below_threshold():
    design = _at_gain(_form_base("common-base"), 0.8)
    ss = steady_state(solve(design))
    assert ss.behaviour == "no-orbit" and ss.amp_out is None and ss.reason


def _hard_driven() -> list[Design]:
    """The samples, the issue's 455 kHz design, the squegger and each form at loop gain 9."""
    forms = [_at_gain(_form_base(form, 9.0), 9.0) for form in FORM_SAMPLES]
    return [*(_sample(p) for p in SAMPLES), _pd455(), _squegger(), *forms]


@pytest.mark.parametrize("design", _hard_driven(), ids=lambda d: d.name)
def test_average_collector_current_within_what_the_bias_network_carries(design):
    """Averaged over a period every capacitor's current is zero (it returns to its
    charge), so the bias network's DC equations hold exactly for the period means
    (Kirchhoff's laws; common practice, no source).  In every form the base's only
    DC path is the divider (Thevenin V_th, R_th) and the emitter's only one R_E:

        V_B = V_th − R_th·I_B,   I_E = V_E/R_E = I_C + I_B,   V_E = V_B − ⟨v_BE⟩,

    so I_C = (V_th − ⟨v_BE⟩ − (R_th + R_E)·I_B)/R_E.  The mean of v_BE is at least
    its least value over the period, which bounds what the divider and R_E can
    carry.  (With ⟨v_BE⟩ ≥ 0 this would be V_th/(R_E + R_th/(β+1)), 0.94 mA for the
    455 kHz design; but there the junction peak-rectifies a base swing larger than
    its forward voltage, ⟨v_BE⟩ < 0, and the emitter averages above V_th, which the
    time-domain run confirms.)  With a collector resistor the supply side bounds it
    too: I_C = (V_cc − V_E − ⟨v_CE⟩)/R_C ≤ (V_cc − V_E − min v_CE)/R_C.
    """
    ss = steady_state(solve(design), warm=False)
    o, b = ss.orbit, design.bias
    V_th = design.supply.Vcc * b.RB2 / (b.RB1 + b.RB2)
    R_th = b.RB1 * b.RB2 / (b.RB1 + b.RB2)
    I_B = float(o.mean(o.phi[:, 1]))
    v_be, v_ce = np.array(ss.waveforms["v_be"]), np.array(ss.waveforms["v_ce"])
    # the identity, to the solver's tolerance (G_MIN's picoamperes aside)
    exact = (V_th - float(o.mean(v_be)) - (R_th + b.RE) * I_B) / b.RE
    assert ss.IC_avg == pytest.approx(exact, rel=1e-6)
    # the bound, from the least v_BE
    assert I_B > 0
    assert ss.IC_avg <= (V_th - v_be.min() - (R_th + b.RE) * I_B) / b.RE
    if design.topology != "common-collector" and not design.choke_fed:
        assert ss.IC_avg <= (design.supply.Vcc - ss.VE_avg - v_ce.min()) / b.RC


def test_455k_design_averages_what_its_time_domain_run_averages():
    """The 455 kHz design's I_C,avg (0.98 mA, above the 0.94 mA a divider with V_BE ≥ 0
    would allow) is what the circuit does: our own stepper, run from the orbit until
    the motion has period-doubled, averages within 3 % of it at the emitter (R_E's
    current; common practice, no source)."""
    design = _pd455()
    s = solve(design)
    ss = steady_state(s, warm=False)
    system, _x = transient_system(s)
    f = ss.f
    trace = transient.integrate(system, ss.orbit.x[0], 1 / (128 * f), 150 / f, T1)
    late = trace.t >= 50 / f
    alternate = np.array(
        [np.ptp(trace.v_out[(trace.t >= k / f) & (trace.t < (k + 1) / f)]) for k in (140, 141)]
    )
    assert abs(alternate[0] - alternate[1]) > 0.1 * alternate.max()  # it has period-doubled
    t_late = trace.t[late]
    V_E = float(np.trapezoid(trace.v_e[late], t_late)) / (t_late[-1] - t_late[0])
    I_E_run = V_E / design.bias.RE
    assert ss.IC_avg == pytest.approx(I_E_run, rel=0.03)


def test_warm_start_after_an_edit_finds_the_cold_orbit():
    design = _sample(SAMPLES[0])
    steady_state(solve(design))
    edited = with_param(design, "C1", get_param(design, "C1") * 1.01)
    warm = steady_state(solve(edited))
    cold = steady_state(solve(edited), warm=False)
    assert warm.orbit.iterations <= 3
    assert warm.amp_out == pytest.approx(cold.amp_out, rel=1e-6)
    assert warm.f == pytest.approx(cold.f, rel=1e-9)


#: Figures of the steady state compared between a cold and a warm start.
SHOWN_FIGURES = ("f", "amp_out", "amp_be", "thd", "IC_avg", "VE_avg", "VCE_min", "P_tank", "P_in")


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_the_same_design_gives_the_same_figures_whatever_was_solved_before(path):
    """Warm-started from neighbours solved before it, a design's figures, parts and
    waveforms equal its cold-start ones to well below the printed digits
    (reproducibility; common practice, no source)."""
    from ringwise.analysis.periodic import forget
    from ringwise.circuit.topologies import gain_setter
    from ringwise.display import format_value

    design = _sample(path)
    part = gain_setter(design)
    cold = steady_state(solve(design), warm=False)
    for k in (1.03, 0.95):
        forget()
        steady_state(solve(with_param(design, part, get_param(design, part) * k)))
        warm = steady_state(solve(design))
        assert warm.orbit.iterations < cold.orbit.iterations
        for name in SHOWN_FIGURES:
            a, b = getattr(cold, name), getattr(warm, name)
            assert b == pytest.approx(a, rel=1e-7), name
            assert format_value(b, "V") == format_value(a, "V"), name
        # from the eigenvalues of the last linearisation: a multiplier of 0.9999
        # turns a change of 1e-9 into 1e-5 of the settling time
        assert warm.settle_cycles == pytest.approx(cold.settle_cycles, rel=1e-4)
        for pa, pb in zip(cold.parts, warm.parts, strict=True):
            # the band-limited peak of a sampled waveform moves with the grid's
            # phase only by what the grid aliases: parts per million
            assert pb.V_peak == pytest.approx(pa.V_peak, rel=1e-5), pa.part
        # one period from the output's rising crossing, wherever Newton started: the
        # crossing's instant is interpolated on the grid, so a waveform moves by its
        # slope times what the grid aliases, as the peaks above (parts per million;
        # at 1e-6 the exciter's t2 sat on the edge, flipped by round-off reordering)
        for name, wave in cold.waveforms.items():
            a, b = np.array(wave), np.array(warm.waveforms[name])
            assert np.max(np.abs(a - b)) <= 1e-5 * np.max(np.abs(a)), name


def test_orbit_exposes_what_phase_noise_needs():
    """The left eigenvector of the monodromy for multiplier 1, carried back with S_kᵀ,
    stays periodic (its value after one period equals the start): the orbit's
    step linearisations and monodromy are consistent."""
    ss = steady_state(solve(_sample(SAMPLES[0])), warm=False)
    o = ss.orbit
    d = o.dynamic
    mu, left = np.linalg.eig(o.monodromy.T)
    v = np.real(left[:, np.argmin(np.abs(mu - 1.0))])
    full = np.zeros(o.x.shape[1])
    full[d] = v
    back = full
    for S in o.steps[::-1]:
        back = S.T @ back
    assert back[d] == pytest.approx(v, rel=1e-5, abs=1e-6 * np.abs(v).max())
