r"""Trimming one tank capacitor so that the full circuit oscillates at a given frequency.

Standard values and the transistor's own capacitances move f_osc off where it
was meant to be.  One capacitor is re-chosen with the full model: the value
:math:`C^*` with :math:`f_{osc}(C^*) = f_{target}`, found by secant steps on
:math:`\ln f` against :math:`\ln C` (f goes nearly as :math:`C^{-S}` with
:math:`0 < S \le 1/2`).  :math:`C^*` is then built from standard values: one
value when one lies close enough, otherwise two in parallel (the larger the
standard value just below :math:`C^*`, the smaller the nearest standard value
to the rest), so the design holds a buildable value.

When it cannot be done the answer says why: the loop has no oscillation
frequency near the value, the frequency cannot be reached inside
``TRIM_RANGE``, or the trimmed capacitor would be smaller than a few times the
transistor's own capacitance (``MIN_OVER_JUNCTION``), where that capacitance
sets the frequency instead of the tank.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

from ringwise.analysis.operating import Solved, solve
from ringwise.design import Design, Topology, get_param, with_param
from ringwise.preferred import nearest, values
from ringwise.units import format_si

#: The trimmed value stays within this factor of the value it replaces.
TRIM_RANGE: Final = 4.0
#: Secant steps; the frequency is met to this relative error.
TRIM_STEPS: Final = 12
TRIM_TOL: Final = 1e-5
#: One standard value is used alone when it is this close to C* (relative);
#: otherwise two in parallel.
SINGLE_VALUE_TOL: Final = 2e-3
#: Standard values just below C* tried as the larger of a parallel pair.
PAIR_CANDIDATES: Final = 3
#: Smallest capacitor worth fitting as the smaller of a pair, F (below it the
#: board's stray capacitance is as large; common practice, no source).
PAIR_SMALLEST: Final = 1e-12
#: A tank capacitor below this multiple of the transistor capacitance across
#: it is not buildable as a frequency-setting part (common practice, no source).
MIN_OVER_JUNCTION: Final = 5.0


@dataclass(frozen=True)
class Trim:
    """The result of trimming ``part`` for ``f_target``.

    ``design`` holds the built value (``parts``: the standard values in
    parallel) when ``reason`` is None; otherwise it is the design as given and
    ``reason`` says why the trim cannot be done.
    """

    part: str
    before: float
    exact: float | None
    parts: tuple[float, ...]
    design: Design
    f_target: float
    f_before: float | None
    f_after: float | None
    gain_after: float
    reason: str | None

    @property
    def text(self) -> str:
        """How the trim reads in a list of reasons."""
        if self.reason is not None:
            return (
                f"{self.part} cannot be trimmed to {format_si(self.f_target, 'Hz')}: {self.reason}"
            )
        built = " ∥ ".join(format_si(v, "F") for v in self.parts)
        value = format_si(sum(self.parts), "F")
        made = value if len(self.parts) == 1 else f"{value} ({built})"
        return (
            f"{self.part} trimmed from {format_si(self.before, 'F')} to {made}: "
            f"f_osc {format_si(self.f_before, 'Hz')} → {format_si(self.f_after, 'Hz')} "
            f"(target {format_si(self.f_target, 'Hz')})"
        )


def trim_part(design: Design) -> str:
    """The capacitor to trim: the Clapp C3 when there is one (it sets f and not
    the gain); otherwise the smaller of C1, C2 (it moves f most per per cent)."""
    t = design.tank
    if t.C3 is not None:
        return "C3"
    return "C1" if t.C1 <= t.C2 else "C2"


def junction_across(s: Solved, part: str) -> float:
    """The transistor capacitance in parallel with a tank capacitor, F: C_π across
    C2 (base-emitter in every form); C_μ across C1 in the common-base form only
    (collector-base); C3's branch sees none."""
    if part == "C2":
        return s.hybrid.C_pi
    if part == "C1" and s.design.topology is Topology.CB:
        return s.hybrid.C_mu
    return 0.0


def build_value(value: float, series: str) -> tuple[float, ...]:
    """``value`` as one standard value, or the closest of two in parallel (the larger
    one of the ``PAIR_CANDIDATES`` standard values just below ``value``)."""
    single = nearest(value, series)
    if abs(single / value - 1.0) <= SINGLE_VALUE_TOL:
        return (single,)
    figures = values(series)
    scale = 10.0 ** math.floor(math.log10(max(figures)))
    decade = 10.0 ** math.floor(math.log10(value))
    grid = sorted(x / scale * decade * m for x in figures for m in (0.1, 1.0))
    below = [g for g in grid if g <= value * (1 + 1e-12)][-PAIR_CANDIDATES:]
    pairs = [(a, nearest(value - a, series)) for a in below if value - a >= PAIR_SMALLEST]
    best = min(pairs, key=lambda ab: abs(sum(ab) / value - 1.0), default=(single,))
    if abs(sum(best) / value - 1.0) >= abs(single / value - 1.0):
        return (single,)
    return best


def trim_frequency(
    design: Design, f_target: float, series: str = "E24", part: str | None = None
) -> Trim:
    """Re-choose one tank capacitor (``part``, default :func:`trim_part`) for ``f_target``."""
    part = part or trim_part(design)
    before = get_param(design, part)
    if before is None:
        raise ValueError(f"{part} is not part of this design")
    s0 = solve(design)

    def refuse(reason: str, exact: float | None = None) -> Trim:
        return Trim(part, before, exact, (), design, f_target, s0.f_osc, s0.f_osc, s0.gain, reason)

    if s0.f_osc is None:
        return refuse("the loop has no oscillation frequency to trim")
    # secant on ln f against ln C, from the whole-tank guess f ∝ C^(-1/2)
    x_prev, y_prev = math.log(before), math.log(s0.f_osc / f_target)
    x = x_prev + 2.0 * y_prev
    lo, hi = x_prev - math.log(TRIM_RANGE), x_prev + math.log(TRIM_RANGE)
    s1, y = s0, y_prev
    for _ in range(TRIM_STEPS):
        x = min(max(x, lo), hi)
        s1 = solve(with_param(design, part, math.exp(x)), s1.op.x, s1.f_osc)
        if s1.f_osc is None:
            return refuse(
                f"the loop loses its oscillation frequency near {part} = "
                f"{format_si(math.exp(x), 'F')}"
            )
        y = math.log(s1.f_osc / f_target)
        if abs(y) < TRIM_TOL or y == y_prev:
            break
        x_prev, y_prev, x = x, y, x - y * (x - x_prev) / (y - y_prev)
    exact = math.exp(x)
    if abs(y) >= TRIM_TOL * 10:
        return refuse(
            f"even {format_si(exact, 'F')} ({TRIM_RANGE:g}× from the present value at most) "
            f"leaves f_osc at {format_si(s1.f_osc, 'Hz')}",
            exact,
        )
    floor = MIN_OVER_JUNCTION * junction_across(s1, part)
    if exact < floor:
        return refuse(
            f"it would need {format_si(exact, 'F')}, below {MIN_OVER_JUNCTION:g}× the "
            f"transistor's {format_si(floor / MIN_OVER_JUNCTION, 'F')} across it "
            f"({format_si(floor, 'F')}): the transistor would set the frequency",
            exact,
        )
    parts = build_value(exact, series)
    trimmed = with_param(design, part, sum(parts))
    s2 = solve(trimmed, s1.op.x, s1.f_osc)
    return Trim(part, before, exact, parts, trimmed, f_target, s0.f_osc, s2.f_osc, s2.gain, None)
