r"""Warnings where the tank stops setting the frequency.

An LC oscillator is worth its tank only while the tank sets the frequency.
Three signs that it no longer does, each with the numbers and what to change:

* the transistor's own capacitances are comparable to the tank's.  In every
  form C_π sits across C2 (base-emitter) and C_μ across the coil's branch
  (collector-base); they move with bias and temperature, and so does the
  frequency.  Measured by the budget's line with both removed: the pull
  :math:`f_{osc}/f_{without} - 1`, and C_π as a fraction of C2;
* a low loaded Q: a phase error Δφ in the amplifier moves the frequency by
  :math:`\Delta f/f = \Delta\varphi/(2 Q_{loaded})` (the phase-slope
  definition of Q, Leeson 1966, from memory);
* an oscillation frequency far from the tank's resonance
  :math:`1/(2\pi\sqrt{L C_s})`: the rest of the circuit, not the tank, is
  setting it.  The budget's frequency without each element says which parts
  pull it most.

Limits are common practice, no source.
"""

from __future__ import annotations

import math
from typing import Final

from ringwise.analysis.budget import BudgetLine
from ringwise.analysis.checks import Finding
from ringwise.analysis.operating import Solved
from ringwise.units import format_si

#: C_π above this fraction of C2 (the capacitor it sits across) is comparable
#: to the tank's (common practice, no source).
JUNCTION_SHARE_LIMIT: Final = 0.1
#: Junction capacitances pulling f_osc by more than this fraction (common
#: practice, no source).
JUNCTION_PULL_LIMIT: Final = 0.01
#: Loaded Q below which the tank hardly sets the frequency: a 10° phase error
#: then moves f by more than 3 % (Δf/f = Δφ/(2·Q)); common practice, no source.
LOW_LOADED_Q: Final = 3.0
#: f_osc more than this fraction from the tank's resonance (common practice,
#: no source).
OFF_TANK_LIMIT: Final = 0.02
#: Elements named as pulling the frequency: the largest few, each at least
#: this fraction.
PULLS_NAMED: Final = 3
PULL_NAMED_MIN: Final = 0.002
#: Loss elements that load the tank resistively (the budget's elements).
RESISTIVE: Final = ("L_loss", "r_pi", "divider", "r_o", "R_load", "RC", "RE", "Rch")
JUNCTION_LINE: Final = "C_pi_C_mu"


def _pull(s: Solved, line: BudgetLine) -> float | None:
    """How far ``line``'s element moves f_osc: f_osc / f_without − 1."""
    if s.f_osc is None or not line.f_without:
        return None
    return s.f_osc / line.f_without - 1.0


def _pct(x: float) -> str:
    return f"{100 * x:+.1f} %"


def _junction(s: Solved, budget: list[BudgetLine]) -> list[Finding]:
    line = next((b for b in budget if b.element == JUNCTION_LINE), None)
    pull = _pull(s, line) if line is not None else None
    hp, t = s.hybrid, s.design.tank
    share = hp.C_pi / t.C2
    if pull is None or (abs(pull) <= JUNCTION_PULL_LIMIT and share <= JUNCTION_SHARE_LIMIT):
        return []
    C2_needed = hp.C_pi / JUNCTION_SHARE_LIMIT
    clapp = (
        "a smaller C3 makes them a smaller part of the frequency-setting capacitance"
        if t.C3 is not None
        else "the Clapp form (a small C3 in series with L) makes them a small part of the "
        "frequency-setting capacitance"
    )
    return [
        Finding(
            "junction-capacitance",
            f"the transistor's C_π = {format_si(hp.C_pi, 'F')} sits across "
            f"C2 = {format_si(t.C2, 'F')} ({100 * share:.0f} %, limit "
            f"{100 * JUNCTION_SHARE_LIMIT:.0f} %) and C_μ = {format_si(hp.C_mu, 'F')} across the "
            f"coil's branch: they move f_osc {_pct(pull)} (to {format_si(s.f_osc, 'Hz')}; limit "
            f"± {100 * JUNCTION_PULL_LIMIT:g} %), and they change with bias and temperature. "
            f"Raise C2 to at least {format_si(C2_needed, 'F')} (C1 with it, to keep C1/C2) and "
            f"lower L to keep the frequency; or {clapp}; or a transistor of higher f_T "
            "(C_π ≈ g_m/(2π·f_T))",
        )
    ]


def _heaviest_load(budget: list[BudgetLine]) -> BudgetLine | None:
    loads = [b for b in budget if b.element in RESISTIVE and b.cost_dB is not None]
    return max(loads, key=lambda b: b.cost_dB or 0.0, default=None)


def _low_q(s: Solved, budget: list[BudgetLine]) -> list[Finding]:
    Q = float(s.loop.Q_loaded)
    if s.f_osc is None or not math.isfinite(Q) or Q >= LOW_LOADED_Q:
        return []
    shift = math.radians(10.0) / (2.0 * Q)
    heavy = _heaviest_load(budget)
    what = (
        f"the heaviest load on the tank is {heavy.label} ({heavy.cost_dB:.1f} dB of loop "
        "gain): raise it, or hang it on a smaller share of the tank voltage (a capacitive "
        "tap), or use a coil of higher Q"
        if heavy is not None
        else "lighten the loading on the tank or use a coil of higher Q"
    )
    return [
        Finding(
            "low-loaded-q",
            f"loaded Q = {Q:.2g} is below {LOW_LOADED_Q:g}: the tank hardly sets the frequency "
            f"(10° of phase drift in the transistor moves f by {100 * shift:.1f} %); {what}",
        )
    ]


def _off_tank(s: Solved, budget: list[BudgetLine]) -> list[Finding]:
    f, f0 = s.f_osc, s.tank.f_ideal
    if f is None:
        return []
    off = f / f0 - 1.0
    if abs(off) <= OFF_TANK_LIMIT:
        return []
    pulls = [(b, _pull(s, b)) for b in budget]
    named = sorted(
        ((b, p) for b, p in pulls if p is not None and abs(p) >= PULL_NAMED_MIN),
        key=lambda bp: abs(bp[1]),
        reverse=True,
    )[:PULLS_NAMED]
    who = (
        "; the largest pulls: "
        + ", ".join(f"{b.label} {_pct(p)}" for b, p in named)
        + " — lighten or enlarge those, or raise the tank's capacitances"
        if named
        else "; no single part explains it: the loading acts together"
    )
    return [
        Finding(
            "off-tank-frequency",
            f"f_osc = {format_si(f, 'Hz')} is {_pct(off)} from the tank's resonance "
            f"{format_si(f0, 'Hz')} (limit ± {100 * OFF_TANK_LIMIT:g} %): the circuit around "
            f"the tank is setting the frequency{who}",
        )
    ]


def tank_checks(s: Solved, budget: list[BudgetLine]) -> list[Finding]:
    """Warnings that the tank no longer sets the frequency (see the module's docstring)."""
    return _junction(s, budget) + _low_q(s, budget) + _off_tank(s, budget)
