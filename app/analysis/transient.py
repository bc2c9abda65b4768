r"""Nonlinear transient of the whole circuit, from the DC point with a small kick.

The equations are the MNA ones of :mod:`ringwise.circuit.mna` — every capacitor
(bypass and coupling included), the inductor with its loss, the transistor's
transport model with both junctions (so saturation and cut-off are real) —
plus the junction capacitances C_π and C_μ taken as linear at their
operating-point values:

.. math:: C\,\dot x + G\,x + P\,\varphi(W^T x) = b

where :math:`\varphi = (I_C, I_B)` is the transistor's current pair as a
function of its two controlling voltages :math:`W^T x = (v_{BE}, v_{CE})`, and
:math:`P` puts I_C into the collector row, I_B into the base row and their
sum out of the emitter row.

Integration is by the trapezoidal rule, which conserves the energy of a
lossless LC exactly and so adds no numerical damping to the resonator.  With
:math:`A = 2C/h + G`, one step is

.. math:: x_{n+1} = \underbrace{A^{-1}(2C/h - G)}_{B}\,x_n + 2A^{-1}b
          - A^{-1}P\,(\varphi_n + \varphi_{n+1}),

so with :math:`A^{-1}` factorised once per step size the Newton iteration
runs on the two controlling voltages only (a 2×2 system; the Woodbury
identity in effect; the stepper is :mod:`ringwise.analysis.stepper`, shared
with the steady state, and its :meth:`~ringwise.analysis.stepper._Stepper.run`
takes the steps, a stretch of equal steps at a time).  A local-error estimate
from third differences of the tank voltage halves the step where the waveform
turns sharply (saturation, current pulses) and lets it grow back afterwards.

References
----------
Hairer, Nørsett & Wanner, *Solving Ordinary Differential Equations I*
(trapezoidal rule: A-stable, order 2, symplectic on linear oscillators);
Nagel, *SPICE2*, 1975 (trapezoidal LTE from divided differences); both from memory.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Final

import numpy as np

from ringwise.analysis import runlines
from ringwise.analysis.operating import Solved, solve
from ringwise.analysis.stepper import _Stepper, circuit_dynamics
from ringwise.circuit.mna import LinearSystem, incidence, with_junction_capacitances
from ringwise.circuit.netlist import Varactor
from ringwise.circuit.topologies import T1
from ringwise.design import Design, Topology
from ringwise.errors import DesignError

#: Steps per oscillation period at the nominal step size.
STEPS_PER_CYCLE: Final = 128
#: Largest number of step halvings below the nominal step.
MAX_HALVINGS: Final = 6
#: Relative local-error bound on the tank voltage per step (relative to the
#: larger of the swing seen so far and KICK_VOLTS).
LTE_TOL: Final = 2e-4
#: Initial kick: a current in the coil that puts about this voltage on the tank, V.
KICK_VOLTS: Final = 1e-3
#: Bounds on the work one request may ask for.
MAX_CYCLES: Final = 20000
MIN_CYCLES: Final = 20
MIN_POINTS: Final = 100
MAX_POINTS: Final = 20000
#: Fraction of the run (at the end) used for the steady-state figures, and its
#: minimum length in cycles.
STEADY_FRACTION: Final = 0.2
STEADY_MIN_CYCLES: Final = 10
#: Harmonics reported (2nd ... HARMONICS-th).
HARMONICS: Final = 7
SAMPLES_PER_CYCLE_FFT: Final = 64
#: Squegging: the envelope, after first reaching SQUEG_HIGH of its maximum,
#: falls below SQUEG_LOW of it and recovers again (common practice, no source).
SQUEG_HIGH: Final = 0.8
SQUEG_LOW: Final = 0.3


class SimulationError(DesignError):
    """A transient request that cannot be run as asked."""


@dataclass(frozen=True)
class Transient:
    """What the transient found.  Amplitudes in V, times in s, frequencies in Hz."""

    f_meas: float | None
    amp_out_peak: float | None
    amp_out_pp: float | None
    amp_out_fund: float | None
    amp_be_fund: float | None
    thd: float | None
    harmonics_dBc: list[float | None]
    t_startup_90: float | None
    VE_shift: float | None
    squegging: bool
    settled: bool
    cycles_run: float
    steps: int
    rejected_steps: int
    bias_time_constant: float
    notes: list[str]
    t: list[float] = field(repr=False)
    v_out: list[float] = field(repr=False)
    v_base: list[float] = field(repr=False)
    envelope_t: list[float] = field(repr=False)
    envelope: list[float] = field(repr=False)
    spectrum_f: list[float] = field(repr=False)
    spectrum_dBc: list[float] = field(repr=False)


def transient_system(solved: Solved) -> tuple[LinearSystem, np.ndarray]:
    """The circuit's matrices with C_π and C_μ added, and the kicked initial state."""
    system = solved.system
    dev = system.devices[0]
    inc = incidence(system.layout, dev)
    C = with_junction_capacitances(system.C, inc, solved.hybrid.C_pi, solved.hybrid.C_mu)
    x0 = solved.op.x.copy()
    f = solved.f_osc or solved.tank.f_ideal
    # A coil current i gives a tank voltage of about i·ω·L.
    x0[system.layout.branch["L"]] += KICK_VOLTS / (2.0 * math.pi * f * solved.netlist["L"].L)
    varactors = tuple(solved.netlist.of_kind(Varactor))
    return LinearSystem(system.layout, system.G, C, system.b, system.devices, varactors), x0


def bias_time_constant(design: Design) -> float:
    """Longest time constant of the bias network that follows the amplitude, s.

    The capacitors that charge from the transistor's rectified current, each
    against the resistance it discharges through: the emitter bypass against RE
    (common-emitter), the base bypass against the divider (common-base), the
    input coupling capacitor against the divider (common-emitter and
    common-collector) or against RE (common-base).
    """
    b, k = design.bias, design.coupling
    R_div = b.RB1 * b.RB2 / (b.RB1 + b.RB2)
    if design.topology is Topology.CE:
        assert b.CE is not None
        return max(b.RE * b.CE, k.Cc2 * R_div)
    if design.topology is Topology.CB:
        assert b.CB is not None
        return max(R_div * b.CB, k.Cc2 * b.RE)
    return max(k.Cc2 * R_div, k.Cc1 * b.RE)


class SimulationCancelledError(Exception):
    """The progress callback asked the run to stop."""


#: The progress callback is called about this often, in steps.
PROGRESS_EVERY: Final = 256
#: Steps of the first stretch after a rejected step (integrate: the stretches
#: double from there up to PROGRESS_EVERY while no step is rejected).
MIN_STRETCH: Final = 16


def run(
    design: Design,
    cycles: float = 300.0,
    points: int = 4000,
    progress: Callable[[float], bool] | None = None,
) -> Transient:
    """Simulate ``cycles`` periods (of the small-signal f_osc) and measure the result.

    ``progress``, if given, is called with the fraction done (0 … 1) every
    ``PROGRESS_EVERY`` steps; returning ``False`` cancels the run
    (:class:`SimulationCancelledError`).
    """
    if not MIN_CYCLES <= cycles <= MAX_CYCLES:
        raise SimulationError(f"cycles must be between {MIN_CYCLES} and {MAX_CYCLES}, got {cycles}")
    if not MIN_POINTS <= points <= MAX_POINTS:
        raise SimulationError(f"points must be between {MIN_POINTS} and {MAX_POINTS}, got {points}")
    solved = solve(design)
    system, x0 = transient_system(solved)
    f_ref = solved.f_osc or solved.tank.f_ideal
    h0 = 1.0 / (f_ref * STEPS_PER_CYCLE)
    trace = integrate(system, x0, h0, cycles / f_ref, T1, progress)
    from ringwise.analysis.periodic import steady_state

    return _measure(solved, trace, f_ref, points, h0, steady_state(solved).settle_cycles)


@dataclass(frozen=True)
class Trace:
    """Samples of one run: time, output node, base-emitter and emitter voltages."""

    t: np.ndarray
    v_out: np.ndarray
    v_be: np.ndarray
    v_e: np.ndarray
    steps: int
    rejected: int


def integrate(
    system: LinearSystem,
    x: np.ndarray,
    h0: float,
    t_end: float,
    out: str,
    progress: Callable[[float], bool] | None = None,
) -> Trace:
    """Trapezoidal integration from state ``x`` to ``t_end`` with nominal step ``h0``.

    ``out`` names the node whose voltage drives the local-error control;
    ``progress`` is as in :func:`run`.

    The steps are taken in stretches of equal steps by :meth:`_Stepper.run`
    (one matrix-vector product a step) and judged afterwards, all at once, as
    if one at a time: a stretch is cut at its first step that the local-error
    control rejects or that fails, or after the step at which the step size
    grows back or the run ends; the rest is discarded and the next stretch
    starts there.  A stretch ends at the next progress report at the latest.
    """
    stepper = _Stepper(circuit_dynamics(system))
    i_out, e_sel = system.layout.node[out], system.layout.unit(system.devices[0].e)
    w_be = stepper.Wt[0]
    t = 0.0
    ts, vo, vbe_t, ve = [np.zeros(1)], [x[i_out : i_out + 1]], [np.array([w_be @ x])], []
    ve.append(np.array([x @ e_sel]))
    last3 = [math.nan, math.nan, float(x[i_out])]  # the last three accepted outputs
    samples = 1
    level, h, since_change, rejected, quiet = 0, h0, 0, 0, 0
    scale = KICK_VOLTS
    vo_mean = float(x[i_out])
    stretch = PROGRESS_EVERY  # doubled after each stretch taken whole, cut back on a rejection
    while t < t_end:
        # to the next progress report or past the end, and on a halved step to
        # about the first step after which it could grow back
        count = min(
            stretch, PROGRESS_EVERY - samples % PROGRESS_EVERY, math.ceil((t_end - t) / h) + 1
        )
        if level > 0:
            count = min(count, max(0, 3 - since_change) + max(1, 8 - quiet))
        X = stepper.run(x, h, count, partial=True)[0][1:]
        m = len(X)
        outs = X[:, i_out]
        times = np.cumsum(np.concatenate(([t], np.full(m, h))))[1:]
        # LTE of the trapezoidal rule ~ h^3 x'''/12, from third differences
        # (the spacing is uniform since the last change of step), against the
        # largest swing before the step
        seq = np.concatenate((last3, outs))
        err = np.abs(seq[3:] - 3.0 * seq[2:-1] + 3.0 * seq[1:-2] - seq[:-3]) / 12.0
        judged = since_change + np.arange(m) >= 3
        dev = np.abs(outs - vo_mean)
        scales = np.maximum.accumulate(np.concatenate(([scale], dev[:-1])))
        reject = judged & (err > LTE_TOL * scales) & (level < MAX_HALVINGS)
        # the quiet count after each step: one up on a quiet judged step, back
        # to 0 on a loud one, unchanged on the first three after a change
        calm = judged & (err < LTE_TOL * scales / 16.0)
        ups = np.cumsum(calm)
        at_loud = np.maximum.accumulate(np.where(judged & ~calm, ups, -1))
        quiets = np.where(at_loud >= 0, ups - at_loud, quiet + ups)
        # accepted: the steps before the first rejected one, cut after the
        # first at which the step grows back or the run ends
        first = np.flatnonzero(reject)
        take = int(first[0]) if first.size else m
        stop = np.flatnonzero((((quiets >= 8) & (level > 0)) | (times >= t_end))[:take])
        if stop.size:
            take = int(stop[0]) + 1
        if take:
            x = X[take - 1]
            t = float(times[take - 1])
            ts.append(times[:take])
            vo.append(outs[:take])
            vbe_t.append(X[:take] @ w_be)
            ve.append(X[:take] @ e_sel)
            scale = max(scale, float(dev[:take].max()))
            quiet = int(quiets[take - 1])
            since_change += take
            samples += take
            last3 = seq[take : take + 3].tolist()
            if progress is not None and samples % PROGRESS_EVERY == 0 and not progress(t / t_end):
                raise SimulationCancelledError(f"cancelled at t = {t:.4g} s")
        if stop.size:
            if level > 0 and quiet >= 8:
                level -= 1
                h = h0 / 2**level
                since_change, quiet = 0, 0
        elif take < count:
            # the next step was rejected, or its Newton iteration failed
            if take == m and level >= MAX_HALVINGS:
                raise SimulationError(f"Newton's method failed at t = {t:.4g} s")
            level += 1
            h = h0 / 2**level
            since_change = 0
            rejected += 1
            stretch = MIN_STRETCH
        else:
            stretch = min(2 * stretch, PROGRESS_EVERY)
    parts = (np.concatenate(p) for p in (ts, vo, vbe_t, ve))
    return Trace(*parts, samples - 1, rejected)


def unwarp(f_measured: float, h: float) -> float:
    """Undo the trapezoidal rule's frequency warping, tan(π·f_d·h) = π·f·h.

    The trapezoidal rule is the bilinear map s = (2/h)(z−1)/(z+1); a resonance
    at f appears at f_d with tan(π f_d h) = π f h, about (ωh)²/12 low
    (Oppenheim & Schafer, *Discrete-Time Signal Processing*, bilinear
    transformation, from memory).
    """
    return math.tan(math.pi * f_measured * h) / (math.pi * h)


def _crossings(t: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Times of rising zero crossings of v (linear interpolation)."""
    k = np.nonzero((v[:-1] < 0) & (v[1:] >= 0))[0]
    frac = -v[k] / (v[k + 1] - v[k])
    return t[k] + frac * (t[k + 1] - t[k])


def _measure(
    solved: Solved,
    trace: Trace,
    f_ref: float,
    points: int,
    h0: float,
    settle_cycles: float | None = None,
) -> Transient:
    """Figures of a run.  ``settle_cycles`` (from the steady state's largest Floquet
    multiplier) is how long the slowest deviation takes to fall to 1 %; without it
    the bias network's time constant stands in (ln 100 of them)."""
    t, vo, vb, ve = trace.t, trace.v_out, trace.v_be, trace.v_e
    steps, rejected = trace.steps, trace.rejected
    t_end = float(t[-1])
    cycles_run = t_end * f_ref
    tail_cycles = max(STEADY_MIN_CYCLES, STEADY_FRACTION * cycles_run)
    tail = t >= t_end - tail_cycles / f_ref
    notes: list[str] = []
    # Envelope: half the peak-to-peak swing of each period (periods from the
    # crossings of the output voltage about its one-period running mean, which
    # follows the bias as it moves).
    centre = vo - runlines.running_mean(t, vo, 1.0 / f_ref)
    cross = _crossings(t, centre)
    env_t, env = [], []
    idx = np.searchsorted(t, cross)
    for a, b in itertools.pairwise(idx):
        if b > a + 1:
            seg = centre[a:b]
            env_t.append(float(t[(a + b) // 2]))
            env.append(float(0.5 * (seg.max() - seg.min())))
    env_arr = np.array(env)
    tau = bias_time_constant(solved.design)
    amp_peak = float(0.5 * (vo[tail].max() - vo[tail].min()))
    grew = amp_peak > 10.0 * KICK_VOLTS
    f_meas = amp_fund = be_fund = thd = None
    harmonics: list[float | None] = [None] * (HARMONICS - 1)
    spec_f: list[float] = []
    spec_dB: list[float] = []
    tail_cross = cross[cross >= t_end - tail_cycles / f_ref]
    if grew and tail_cross.size >= 3:
        n = tail_cross.size - 1
        f_meas = unwarp(float(n / (tail_cross[-1] - tail_cross[0])), h0)
        # FFT over a whole number of periods, resampled uniformly.
        grid = np.linspace(tail_cross[0], tail_cross[-1], n * SAMPLES_PER_CYCLE_FFT, endpoint=False)
        spec_o = np.fft.rfft(np.interp(grid, t, vo)) / len(grid) * 2.0
        spec_b = np.fft.rfft(np.interp(grid, t, vb)) / len(grid) * 2.0
        fund = abs(spec_o[n])
        amp_fund = float(fund)
        be_fund = float(abs(spec_b[n]))
        levels = [abs(spec_o[k * n]) for k in range(2, HARMONICS + 1)]
        harmonics = [20.0 * math.log10(h / fund) if h > 0 else None for h in levels]
        thd = float(math.sqrt(sum(h * h for h in levels)) / fund)
        bins = np.arange(0, min(len(spec_o), (HARMONICS + 1) * n + 1))
        spec_f = [float(k * f_meas / n) for k in bins[1:]]
        spec_dB = [float(20.0 * math.log10(max(abs(spec_o[k]), 1e-30) / fund)) for k in bins[1:]]
    elif not grew:
        notes.append("the oscillation did not build up: the kick decayed or stayed at noise level")
    t90 = None
    settled = False
    squeg = False
    found_lines: list[runlines.Line] = []
    mod = runlines.Modulation(0.0, None)
    # How long the slowest deviation needs to fall to 1 %, periods.
    slowest = settle_cycles if settle_cycles is not None else math.log(100.0) * tau * f_ref
    source = (
        "from the largest Floquet multiplier"
        if settle_cycles is not None
        else "from the bias network's time constant"
    )
    if grew and env_arr.size:
        reached = np.nonzero(env_arr >= 0.9 * amp_peak)[0]
        t90 = float(env_t[reached[0]]) if reached.size else None
        peak = env_arr.max()
        high = np.nonzero(env_arr >= SQUEG_HIGH * peak)[0]
        if high.size:
            after = env_arr[high[0] :]
            dips = np.nonzero(after < SQUEG_LOW * peak)[0]
            if dips.size and np.any(after[dips[0] :] >= SQUEG_HIGH * peak):
                squeg = True
        in_tail = np.array(env_t) >= t_end - tail_cycles / f_ref
        last = env_arr[in_tail]
        found_lines = runlines.lines(t[tail], vo[tail], tail_cross)
        mod = runlines.modulation(np.array(env_t)[in_tail], last)
        doubled = runlines.alternates(last)
        if doubled:
            # judged on the larger amplitude of each pair of periods
            last = np.asarray(runlines.upper_envelope(list(range(last.size)), list(last))[1])
            low = env_arr[in_tail]
            notes.append(
                "period-doubled: alternate cycles reach "
                f"{float(np.max(low)):.3g} V and {float(np.min(low)):.3g} V"
            )
        steady_envelope = bool(last.size and (last.max() - last.min()) <= 0.02 * last.mean())
        covered = t90 is None or (t_end - t90) * f_ref >= slowest
        settled = steady_envelope and covered
        if squeg:
            notes.append(
                "squegging: the envelope collapses and rebuilds (see the steady state's "
                "Floquet multipliers)"
            )
        for line in found_lines:
            notes.append(f"{line.kind}: {line.f:.4g} Hz at {line.dBc:.1f} dBc")
        if mod.depth > runlines.MODULATION_FLOOR and not doubled:
            every = f" every {mod.period * f_ref:.3g} periods" if mod.period else ""
            notes.append(f"envelope modulation: ±{100 * mod.depth:.3g} %{every}")
        if not squeg and not steady_envelope:
            notes.append("the envelope has not settled by the end of the run")
        elif not covered:
            notes.append(
                f"the run covers {(t_end - t90) * f_ref:.3g} periods after startup; the slowest "
                f"deviation needs {slowest:.3g} periods to fall to 1 % ({source}): "
                "not yet settled"
            )
    VE_shift = float(np.mean(ve[tail]) - solved.op.VE) if grew else None
    # Keep the last cycles at full resolution, thinned to ``points`` samples.
    keep = max(2, min(points, len(t)))
    last_cycles = min(cycles_run, 8.0)
    window = t >= t_end - last_cycles / f_ref
    tw, vow, vbw = t[window], vo[window], vb[window]
    pick = np.unique(np.linspace(0, len(tw) - 1, min(keep, len(tw))).astype(int))
    if grew and runlines.alternates(env_arr[-max(6, len(env_arr) // 5) :]):
        # period-doubled: alternate periods' amplitudes would draw as a solid band
        env_t, env = runlines.upper_envelope(env_t, env)
    env_pick = np.unique(np.linspace(0, len(env_t) - 1, min(keep, len(env_t))).astype(int))
    return Transient(
        f_meas=f_meas,
        amp_out_peak=amp_peak if grew else None,
        amp_out_pp=2.0 * amp_peak if grew else None,
        amp_out_fund=amp_fund,
        amp_be_fund=be_fund,
        thd=thd,
        harmonics_dBc=harmonics,
        t_startup_90=t90,
        VE_shift=VE_shift,
        squegging=squeg,
        settled=settled,
        cycles_run=cycles_run,
        steps=steps,
        rejected_steps=rejected,
        bias_time_constant=tau,
        notes=notes,
        t=tw[pick].tolist(),
        v_out=vow[pick].tolist(),
        v_base=vbw[pick].tolist(),
        envelope_t=[env_t[i] for i in env_pick] if env_t else [],
        envelope=[env[i] for i in env_pick] if env else [],
        spectrum_f=spec_f,
        spectrum_dBc=spec_dB,
    )


def simulate(
    design: Design,
    cycles: float = 300.0,
    points: int = 4000,
    progress: Callable[[float], bool] | None = None,
):
    """The transient as the result contract (``ringwise simulate``, ``POST /api/simulate``)."""
    from ringwise.circuit.topologies import OUTPUT_NODE_LABEL
    from ringwise.result import (
        EnvelopeOut,
        SimulationResult,
        SpectrumOut,
        TransientOut,
        WarningOut,
        WaveformOut,
    )

    r = run(design, cycles, points, progress)
    warnings = []
    doubled = next((n for n in r.notes if n.startswith("period-doubled")), None)
    if r.squegging:
        warnings.append(WarningOut(code="squegging", message=r.notes[0]))
    elif doubled:
        warnings.append(WarningOut(code="period-doubling", message=doubled))
    elif not r.settled and r.amp_out_peak is not None:
        warnings.append(
            WarningOut(code="not-settled", message="the envelope has not settled by the end")
        )
    return SimulationResult(
        name=design.name,
        topology=design.topology.value,
        output_node=OUTPUT_NODE_LABEL[design.topology],
        transient=TransientOut(
            f_meas=r.f_meas,
            amp_out_peak=r.amp_out_peak,
            amp_out_pp=r.amp_out_pp,
            amp_out_fund=r.amp_out_fund,
            amp_be_fund=r.amp_be_fund,
            thd=r.thd,
            harmonics_dBc=r.harmonics_dBc,
            t_startup_90=r.t_startup_90,
            VE_shift=r.VE_shift,
            squegging=r.squegging,
            settled=r.settled,
            cycles_run=r.cycles_run,
            steps=r.steps,
            rejected_steps=r.rejected_steps,
            bias_time_constant=r.bias_time_constant,
            notes=r.notes,
            waveform=WaveformOut(t=r.t, v_out=r.v_out, v_be=r.v_base),
            envelope=EnvelopeOut(t=r.envelope_t, v=r.envelope),
            spectrum=SpectrumOut(f=r.spectrum_f, dBc=r.spectrum_dBc),
        ),
        warnings=warnings,
    )
