r"""Varactor tuning across its range: frequency, tuning gain, start and swing.

The tuning voltages V_min … V_max are one pipeline batch
(:func:`ringwise.analysis.pipeline.solve_values` with ``V_tune`` an array):
f_osc(V), the loop gain and whether it starts at each.  The tuning gain is
K = df_osc/dV (Hz/V) by second-order differences on the grid; its ratio from
end to end, K(V_min)/K(V_max), says how unevenly the range is spread (a
phase-locked loop's bandwidth follows K).

The periodic steady state (:func:`ringwise.analysis.periodic.steady_state`)
is solved at both ends and in the middle: behaviour, frequency, amplitude,
and the diode's own voltage along the orbit, V(q(t)) from its charge, so the
RF swing is read against the bias: the junction is forward-biased when its
reverse voltage falls below zero anywhere on the orbit.

References
----------
Rohde, Poddar & Böck, *The Design of Modern Microwave Oscillators for
Wireless Applications*, 2005, varactor tuning and its nonlinearity (from
memory); the junction law as in :mod:`ringwise.circuit.varactor`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.analysis.checks import Finding
from ringwise.analysis.criteria import Region
from ringwise.analysis.criteria import starts as starts_rule
from ringwise.analysis.operating import Solved, solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.pipeline import (
    MemberFigures,
    changed_values,
    f_ideal_of,
    part_values,
    patterns_of_structure,
    solve_values,
)
from ringwise.circuit import varactor as junction_law
from ringwise.circuit.topologies import VARACTOR, varactor_branch
from ringwise.design import Design, Varactor, with_param

#: Tuning voltages solved across the range (one pipeline batch).
TUNING_POINTS: Final = 21
#: Where the steady state is solved: fractions of the range (both ends, the middle).
STEADY_FRACTIONS: Final = (0.0, 0.5, 1.0)


@dataclass(frozen=True)
class TuningPoint:
    """The steady state at one tuning voltage (V, Hz; ``None`` where there is no orbit).

    ``V_diode_min`` and ``V_diode_max`` are the junction's lowest and highest
    reverse voltage over the orbit, ``V_rf_peak`` the largest excursion from
    the bias; ``forward_biased`` when the lowest is below zero.
    """

    V_tune: float
    f_osc: float | None
    gain: float
    starts: bool
    behaviour: str
    f_steady: float | None
    amp_out: float | None
    V_diode_min: float | None
    V_diode_max: float | None
    V_rf_peak: float | None
    forward_biased: bool | None


@dataclass(frozen=True)
class Tuning:
    """f_osc, K and the loop gain across the tuning range, and the steady state at three points.

    Lists run over ``V`` (V).  ``f_osc`` in Hz (``None`` where no zero-phase
    crossing), ``K`` in Hz/V, ``gain`` |T(f_osc)|, ``V_tune`` the design's own
    tuning voltage, ``C_branch`` the varactor
    branch's capacitance (C_v in series with C(V)), F.
    """

    V_tune: float
    V: list[float]
    f_osc: list[float | None]
    K: list[float | None]
    gain: list[float]
    starts: list[bool]
    C_branch: list[float]
    f_low: float | None
    f_high: float | None
    tuning_ratio: float | None
    K_at_min: float | None
    K_at_max: float | None
    K_ratio: float | None
    starts_everywhere: bool
    min_gain: float
    points: list[TuningPoint]
    forward_biased: bool | None


def _num(x) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


def voltages(v: Varactor) -> np.ndarray:
    """The tuning voltages solved: :data:`TUNING_POINTS` across V_min … V_max, V."""
    return np.linspace(v.V_min, v.V_max, TUNING_POINTS)


def tuning_changes(
    design: Design, start: Solved | None = None
) -> tuple[list[dict[str, float]], np.ndarray | None] | None:
    """The tuning range as changes of ``design``'s part values (one member per
    voltage), with each member's loop-search start: the design's f_osc moved
    with the member's ideal resonance (two Newton steps instead of three
    from the ideal resonance; ``None`` without ``start`` or its crossing).
    ``None`` without a varactor."""
    v = design.varactor
    if v is None:
        return None
    V = voltages(v)
    changes = [{"V_tune": float(x)} for x in V]
    if start is None or start.f_osc is None:
        return changes, None
    f_ideal = f_ideal_of(changed_values(part_values(design), changes), len(V))
    return changes, start.f_osc * (f_ideal / start.tank.f_ideal)


def tuning_sweep(design: Design, start: Solved | None = None) -> MemberFigures | None:
    """The small-signal batch over the tuning range (:func:`tuning_changes`);
    ``None`` without a varactor.

    ``start`` (the design solved) warm-starts every member's DC Newton (the
    tuning voltage hardly moves the transistor's bias) and its loop search.
    """
    found = tuning_changes(design, start)
    if found is None:
        return None
    changes, guess = found
    values = changed_values(part_values(design), changes)
    x0 = None if start is None else start.op.x
    sol = solve_values(patterns_of_structure(design), values, len(changes), x0, guess)
    return MemberFigures.of(sol)


def tuning(
    design: Design,
    large_signal: bool = True,
    start: Solved | None = None,
    swept: MemberFigures | None = None,
) -> Tuning | None:
    """The varactor's tuning figures (``None`` without a varactor); ``large_signal``
    adds the steady state at both ends and the middle; ``start`` (the design
    solved) warm-starts the sweep's DC solves; ``swept`` is the sweep when
    another batch already solved :func:`tuning_changes` (the full analysis's
    threshold search carries it)."""
    v = design.varactor
    if v is None:
        return None
    sol = swept if swept is not None else tuning_sweep(design, start)
    assert sol is not None
    V = voltages(v)
    f = np.asarray(sol.f_osc, dtype=float)
    ok = np.isfinite(f)
    K = np.full_like(f, np.nan)
    if ok.sum() >= 3 and ok.all():
        K = np.gradient(f, V, edge_order=2)
    gain = np.asarray(sol.gain, dtype=float)
    starts = np.asarray(sol.starts, dtype=bool)
    C_b = varactor_branch(v.C_v, v.C_j0, v.phi_j, v.m_j, V)
    # the steady states only when asked for (the first answer is small-signal only)
    points = (
        [_point(design, v.V_min + frac * (v.V_max - v.V_min)) for frac in STEADY_FRACTIONS]
        if large_signal
        else []
    )
    fb = [p.forward_biased for p in points if p.forward_biased is not None]
    f_ok = f[ok]
    return Tuning(
        V_tune=v.V_tune,
        V=V.tolist(),
        f_osc=[_num(x) for x in f],
        K=[_num(x) for x in K],
        gain=gain.tolist(),
        starts=starts.tolist(),
        C_branch=np.asarray(C_b, dtype=float).tolist(),
        f_low=float(f_ok.min()) if f_ok.size else None,
        f_high=float(f_ok.max()) if f_ok.size else None,
        tuning_ratio=float(f_ok.max() / f_ok.min()) if f_ok.size else None,
        K_at_min=_num(K[0]),
        K_at_max=_num(K[-1]),
        K_ratio=_num(K[0] / K[-1]) if np.isfinite(K[[0, -1]]).all() and K[-1] != 0 else None,
        starts_everywhere=bool(starts.all()),
        min_gain=float(gain.min()),
        points=points,
        forward_biased=any(fb) if fb else None,
    )


def _point(design: Design, V_tune: float) -> TuningPoint:
    """The steady state at one tuning voltage, and the diode's voltage along its orbit."""
    d = with_param(design, "V_tune", V_tune)
    s = solve(d)
    ss = steady_state(s)
    V_lo = V_hi = peak = None
    forward = None
    if ss.orbit is not None:
        el = s.netlist[VARACTOR]
        u = ss.orbit.x[:, s.system.layout.branch[VARACTOR]]
        v_d = np.array(
            [junction_law.voltage(el.C_bias * x, el.C_j0, el.phi, el.m) for x in u.tolist()]
        )
        V_lo, V_hi = float(v_d.min()), float(v_d.max())
        peak = float(np.max(np.abs(v_d - V_tune)))
        forward = V_lo < 0.0
    return TuningPoint(
        V_tune=float(V_tune),
        f_osc=s.f_osc,
        gain=s.gain,
        starts=bool(starts_rule(s.gain, s.op.region is Region.ACTIVE)),
        behaviour=ss.behaviour,
        f_steady=ss.f,
        amp_out=ss.amp_out,
        V_diode_min=V_lo,
        V_diode_max=V_hi,
        V_rf_peak=peak,
        forward_biased=forward,
    )


def tuning_checks(t: Tuning | None) -> list[Finding]:
    """Warn when the oscillator stops somewhere in the tuning range, or the RF swing
    drives the diode forward at one of the steady-state points."""
    if t is None:
        return []
    out = []
    if not t.starts_everywhere:
        dead = [V for V, s in zip(t.V, t.starts, strict=True) if not s]
        out.append(
            Finding(
                "tuning-no-start",
                f"it does not start at tuning voltages {dead[0]:.3g} … {dead[-1]:.3g} V "
                f"(lowest loop gain across the range {t.min_gain:.3g}): the varactor's loss "
                "or the changed capacitance ratio takes the gain below 1; narrow the range "
                "or raise the loop gain",
            )
        )
    forward = [p for p in t.points if p.forward_biased]
    if forward:
        p = forward[0]
        out.append(
            Finding(
                "varactor-forward-biased",
                f"at V_tune = {p.V_tune:.3g} V the RF swing ({p.V_rf_peak:.3g} V peak) takes "
                f"the junction to {p.V_diode_min:.3g} V, forward: it rectifies, shifts its own "
                "bias and lowers the Q; raise V_min, use two diodes back to back or a smaller "
                "coupling capacitor C_v",
            )
        )
    return out
