r"""Frequency stability figures: Leeson phase noise, pushing, pulling, tank stresses.

Two phase-noise figures: the one computed from the circuit's own noise
sources through the periodic steady state (:mod:`ringwise.analysis.phase_noise`),
and Leeson's model beside it for comparison,

.. math::

    \mathcal{L}(\Delta f) = 10\log_{10}\left[\frac{2 F k T}{P_s}
    \left(1 + \left(\frac{f_0}{2 Q_L \Delta f}\right)^2\right)
    \left(1 + \frac{f_c}{\Delta f}\right)\right]\ \mathrm{dBc/Hz}

with :math:`Q_L` the loaded Q from the loop's phase slope, :math:`P_s` the
power the loaded resonator dissipates on the steady-state orbit
(:func:`ringwise.analysis.phase_noise.resonator_power`), F a noise factor and
f_c a flicker corner, both entered.  This is the form of Lee & Hajimiri
(2000): with this P_s, F = 1 is exactly a resonator whose loading is the
only noise (a lossy tank held by a noiseless negative resistance), so the
effective F the computed spectrum implies can be compared with the F
entered.  Forms that circulate differ by 6 dB through other definitions of
P_s and of single- versus double-sideband noise.

Pushing is df/dVcc at full amplitude: the steady state's frequency at
Vcc ± a step (each warm-started from the nominal orbit), or the small-signal
f_osc when there is no steady state; pulling is the change of f_osc from an
open output to the given load, and df/dR_load there; the small-signal
solves are one batch of the pipeline.

References
----------
D. B. Leeson, "A simple model of feedback oscillator noise spectrum",
Proc. IEEE 54(2), 1966; T. H. Lee & A. Hajimiri, "Oscillator phase noise: a
tutorial", IEEE JSSC 35(3), 2000 (both from memory).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

import numpy as np
from scipy import constants

from ringwise.analysis.operating import Solved, solve
from ringwise.analysis.periodic import (
    PartPower,
    SteadyState,
    neighbour_frequency,
)
from ringwise.analysis.phase_noise import (
    PLOT_DECADES,
    PLOT_POINTS,
    OscillatorNoise,
    oscillator_noise,
    resonator_power,
)
from ringwise.analysis.pipeline import (
    changed_values,
    part_values,
    patterns_of_structure,
    solve_values,
)
from ringwise.analysis.ppv import SensitivityError
from ringwise.circuit.topologies import UNRATED_CAPACITANCES
from ringwise.design import Design, step_within, with_param

#: Offsets reported and plotted, Hz.
REPORT_OFFSETS: Final = (100.0, 1e3, 10e3, 100e3)
#: Supply step for pushing, as a fraction of Vcc.
PUSH_STEP: Final = 0.01
#: Supply step for pushing at full amplitude, as a fraction of Vcc.  Each
#: neighbour's frequency is first order from the design's orbit, and a slow bias
#: direction (a multiplier near 1) makes the second order large, so the central
#: difference's error grows as the step squared: on the common-emitter test
#: design 1.1 % at 1e-2, 1e-4 at 1e-3, 4e-5 at 5e-4 of the derivative the full
#: solves converge to; round-off shows below about 2e-4.
PUSH_ORBIT_STEP: Final = 5e-4
#: Relative step of R_load for df/dR_load.
PULL_STEP: Final = 0.01
#: Pulling beyond this fraction of f_osc earns a buffer recommendation
#: (common practice, no source).
PULL_BUFFER_PPM: Final = 100.0
#: A capacitor's peak voltage above this fraction of its rating is flagged.
RATING_FRACTION: Final = 0.8


@dataclass(frozen=True)
class Stability:
    Q_loaded: float | None
    P_signal: float | None
    F_dB: float
    f_corner: float
    leeson_corner: float | None
    phase_noise: list[tuple[float, float]]
    curve: list[tuple[float, float]]
    pushing_Hz_per_V: float | None
    pulling_Hz: float | None
    pulling_Hz_per_ohm: float | None
    parts: list[PartPower]
    notes: list[tuple[str, str]]
    noise: OscillatorNoise | None = None
    method: str | None = None


#: The one line naming how the computed phase noise was found.
METHOD: Final = (
    "Phase noise computed from the circuit's own noise sources (thermal, shot, base "
    "flicker, supply) through the perturbation projection vector of the periodic "
    "steady state (Demir, Mehrotra & Roychowdhury 2000); Leeson's formula beside it "
    "for comparison only."
)


def computed_noise(solved: Solved, ss: SteadyState | None) -> tuple[OscillatorNoise | None, str]:
    """The phase noise from the noise sources and the line that names the method (or why not)."""
    if ss is None:
        return None, "Computed phase noise: waiting for the periodic steady state."
    if ss.orbit is None:
        return None, "Computed phase noise: none, the circuit has no periodic orbit."
    if ss.behaviour != "settles":
        return None, (
            f"Computed phase noise: none, the orbit {ss.behaviour.replace('-', ' ')}s "
            "instead of settling (phase noise is defined about a stable orbit)."
        )
    try:
        return oscillator_noise(solved, ss), METHOD
    except SensitivityError as err:
        return None, f"Computed phase noise: none ({err})."


def leeson(
    offset: np.ndarray | float, f0: float, Q_loaded: float, P_s: float, F_dB: float,
    f_corner: float, T: float,
) -> np.ndarray:  # fmt: skip
    """Leeson's SSB phase noise, dBc/Hz, at ``offset`` (Hz) from the carrier ``f0`` (Hz)."""
    df = np.asarray(offset, dtype=float)
    F = 10.0 ** (F_dB / 10.0)
    floor = 2.0 * F * constants.k * T / P_s
    return 10.0 * np.log10(
        floor * (1.0 + (f0 / (2.0 * Q_loaded * df)) ** 2) * (1.0 + f_corner / df)
    )


def pushing_at_amplitude(solved: Solved, ss: SteadyState) -> float | None:
    """df/dVcc, Hz/V, of the steady state's frequency: Vcc ± a step, each
    neighbour's frequency to first order from the design's own orbit
    (:func:`periodic.neighbour_frequency`: one period each, no shooting)."""
    V_hi, V_lo = _steps(solved.design, "Vcc", PUSH_ORBIT_STEP)
    x0, f0 = solved.op.x, solved.f_osc
    near = [solve(with_param(solved.design, "Vcc", V), x0, f0) for V in (V_hi, V_lo)]
    f = [neighbour_frequency(ss, solved, n) for n in near]
    if f[0] is None or f[1] is None:
        return None
    return (f[0] - f[1]) / (V_hi - V_lo)


Changes = dict[str, float | None]


def _variants(solved: Solved) -> list[Changes]:
    """The designs pushing and pulling need, as changes of the solved one's part
    values: Vcc ± a step, then (with a load) the load opened, R_load ± a step
    and the stated load change."""
    d = solved.design
    # the steps stay inside the fields' bounds (at a bound the difference is one-sided)
    out: list[Changes] = [{"Vcc": V} for V in _steps(d, "Vcc")]
    if d.load.R_load is not None:
        out.append({"R_load": None})
        out += [{"R_load": R} for R in _steps(d, "R_load")]
        out.append(load_change(d))
    return out


def load_change(design: Design) -> Changes:
    """The stated load change ``load.change`` as new part values: the load's
    resistance lowered and its capacitance raised by that fraction (a buffer
    that loads the tank harder)."""
    load = design.load
    assert load.R_load is not None
    change: Changes = {"R_load": load.R_load * (1.0 - load.change)}
    if load.C_load is not None:
        change["C_load"] = load.C_load * (1.0 + load.change)
    return change


def _steps(d: Design, name: str, fraction: float | None = None) -> tuple[float, float]:
    """The two values of ``name`` a central difference uses, inside the field's bounds
    (``fraction`` of the value apart from it; by default PUSH_STEP or PULL_STEP)."""
    value = d.supply.Vcc if name == "Vcc" else d.load.R_load
    assert value is not None
    if fraction is None:
        fraction = PUSH_STEP if name == "Vcc" else PULL_STEP
    return step_within(name, value, fraction * value)


@dataclass(frozen=True)
class Neighbours:
    """The small-signal figures of the designs next to a solved one, from one batch.

    Attributes
    ----------
    push : df_osc/dVcc, Hz/V
    shift : f_osc with the load − f_osc with the load open, Hz
    slope : df_osc/dR_load, Hz/Ω
    load_change_ppm : f_osc moved by the stated load change, ppm
    """

    push: float | None
    shift: float | None
    slope: float | None
    load_change_ppm: float | None


def neighbour_changes(solved: Solved) -> list[Changes]:
    """The designs :func:`neighbours` solves, as changes of ``solved``'s part
    values (none without a loop crossing)."""
    return [] if solved.f_osc is None else _variants(solved)


def neighbours(solved: Solved, f_osc: np.ndarray | None = None) -> Neighbours:
    """Pushing, pulling and the load change's pull: central differences of full
    solves (operating point re-solved), all in one batch of the pipeline;
    ``None`` where a figure does not exist.

    ``f_osc`` holds the small-signal f_osc of :func:`neighbour_changes` when
    another batch already solved them (the threshold search's first one,
    warm-started from ``solved`` as here).
    """
    if solved.f_osc is None:
        return Neighbours(None, None, None, None)
    if f_osc is None:
        changes = _variants(solved)
        values = changed_values(part_values(solved.design), changes)
        patterns = patterns_of_structure(solved.design)
        f_osc = solve_values(patterns, values, len(changes), solved.op.x, solved.f_osc).loop.f_osc
    f = [float(v) if np.isfinite(v) else None for v in f_osc]
    d = solved.design
    V_hi, V_lo = _steps(d, "Vcc")
    push = (f[0] - f[1]) / (V_hi - V_lo) if None not in f[:2] else None
    R = d.load.R_load
    if R is None:
        return Neighbours(push, 0.0, None, None)
    f_open, f_hi, f_lo, f_changed = f[2:]
    shift = solved.f_osc - f_open if f_open is not None else None
    R_hi, R_lo = _steps(d, "R_load")
    slope = (f_hi - f_lo) / (R_hi - R_lo) if None not in (f_hi, f_lo) else None
    ppm = None if f_changed is None else (f_changed / solved.f_osc - 1.0) * 1e6
    return Neighbours(push, shift, slope, ppm)


def push_pull(solved: Solved) -> tuple[float | None, float | None, float | None]:
    """(df_osc/dVcc, Hz/V; f with the load − f open, Hz; df/dR_load, Hz/Ω)
    (see :func:`neighbours`)."""
    near = neighbours(solved)
    return near.push, near.shift, near.slope


def stability(solved: Solved, ss: SteadyState | None, near: Neighbours | None = None) -> Stability:
    """All stability figures of a solved design with its periodic steady state.

    Without a steady state (``None``: the sheet's first answer) the figures
    that need the amplitude (signal power, phase noise, part stresses) are
    absent and pushing is the small-signal one.  ``near`` is
    :func:`neighbours` of ``solved`` when the caller has it already.
    """
    d = solved.design
    Q = float(solved.loop.Q_loaded) if solved.f_osc is not None else None
    noise, method = computed_noise(solved, ss)
    # Leeson's P_s: the power the loaded resonator dissipates on the orbit
    P_s = (
        resonator_power(ss.orbit, solved.system.layout.branch["L"], solved.netlist["L"].L, Q)
        if ss is not None and ss.orbit is not None and Q
        else None
    )
    T = d.temperature_C + constants.zero_Celsius
    pn: list[tuple[float, float]] = []
    curve: list[tuple[float, float]] = []
    corner = None
    if Q and P_s and P_s > 0 and solved.f_osc:
        f0 = solved.f_osc
        corner = f0 / (2.0 * Q)
        args = (f0, Q, P_s, d.noise.F_dB, d.noise.f_corner, T)
        pn = [(o, float(leeson(o, *args))) for o in REPORT_OFFSETS]
        grid = np.logspace(*PLOT_DECADES, PLOT_POINTS)
        curve = list(zip(grid.tolist(), leeson(grid, *args).tolist(), strict=True))
    near = near or neighbours(solved)
    push, shift, slope = near.push, near.shift, near.slope
    if ss is not None and ss.orbit is not None:
        push = pushing_at_amplitude(solved, ss)
    parts = list(ss.parts) if ss is not None else []
    notes: list[tuple[str, str]] = []
    if shift is not None and solved.f_osc and abs(shift) / solved.f_osc * 1e6 > PULL_BUFFER_PPM:
        notes.append(
            (
                "load-pulling",
                f"the load moves f_osc by {abs(shift) / solved.f_osc * 1e6:.0f} ppm; "
                "take the output through a buffer stage (an emitter follower or a "
                "common-base isolation stage) or couple it more loosely",
            )
        )
    for p in parts:
        rated = p.part.startswith("C") and p.part not in UNRATED_CAPACITANCES
        if rated and p.V_peak > RATING_FRACTION * d.ratings.V_cap:
            notes.append(
                (
                    "capacitor-stress",
                    f"{p.part} sees {p.V_peak:.3g} V peak, over {100 * RATING_FRACTION:.0f} % "
                    f"of its {d.ratings.V_cap:g} V rating",
                )
            )
    return Stability(
        Q_loaded=Q,
        P_signal=P_s,
        F_dB=d.noise.F_dB,
        f_corner=d.noise.f_corner,
        leeson_corner=corner,
        phase_noise=pn,
        curve=curve,
        pushing_Hz_per_V=push,
        pulling_Hz=shift,
        pulling_Hz_per_ohm=slope,
        parts=parts,
        notes=notes,
        noise=noise,
        method=method,
    )
