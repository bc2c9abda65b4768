"""Threshold finder and parameter sweeps.

The threshold of a parameter is the value at which the loop gain is exactly
one, every other part fixed: the computed version of turning a decade box on
the bench until the oscillator just starts.  The operating point is re-solved
at each trial value, so a resistor that also moves the bias is treated fully.

The search works on ln(gain) against ln(value), where most parts act nearly
as a power law: secant steps from the current value, then bracketing with
Brent's method if the secant cannot settle.

Which crossing is reported: for parts whose increase raises the loop gain
(the collector resistor, the coil's Q, the load resistor, β ...) the
threshold is the *lowest* value at which the loop gain reaches one — the
value at which the oscillator first starts as the part is turned up, even
when the current value sits beyond a gain maximum (a collector resistor so
large that the transistor nears saturation).  For any other part it is the
crossing reached by following the local trend of the loop gain from the
current value.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Final, Literal

import numpy as np
from pydantic import ValidationError
from scipy.optimize import brentq

from ringwise.analysis.dc import DCConvergenceError
from ringwise.analysis.loop import find_oscillation
from ringwise.analysis.operating import Solved, solve
from ringwise.analysis.pipeline import solve_designs
from ringwise.circuit.mna import restamp, small_signal
from ringwise.circuit.netlist import Resistor
from ringwise.design import Design, get_param, with_param
from ringwise.errors import DesignError

#: The threshold is sought within value / RANGE … value · RANGE.
SEARCH_RANGE: Final = 1e4
#: |ln gain| below this counts as exactly at threshold (gain within 1e-6).
LOG_GAIN_TOL: Final = 1e-6
SECANT_STEPS: Final = 12
#: Largest secant step, in ln(value) (one decade).
MAX_STEP: Final = math.log(10.0)
#: Times a secant step is halved back when its trial has no loop.
RETREATS: Final = 6
#: First trial step of the secant, as a factor on the value.
FIRST_STEP: Final = 1.2
#: Points per decade of the fallback bracketing scan.
SCAN_PER_DECADE: Final = 6
#: A bracketed root whose |ln gain| exceeds this is a discontinuity, not a crossing.
ROOT_CHECK: Final = 1e-4
#: Stand-in for ln(gain) when a trial value gives no loop crossing at all.
NO_LOOP: Final = -50.0
#: Maximum sweep length.
MAX_SWEEP_POINTS: Final = 1000

#: Parameters that act on a linear scale (all others are positive and swept
#: and searched on a log scale).
LINEAR_PARAMS: Final = frozenset({"temperature_C"})
#: Parameters whose increase raises the loop gain on the branch that matters:
#: their threshold is the lowest value at which the loop gain reaches one.
RISING_PARAMS: Final = frozenset({"RC", "Q_L", "Q_ch", "R_load", "beta", "VA", "fT"})
#: Resistors that move the bias only through V_CE (the Early effect): their
#: threshold is first found with the bias held, then polished.
GUIDED_PARAMS: Final = frozenset({"RC", "R_load"})
#: Step used to read the local slope of ln(gain), in ln(value).
SLOPE_STEP: Final = math.log(1.05)


class ParameterError(DesignError):
    """A threshold or sweep request names a parameter it cannot use."""


@dataclass
class _Trials:
    """Caches trial solves and their warm starts during one search."""

    design: Design
    param: str
    last: Solved | None = None
    seen: dict[float, float] = field(default_factory=dict)

    def log_gain(self, log_value: float) -> float:
        if log_value in self.seen:
            return self.seen[log_value]
        value = math.exp(log_value)
        try:
            trial = with_param(self.design, self.param, value)
        except ValidationError:
            result = math.nan
        else:
            x0 = self.last.op.x if self.last is not None else None
            f0 = self.last.f_osc if self.last is not None else None
            try:
                solved = solve(trial, x0, f0)
            except DCConvergenceError:
                result = math.nan
            else:
                self.last = solved
                g = solved.gain
                result = math.log(g) if g > 0 else NO_LOOP
        self.seen[log_value] = result
        return result


@dataclass
class _FixedBiasTrials:
    """Cheap trials for a resistor: its stamp changed, the operating point held.

    Only a guide for the full search (which re-solves the bias): a resistor
    that also moves the bias is then corrected in one or two full trials.
    """

    solved: Solved
    param: str
    seen: dict[float, float] = field(default_factory=dict)

    def log_gain(self, log_value: float) -> float:
        if log_value in self.seen:
            return self.seen[log_value]
        s = self.solved
        system = restamp(s.system, s.netlist, {self.param: {"R": math.exp(log_value)}})
        loop = find_oscillation(small_signal(system, s.hybrid), s.tank.f_ideal, s.f_osc)
        g = float(loop.gain)
        result = math.log(g) if math.isfinite(g) and g > 0 else NO_LOOP
        self.seen[log_value] = result
        return result


@dataclass(frozen=True)
class Threshold:
    """Where the loop gain is one; ``value`` is ``None`` when no crossing was found."""

    param: str
    value: float | None
    current: float
    reason: str | None = None


def _check_param(design: Design, param: str) -> float:
    try:
        value = get_param(design, param)
    except ValueError as err:
        raise ParameterError(str(err)) from err
    if value is None:
        raise ParameterError(f"{param} is not part of this design")
    if param in LINEAR_PARAMS:
        raise ParameterError(f"{param} has no threshold search; sweep it instead")
    return value


def find_threshold(design: Design, param: str, start: Solved | None = None) -> Threshold:
    """Value of ``param`` at which the loop gain is exactly 1, the others fixed."""
    value = _check_param(design, param)
    trials = _Trials(design, param, last=start)
    x0 = math.log(value)
    g0 = math.log(start.gain) if start is not None and start.gain > 0 else trials.log_gain(x0)
    trials.seen[x0] = g0
    if abs(g0) <= LOG_GAIN_TOL:
        return Threshold(param, value, value)
    root = _guided_root(trials, start, param, x0, g0)
    if root is None and param in RISING_PARAMS:
        root = _rising_root(trials, x0, g0)
    elif root is None:
        root = _secant(trials, x0, g0)
        if root is None:
            root = _bracket(trials, x0)
    if root is not None and abs(trials.log_gain(root)) > ROOT_CHECK:
        # The sign change was the loop losing its zero-phase crossing, not gain 1.
        return Threshold(
            param,
            None,
            value,
            reason=(
                f"the loop loses its zero-phase crossing near {param} = {math.exp(root):.4g} "
                "before the loop gain reaches 1"
            ),
        )
    if root is None:
        return Threshold(
            param,
            None,
            value,
            reason=(
                f"no value of {param} between {value / SEARCH_RANGE:.3g} and "
                f"{value * SEARCH_RANGE:.3g} brings the loop gain to 1"
            ),
        )
    return Threshold(param, math.exp(root), value)


def _guided_root(
    trials: _Trials, start: Solved | None, param: str, x0: float, g0: float
) -> float | None:
    """For a resistor: locate the crossing with the bias held, then polish it with full solves."""
    if start is None or start.f_osc is None or param not in GUIDED_PARAMS:
        return None
    if param not in start.netlist or not isinstance(start.netlist[param], Resistor):
        return None
    fast = _FixedBiasTrials(start, param)
    fast.seen[x0] = g0
    guess = _rising_root(fast, x0, g0) if param in RISING_PARAMS else _secant(fast, x0, g0)
    if guess is None:
        return None
    g = trials.log_gain(guess)
    if not _usable(g):
        return None
    if abs(g) <= LOG_GAIN_TOL:
        return guess
    found = _secant_slope(trials, guess, g, min_step=0.0)
    if found is None:
        return None
    root, slope = found
    near = abs(root - guess) < math.log(2.0)
    if near and (param not in RISING_PARAMS or slope > 0):
        return root
    return None


def _secant(trials: _Trials, x0: float, g0: float) -> float | None:
    """Root of ln(gain) by damped secant steps from x0; see :func:`_secant_slope`."""
    found = _secant_slope(trials, x0, g0)
    return None if found is None else found[0]


def _secant_slope(
    trials, x0: float, g0: float, min_step: float = math.log(FIRST_STEP)
) -> tuple[float, float] | None:
    """Damped secant on ln(gain) against ln(value): at most a decade per step,
    halved back toward the last good point when a trial has no loop.

    Returns the root and the slope d ln(gain)/d ln(value) of the last secant.
    """
    lo, hi = x0 - math.log(SEARCH_RANGE), x0 + math.log(SEARCH_RANGE)
    # First trial: where the root would be if gain were proportional to the value
    # (exact for the gain-setting resistor of a lossless circuit).
    x1 = x0 - max(-MAX_STEP, min(MAX_STEP, g0))
    if abs(x1 - x0) < min_step:
        x1 = x0 + min_step
    g1 = trials.log_gain(x1)
    for _retreat in range(RETREATS):
        if _usable(g1):
            break
        x1 = 0.5 * (x0 + x1)
        g1 = trials.log_gain(x1)
    for _ in range(SECANT_STEPS):
        if not (_usable(g0) and _usable(g1)) or g1 == g0:
            return None
        slope = (g1 - g0) / (x1 - x0)
        step = max(-MAX_STEP, min(MAX_STEP, -g1 / slope))
        x2 = x1 + step
        g2 = trials.log_gain(x2)
        for _retreat in range(RETREATS):
            if _usable(g2):
                break
            x2 = 0.5 * (x1 + x2)
            g2 = trials.log_gain(x2)
        if not lo <= x2 <= hi or not _usable(g2):
            return None
        if abs(g2) <= LOG_GAIN_TOL:
            return x2, (g2 - g1) / (x2 - x1)
        x0, g0, x1, g1 = x1, g1, x2, g2
    return None


def _rising_root(trials: _Trials, x0: float, g0: float) -> float | None:
    """Lowest crossing on the branch where ln(gain) rises with ln(value)."""
    # Usually the secant from the current value lands on it directly: accept the
    # root when the gain rises through it on the side the current value implies.
    if _usable(g0):
        found = _secant_slope(trials, x0, g0)
        if found is not None:
            root, slope = found
            if slope > 0 and ((g0 > 0 and root < x0) or (g0 < 0 and root > x0)):
                return root
    floor = x0 - math.log(SEARCH_RANGE)
    x, g = x0, g0
    # Walk down by halving the value until the loop gain rises with the value.
    while True:
        g_up = trials.log_gain(x + SLOPE_STEP)
        if _usable(g) and _usable(g_up) and g_up > g:
            break
        x -= math.log(2.0)
        if x < floor:
            return None
        g = trials.log_gain(x)
    root = _secant(trials, x, g)
    if root is not None:
        if g > 0 and root <= x + SLOPE_STEP:
            return root  # it starts here: the crossing below is on this branch
        if g < 0 and root > x and trials.log_gain(root + SLOPE_STEP) > 0:
            return root  # it does not start here: the crossing above, still rising
    # Bracket along the rising branch: downward when it starts here, upward if not.
    step = math.log(2.0) if g < 0 else -math.log(2.0)
    prev_x, prev_g = x, g
    for _ in range(int(math.log(SEARCH_RANGE) / math.log(2.0)) + 1):
        nx = prev_x + step
        ng = trials.log_gain(nx)
        if not math.isfinite(ng):
            return None
        if (ng > 0) != (prev_g > 0):
            a, b = sorted((prev_x, nx))
            return brentq(_finite(trials), a, b, xtol=1e-12, rtol=1e-12)
        if step > 0 and ng < prev_g:
            return None  # passed the gain maximum without reaching one
        prev_x, prev_g = nx, ng
    return None


def _usable(g: float) -> bool:
    return math.isfinite(g) and g != NO_LOOP


def _bracket(trials: _Trials, x0: float) -> float | None:
    """Scan outward from x0, both ways, nearest first, for a sign change of ln(gain);
    refine it with Brent's method."""
    step = math.log(10.0) / SCAN_PER_DECADE
    n = math.ceil(math.log(SEARCH_RANGE) / step)
    g0 = trials.log_gain(x0)
    prev = {1.0: (x0, g0), -1.0: (x0, g0)}
    for k in range(1, n + 1):
        for direction in (-1.0, 1.0):
            prev_x, prev_g = prev[direction]
            x = x0 + direction * k * step
            g = trials.log_gain(x)
            if math.isfinite(g) and math.isfinite(prev_g) and (g > 0) != (prev_g > 0):
                a, b = sorted((prev_x, x))
                return brentq(_finite(trials), a, b, xtol=1e-12, rtol=1e-12)
            prev[direction] = (x, g)
    return None


def _finite(trials: _Trials):
    def f(x: float) -> float:
        g = trials.log_gain(x)
        return g if math.isfinite(g) else NO_LOOP

    return f


@dataclass(frozen=True)
class Sweep:
    """f_osc (Hz) and loop gain along a parameter; None where there is no loop crossing."""

    param: str
    values: list[float]
    f_osc: list[float | None]
    gain: list[float | None]
    valid: list[bool]
    threshold: Threshold


def sweep_values(
    start: float, stop: float, points: int, scale: Literal["log", "linear"]
) -> np.ndarray:
    if scale == "log":
        if start <= 0 or stop <= 0:
            raise ParameterError("a log sweep needs positive start and stop values")
        return np.geomspace(start, stop, points)
    return np.linspace(start, stop, points)


def sweep(
    design: Design,
    param: str,
    start: float,
    stop: float,
    points: int,
    scale: Literal["log", "linear"] | None = None,
    threshold: Threshold | None = None,
) -> Sweep:
    """Loop gain and f_osc at ``points`` values of ``param`` (others fixed).

    A ``threshold`` the caller already has for this parameter is reused.
    """
    try:
        current = get_param(design, param)
    except ValueError as err:
        raise ParameterError(str(err)) from err
    if current is None:
        raise ParameterError(f"{param} is not part of this design")
    if not 2 <= points <= MAX_SWEEP_POINTS:
        raise ParameterError(f"points must be between 2 and {MAX_SWEEP_POINTS}, got {points}")
    if scale is None:
        scale = "linear" if param in LINEAR_PARAMS else "log"
    values = sweep_values(start, stop, points, scale)
    designs: list[Design | None] = []
    for v in values:
        try:
            designs.append(with_param(design, param, float(v)))
        except ValidationError:
            designs.append(None)
    valid_designs = [d for d in designs if d is not None]
    f_osc: list[float | None] = [None] * len(designs)
    gain: list[float | None] = [None] * len(designs)
    valid = [False] * len(designs)
    if valid_designs:
        # Every valid point is one member of one batch of the pipeline.
        batch = solve_designs(valid_designs)
        rows = iter(range(len(valid_designs)))
        for k, d in enumerate(designs):
            if d is None:
                continue
            i = next(rows)
            if not batch.converged[i]:
                continue
            f = float(batch.loop.f_osc[i])
            valid[k] = True
            if math.isfinite(f):
                f_osc[k] = f
                gain[k] = float(batch.loop.gain[i])
    if threshold is not None and threshold.param == param:
        pass
    elif param in LINEAR_PARAMS:
        threshold = Threshold(param, None, current, reason=f"{param} has no threshold search")
    else:
        threshold = find_threshold(design, param)
    return Sweep(param, [float(v) for v in values], f_osc, gain, valid, threshold)
