"""The full analysis of one design: every figure of the result contract."""

from __future__ import annotations

import functools
import math
import threading
from typing import Any, Final

import numpy as np

from ringwise.analysis.budget import loop_budget
from ringwise.analysis.checks import Finding, choke_checks, rule_checks, steady_checks
from ringwise.analysis.crystal import crystal_checks, crystal_figures
from ringwise.analysis.operating import solve_with
from ringwise.analysis.output import load_output
from ringwise.analysis.periodic import SteadyState, steady_state
from ringwise.analysis.phase_noise import SHARE_OFFSETS, OscillatorNoise
from ringwise.analysis.poles import natural_frequencies
from ringwise.analysis.stability import REPORT_OFFSETS, neighbour_changes, neighbours, stability
from ringwise.analysis.startup import verdict
from ringwise.analysis.story import gain_story
from ringwise.analysis.tankchecks import tank_checks
from ringwise.analysis.threshold import probe_changes, threshold_with_riders
from ringwise.analysis.tuning import tuning, tuning_changes, tuning_checks
from ringwise.analysis.verdict import combined_verdict
from ringwise.circuit.topologies import OUTPUT_NODE_LABEL, T1, gain_setter, hand_formula
from ringwise.design import Design
from ringwise.result import (
    BudgetLineOut,
    CrystalOut,
    GainStoryOut,
    LoopOut,
    LossOut,
    MultiplierOut,
    NoiseCurveOut,
    NoisePointOut,
    NoiseSourceOut,
    OperatingPointOut,
    OutputOut,
    PartStressOut,
    PeriodOut,
    PoleOut,
    PolesOut,
    Result,
    SmallSignalOut,
    StabilityOut,
    StartupOut,
    SteadyStateOut,
    TankOut,
    TuningOut,
    TuningPointOut,
    VerdictOut,
    WarningOut,
    from_attributes,
)

#: Analyses remembered, keyed by the design's canonical JSON: the sheet asks
#: again for designs it has just seen (a slider moved back, an undo, another tab).
CACHE_SIZE: Final = 256


def analyze(design: Design, large_signal: bool = True) -> Result:
    """Operating point, loop, poles, budget, threshold, steady state, verdict and warnings.

    ``large_signal=False`` leaves out the periodic steady state and what
    depends on it (the sheet's first answer: the small-signal verdict at
    once, the rest on a second request).  The analysis is a pure function of
    the design, so results are remembered for the last ``CACHE_SIZE``
    designs; each caller gets its own copy.
    """
    key = (design.model_dump_json(), large_signal)
    with _flight_lock:
        gate = _in_flight.setdefault(key, threading.Lock())
    # One computation per design at a time: a request that arrives while the
    # same design is being analysed waits for that answer instead of solving
    # again from another start (the steady state's last digits depend on it).
    with gate:
        result = _analyze_json(*key)
    with _flight_lock:
        if _in_flight.get(key) is gate and not gate.locked():
            del _in_flight[key]
    return result.model_copy(deep=True)


_in_flight: dict[tuple[str, bool], threading.Lock] = {}
_flight_lock = threading.Lock()


def forget() -> None:
    """Drop the remembered analyses (benchmarks measure the work itself)."""
    _analyze_json.cache_clear()


@functools.lru_cache(maxsize=CACHE_SIZE)
def _analyze_json(design_json: str, large_signal: bool) -> Result:
    return _analyze(Design.model_validate_json(design_json), large_signal)


def _analyze(design: Design, large_signal: bool = True) -> Result:
    setter = gain_setter(design)
    # the gain setter's two probes ride in the design's own solve (they place
    # the threshold search's first batch) ...
    s, probed = solve_with(design, probe_changes(design, setter))
    probes = probed.gain[1:].tolist() if probed.gain.size == 3 else None
    op, hp = s.op, s.hybrid
    f_osc = s.f_osc
    gain = s.gain if f_osc is not None else None
    budget = loop_budget(s, setter) if f_osc is not None else []
    poles = natural_frequencies(s.ss, s.tank.f_ideal, f_osc)
    # ... pushing, pulling and the tuning range in that search's first batch
    near_changes = neighbour_changes(s)
    swept = tuning_changes(design, s)
    tune_changes, tune_guess = swept if swept is not None else ([], None)
    guess = None
    if tune_guess is not None and s.f_osc is not None:
        guess = np.concatenate([np.full(len(near_changes), s.f_osc), tune_guess])
    threshold, ridden = threshold_with_riders(
        design, setter, s, near_changes + tune_changes, guess, probes
    )
    near_f = None if ridden is None else ridden.f_osc[: len(near_changes)]
    tune_figures = None if ridden is None or not tune_changes else ridden.part(len(near_changes))
    v = verdict(gain, op)
    findings = rule_checks(s, budget, poles)
    findings += tank_checks(s, budget)
    findings += choke_checks(s)
    ss = steady_state(s) if large_signal else None
    if ss is not None:
        findings += steady_checks(s, ss)
    near = neighbours(s, near_f)
    st = stability(s, ss, near)
    findings += [Finding(code, message) for code, message in st.notes]
    if threshold.value is None and threshold.reason:
        findings.append(Finding("no-threshold", threshold.reason))
    dom = poles.dominant
    hand = hand_formula(design, hp.gm)
    output = load_output(s, ss, near)
    crystal = crystal_figures(s, ss, poles)
    findings += crystal_checks(crystal)
    tuned = tuning(design, large_signal, start=s, swept=tune_figures)
    findings += tuning_checks(tuned)
    story = gain_story(hand, s, budget, setter) if gain is not None else None
    return Result(
        name=design.name,
        topology=design.topology.value,
        operating_point=from_attributes(
            OperatingPointOut, op, I_divider=op.VB / design.bias.RB2, region=op.region.value
        ),
        small_signal=from_attributes(SmallSignalOut, hp),
        tank=from_attributes(TankOut, s.tank, output_node=OUTPUT_NODE_LABEL[design.topology]),
        loop=from_attributes(
            LoopOut,
            s.loop,
            f_osc=f_osc,
            gain=gain,
            gain_ideal=hand.value,
            phase_slope=float(s.loop.phase_slope),
            Q_loaded=float(s.loop.Q_loaded),
            Z_out=float(s.loop.Z_out),
            budget=[from_attributes(BudgetLineOut, line) for line in budget],
            story=None
            if story is None
            else from_attributes(
                GainStoryOut,
                story,
                formula=hand.symbols,
                numbers=hand.numbers,
                hand=hand.value,
                losses=[from_attributes(LossOut, loss) for loss in story.losses],
            ),
        ),
        poles=from_attributes(
            PolesOut,
            poles,
            sigma=dom.sigma if dom else None,
            f=dom.f if dom else None,
            other_rhp=[from_attributes(PoleOut, p) for p in poles.other_rhp],
        ),
        startup=from_attributes(
            StartupOut,
            v,
            threshold_param=threshold.param,
            threshold_value=threshold.value,
            threshold_RC=threshold.value if setter == "RC" else None,
        ),
        steady_state=None if ss is None else steady_out(ss, OUTPUT_NODE_LABEL[design.topology]),
        verdict=VerdictOut(**vars(combined_verdict(v, ss, [f.code for f in findings]))),
        stability=StabilityOut(
            Q_loaded=st.Q_loaded,
            P_signal=st.P_signal,
            F_dB=st.F_dB,
            f_corner=st.f_corner,
            leeson_corner=st.leeson_corner,
            phase_noise=[NoisePointOut(offset=o, dBc_Hz=v) for o, v in st.phase_noise],
            curve=NoiseCurveOut(offset=[o for o, _ in st.curve], dBc_Hz=[v for _, v in st.curve]),
            pushing_Hz_per_V=st.pushing_Hz_per_V,
            pulling_Hz=st.pulling_Hz,
            pulling_Hz_per_ohm=st.pulling_Hz_per_ohm,
            parts=[PartStressOut(**vars(p)) for p in st.parts],
            method=st.method,
            **_noise_fields(st.noise),
        ),
        output=None if output is None else OutputOut(**vars(output)),
        crystal=None if crystal is None else CrystalOut(**vars(crystal)),
        tuning=None
        if tuned is None
        else from_attributes(
            TuningOut, tuned, points=[from_attributes(TuningPointOut, p) for p in tuned.points]
        ),
        warnings=[WarningOut(code=f.code, message=f.message) for f in findings],
    )


def _noise_fields(on: OscillatorNoise | None) -> dict[str, Any]:
    """The computed phase noise as the stability section's fields (empty without it)."""
    if on is None:
        return {}
    pn = on.noise
    sources = sorted(zip(pn.rates, pn.shares, strict=True), key=lambda rs: -rs[1][0])
    return {
        "diffusion": pn.diffusion,
        "F_effective_dB": 10.0 * math.log10(on.F_effective) if on.F_effective else None,
        "flicker_corner": pn.corner,
        "spectrum": [NoisePointOut(offset=o, dBc_Hz=pn.at(o)) for o in REPORT_OFFSETS],
        "spectrum_curve": NoiseCurveOut(offset=pn.offsets, dBc_Hz=pn.dBc_Hz),
        "sources": [
            NoiseSourceOut(
                name=r.source.name,
                part=r.source.part,
                kind=r.source.kind,
                diffusion=r.c,
                share_1k=share[SHARE_OFFSETS.index(1e3)],
                share_100k=share[SHARE_OFFSETS.index(100e3)],
            )
            for r, share in sources
        ],
    }


def _multiplier(z: complex) -> MultiplierOut:
    return MultiplierOut(re=z.real, im=z.imag)


def steady_out(ss: SteadyState, output_node: str) -> SteadyStateOut:
    """The steady state as the result contract."""
    w = ss.waveforms
    orbit = ss.orbit
    period = PeriodOut(
        t=w.get("t", []),
        v_out=w.get(T1, []),
        v_be=w.get("v_be", []),
        v_ce=w.get("v_ce", []),
        i_L=w.get("i_L", []),
    )
    return SteadyStateOut(
        behaviour=ss.behaviour,
        reason=ss.reason,
        f=ss.f,
        amp_out=ss.amp_out,
        amp_be=ss.amp_be,
        amp_ce=ss.amp_ce,
        thd=ss.thd,
        harmonics_dBc=ss.harmonics_dBc,
        IC_avg=ss.IC_avg,
        VE_avg=ss.VE_avg,
        VE_shift=ss.VE_shift,
        VCE_min=ss.VCE_min,
        P_tank=ss.P_tank,
        P_load=ss.P_load,
        P_in=ss.P_in,
        efficiency=ss.efficiency,
        multipliers=[_multiplier(z) for z in ss.multipliers],
        trivial_multiplier=None
        if ss.trivial_multiplier is None
        else _multiplier(ss.trivial_multiplier),
        settle_cycles=ss.settle_cycles,
        steps=orbit.N if orbit is not None else 0,
        output_node=output_node,
        period=period,
    )
