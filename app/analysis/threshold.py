"""Threshold finder and parameter sweeps.

The threshold of a parameter is the value at which the loop gain is exactly
one, every other part fixed: the computed version of turning a decade box on
the bench until the oscillator just starts.  The operating point is re-solved
at each trial value, so a resistor that also moves the bias is treated fully.

The search works on ln(gain) against ln(value), where most parts act nearly
as a power law, and every step is one batch of the pipeline
(:func:`ringwise.analysis.pipeline.solve_values`):

1. a grid of :data:`SCAN_PER_DECADE` points per decade over
   value / :data:`SEARCH_RANGE` … value · :data:`SEARCH_RANGE`, all full
   solves in one batch, brackets the crossings of ln(gain) = 0 (when the
   design's own solve also solved the part at value·e^{±PROBE_STEP},
   :func:`probe_changes`, the first batch is instead
   :data:`PROBE_POINTS` points round the root of the quadratic through
   those three (:func:`_probe_guess`): a tighter batch, near the root where
   the loop has its crossing, that usually brackets it);
2. the chosen bracket is polished by batched interpolation: each round
   solves an estimate (Newton's step on the parabola through the last three
   points, else regula falsi) and four points beside it, and keeps the
   tightest sign change, until |ln gain| ≤ :data:`LOG_GAIN_TOL` or the
   round's points pin the root down by interpolation (usually one round;
   the bracket shrinks at least fourfold per round, so a discontinuity is
   pinned down too).

Which crossing is reported: for parts whose increase raises the loop gain
(the collector resistor, the coil's Q, the load resistor, β ...) the
threshold is the *lowest* value at which the loop gain rises through one —
the value at which the oscillator first starts as the part is turned up,
even when the current value sits beyond a gain maximum (a collector resistor
so large that the transistor nears saturation).  For any other part it is
the crossing nearest the current value.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Final, Literal

import numpy as np
from pydantic import ValidationError

from ringwise.analysis.operating import Solved
from ringwise.analysis.pipeline import (
    BatchSolution,
    MemberFigures,
    changed_values,
    part_values,
    patterns_of_structure,
    solve_designs,
    solve_values,
)
from ringwise.circuit.mna import Patterns
from ringwise.design import Design, get_param, param_limits, with_param
from ringwise.errors import DesignError

#: The threshold is sought within value / RANGE … value · RANGE.
SEARCH_RANGE: Final = 1e4
#: |ln gain| below this counts as exactly at threshold (gain within 1e-6).
LOG_GAIN_TOL: Final = 1e-6
#: The design's solve also solves the part at value·e^{±PROBE_STEP} (ln value):
#: the slope and curvature of ln(gain) there place the first batch.
PROBE_STEP: Final = 0.01
#: The probes' first batch: its points sit at the quadratic's root plus these
#: multiples of the spread (:func:`_probe_guess`) ...
PROBE_POINTS: Final = (-1.0, -0.5, 0.0, 0.5, 1.0)
#: ... the spread being this multiple of the quadratic term's share of the
#: step (the root of the tangent minus that of the quadratic; measured on the
#: samples' six parts with a threshold, the quadratic's root lay within 0.2
#: to 0.6 of it from the true one) ...
PROBE_SPREAD: Final = 0.75
#: ... and at least this (ln value) ...
PROBE_SPREAD_MIN: Final = 0.02
#: ... used only where the tangent's root is within this reach (ln value, two
#: decades) and the quadratic moves it by at most this fraction of it: a gain
#: far from its maximum, where the nearest crossing on the trend's side is the
#: one the quadratic points to.
PROBE_REACH: Final = 2.0 * math.log(10.0)
PROBE_BEND: Final = 0.5
#: Points per decade of the bracketing grid (one pipeline batch).
SCAN_PER_DECADE: Final = 6
#: A side of the range is scanned this many grid points at a time from the
#: current value outward (two decades): a crossing found there needs no more.
SCAN_FIRST: Final = 12
#: The first grid covers value / NEAR_RANGE … value · NEAR_RANGE (warm
#: starts hold there, so it is cheap); the rest of the range only if needed.
NEAR_RANGE: Final = 10.0
#: Most polishing rounds (each one batch of five solves); a smooth crossing
#: needs one or two, a discontinuity some twenty.
POLISH_ROUNDS: Final = 40
#: Largest reach of the first trend chord, in ln(value) (one decade).
MAX_STEP: Final = math.log(10.0)
#: The first batch: points this far apart (in ln(value)), GUESS_HALF either
#: side of the power-law guess; they span about a factor 2 each way.
GUESS_SPACING: Final = math.log(10.0) / 12.0
GUESS_HALF: Final = 3
#: A round's outer points sit this many expected errors from the estimate ...
ERROR_MARGIN: Final = 4.0
#: ... and its inner points this fraction of that from it: five solves, the
#: inner three close round the root for the interpolation, the outer two to
#: bracket it and to check the interpolation (usually no second round).
INNER_FRACTION: Final = 0.125
#: A round whose h (in ln value) is at most this is three solves, x and x ± h:
#: they are close enough round the root for the parabola through them (checked
#: with the nearest earlier point) to end the search (measured on the samples:
#: h up to 0.0012 did; 0.004 did not on the Clapp sample, whose loop loses its
#: crossing just below the threshold, and a round of five there did).
THREE_POINT_REACH: Final = 0.002
#: A bracket narrower than this (in ln(value)) is as fine as doubles resolve.
BRACKET_XTOL: Final = 1e-12
#: A bracketed root whose |ln gain| exceeds this is a discontinuity, not a crossing.
ROOT_CHECK: Final = 1e-4
#: A root read off a round's points (no further solve) must be this fraction
#: of LOG_GAIN_TOL from ln gain 0 by its interpolation error estimate ...
INTERPOLATION_SHARE: Final = 0.01
#: ... and every point of the round within this of ln gain 0 (a gain within
#: about 5 %, where ln gain is smooth unless the loop loses its crossing).
INTERPOLATION_REACH: Final = 0.05
#: Newton steps on an interpolating polynomial (it converges in a handful).
POLY_NEWTON_STEPS: Final = 30
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


class ParameterError(DesignError):
    """A threshold or sweep request names a parameter it cannot use."""


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


@dataclass
class _Trials:
    """Trial values of one parameter, solved a batch at a time through the pipeline.

    ``x0`` and ``f_guess`` warm-start each batch's DC Newton and loop search;
    :meth:`warm_from` moves them to a member of the last batch (the polish
    starts each round from its previous estimate).
    """

    design: Design
    param: str
    x0: np.ndarray | None
    f_guess: float | None
    #: Designs of the same structure solved in the first batch alongside the
    #: trials (another analysis's members riding along: one pipeline call
    #: fewer), as changes of the design's part values; their figures are
    #: :attr:`ridden` once solved.
    riders: Sequence[Mapping[str, float | None]] = ()
    #: the riders' own loop-search starts (Hz), default ``f_guess``
    rider_guess: np.ndarray | None = None
    ridden: MemberFigures | None = field(init=False, default=None)
    parts: dict = field(init=False)
    patterns: Patterns = field(init=False)
    limits: tuple[float, float] = field(init=False)
    last: BatchSolution | None = field(init=False, default=None)
    #: ln(value) of the last batch's trials (its first members)
    last_logs: list[float] = field(init=False, default_factory=list)

    def __post_init__(self) -> None:
        # What every batch shares, worked out once per search.
        self.parts = part_values(self.design)
        self.patterns = patterns_of_structure(self.design)
        self.limits = param_limits(self.param)

    def warm_from(self, i: int) -> None:
        """Start the next batches from member ``i`` of the last one (if it converged)."""
        sol = self.last
        if sol is not None and sol.converged[i]:
            self.x0 = sol.x[i]
            f = float(sol.loop.f_osc[i])
            self.f_guess = f if math.isfinite(f) else self.f_guess

    def warm_near(self, log_value: float) -> None:
        """Start the next batches from the last batch's trial at ``log_value``, if
        it had one (the polish starts from the bracket's end nearer the root)."""
        if log_value in self.last_logs:
            self.warm_from(self.last_logs.index(log_value))

    def log_gain(self, log_values: np.ndarray) -> np.ndarray:
        """ln|T| at each exp(log_values): NaN where the value is outside the
        parameter's bounds or the DC solve fails, :data:`NO_LOOP` where the loop
        has no zero-phase crossing."""
        values = np.exp(np.asarray(log_values, dtype=float))
        lo, hi = self.limits
        allowed = (values >= lo) & (values <= hi)
        parts = dict(self.parts)
        parts[self.param] = np.where(allowed, values, parts[self.param])
        m = values.size
        if self.riders and self.ridden is None:
            riders = len(self.riders)
            trial = [{self.param: v} for v in parts[self.param].tolist()]
            joined = changed_values(self.parts, trial + list(self.riders))
            guess = self.f_guess
            if self.rider_guess is not None and guess is not None:
                guess = np.concatenate([np.full(m, guess), self.rider_guess])
            sol = solve_values(self.patterns, joined, m + riders, self.x0, guess)
            self.ridden = MemberFigures.of(sol, m)
        else:
            sol = solve_values(self.patterns, parts, m, self.x0, self.f_guess)
        self.last = sol
        self.last_logs = np.asarray(log_values, dtype=float).tolist()
        gain = sol.gain[:m]
        sol_ok = sol.converged[:m]
        with np.errstate(divide="ignore"):
            g = np.where(gain > 0, np.log(np.where(gain > 0, gain, 1.0)), NO_LOOP)
        return np.where(allowed & sol_ok, g, np.nan)


def find_threshold(design: Design, param: str, start: Solved | None = None) -> Threshold:
    """Value of ``param`` at which the loop gain is exactly 1, the others fixed.

    ``start`` (the design already solved) warm-starts every trial's DC Newton
    and loop search.
    """
    return threshold_with_riders(design, param, start)[0]


def threshold_with_riders(
    design: Design,
    param: str,
    start: Solved | None = None,
    riders: Sequence[Mapping[str, float | None]] = (),
    rider_guess: np.ndarray | None = None,
    probes: Sequence[float] | None = None,
) -> tuple[Threshold, MemberFigures | None]:
    """:func:`find_threshold`, with ``riders`` (designs of the same structure, as
    changes of ``design``'s part values: parameter name -> value, ``None`` an
    optional part left out) solved in the search's first batch, warm-started
    as its trials are (their loop searches from ``rider_guess``, Hz, when
    given).  ``probes`` are the loop gains of :func:`probe_changes`, solved
    with ``start``: they place the first batch.

    Returns the threshold and the riders' figures, or ``None`` when the
    search needed no batch (the riders are then the caller's to solve).
    """
    value = _check_param(design, param)
    if start is not None and abs(_ln(start.gain)) <= LOG_GAIN_TOL:
        return Threshold(param, value, value), None
    trials = _Trials(
        design,
        param,
        None if start is None else start.op.x,
        None if start is None else start.f_osc,
        tuple(riders),
        rider_guess,
    )
    return _search(trials, value, start, probes), trials.ridden


def probe_changes(design: Design, param: str) -> list[dict[str, float]]:
    """The two probes of ``param`` the design's solve may carry (value·e^{∓PROBE_STEP}),
    as changes of its part values; none for a linear parameter or one at its bounds."""
    value = get_param(design, param)
    if value is None or param in LINEAR_PARAMS:
        return []
    lo, hi = param_limits(param)
    probes = [value * math.exp(-PROBE_STEP), value * math.exp(PROBE_STEP)]
    return [{param: v} for v in probes] if lo <= probes[0] and probes[1] <= hi else []


def _probe_guess(g0: float, probes: Sequence[float] | None) -> tuple[float, float] | None:
    """Where the probes put the root, as (step from the current value, spread), ln value.

    The quadratic through ln gain at the current value and the two probes;
    its root nearest the tangent's, the spread :data:`PROBE_SPREAD` times
    their distance.  ``None`` when the probes are missing or without a loop,
    or the gain is too flat or too bent there (:data:`PROBE_REACH`,
    :data:`PROBE_BEND`).
    """
    if probes is None or len(probes) != 2 or not all(g > 0 for g in probes):
        return None
    g_lo, g_hi = (math.log(g) for g in probes)
    h = PROBE_STEP
    slope = (g_hi - g_lo) / (2.0 * h)
    curv = (g_hi - 2.0 * g0 + g_lo) / (h * h)
    if not (math.isfinite(slope) and math.isfinite(curv)) or slope == 0.0:
        return None
    tangent = -g0 / slope
    if abs(tangent) > PROBE_REACH:
        return None
    root = tangent
    disc = slope * slope - 2.0 * curv * g0
    if curv != 0.0 and disc >= 0.0:
        roots = [(-slope + sign * math.sqrt(disc)) / curv for sign in (1.0, -1.0)]
        root = min(roots, key=lambda r: abs(r - tangent))
    bend = abs(root - tangent)
    if bend > PROBE_BEND * abs(tangent):
        return None
    return root, max(PROBE_SPREAD * bend, PROBE_SPREAD_MIN)


def _search(
    trials: _Trials, value: float, start: Solved | None, probes: Sequence[float] | None = None
) -> Threshold:
    """The threshold search of :func:`find_threshold` on its trials."""
    param = trials.param
    x0 = math.log(value)
    g0 = _ln(start.gain) if start is not None else float(trials.log_gain(np.array([x0]))[0])
    if abs(g0) <= LOG_GAIN_TOL:
        return Threshold(param, value, value)
    rising = param in RISING_PARAMS
    step = math.log(10.0) / SCAN_PER_DECADE
    k = None
    placed = _probe_guess(g0, probes) if start is not None else None
    if placed is not None:
        # The probes' quadratic: a tight batch round its root.
        root, spread = placed
        around = x0 + root + spread * np.asarray(PROBE_POINTS)
        k, xs, gs, centre = _first_batch(trials, around, x0, g0, rising)
    if k is None:
        # A few points around where the root would be if the gain were
        # proportional to the value (exact for the gain-setting resistor of a
        # lossless circuit): usually they bracket the crossing, one small batch.
        guess = x0 - max(-MAX_STEP, min(MAX_STEP, g0))
        around = guess + GUESS_SPACING * np.arange(-GUESS_HALF, GUESS_HALF + 1)
        # and two round where it would be if the gain went as the value's square root
        # (an emitter follower's load: its threshold twice as far in ln value), so
        # that one batch brackets exponents from 1/2 to 1 and beyond
        half = x0 - max(-2.0 * MAX_STEP, min(2.0 * MAX_STEP, 2.0 * g0))
        around = np.union1d(around, half + GUESS_SPACING * np.array([-1.0, 1.0]))
        k, xs, gs, centre = _first_batch(trials, around, x0, g0, rising)
    if k is None and not rising:
        # The whole range on the trend's side, then the other side.
        down = _goes_down(xs, gs, centre)
        k, xs, gs = _scan_side(trials, x0, g0, step, down)
        if k is None:
            k, xs, gs = _scan_side(trials, x0, g0, step, not down)
    elif k is None:
        # The near grid (cheap: warm starts hold), then the rest of the range
        # when the crossing to report is not inside it.
        near = math.ceil(math.log(NEAR_RANGE) / step)
        far = math.ceil(math.log(SEARCH_RANGE) / step)
        ks = np.arange(-near, near + 1)
        xs = x0 + step * ks
        gs = trials.log_gain(xs)
        gs[near] = g0
        k = _pick_interval(gs, near, rising, xs)
        if k is None or not _settled_below(gs, k):
            ks = np.arange(-far, far + 1)
            outer = np.abs(ks) > near
            wide = np.empty(ks.size)
            wide[~outer] = gs
            xs = x0 + step * ks
            wide[outer] = trials.log_gain(xs[outer])
            gs, k = wide, _pick_interval(wide, far, rising, xs)
    if k is None:
        return Threshold(
            param,
            None,
            value,
            reason=(
                f"no value of {param} between {value / SEARCH_RANGE:.3g} and "
                f"{value * SEARCH_RANGE:.3g} brings the loop gain to 1"
            ),
        )
    root, g_root = _polish(trials, xs, gs, k)
    if abs(g_root) > ROOT_CHECK:
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
    return Threshold(param, math.exp(root), value)


def _first_batch(
    trials: _Trials, around: np.ndarray, x0: float, g0: float, rising: bool
) -> tuple[int | None, np.ndarray, np.ndarray, int]:
    """A first batch of trials ``around`` (ln value, sorted), with the current
    value x0 (ln gain g0) inserted: the interval holding the crossing to
    report (``None`` when it holds none on the trend's side), the points,
    their ln gain and the index of x0 among them."""
    centre = int(np.searchsorted(around, x0))
    xs = np.insert(around, centre, x0)
    gs = np.insert(trials.log_gain(around), centre, g0)
    k = _pick_interval(gs, centre, rising, xs)
    if k is not None and not _on_trend_side(xs, gs, centre, k, rising):
        k = None
    return k, xs, gs, centre


def _scan_side(
    trials: _Trials, x0: float, g0: float, step: float, down: bool
) -> tuple[int | None, np.ndarray, np.ndarray]:
    """One side of the search range: the grid interval nearest the current
    value where ln(gain) changes sign (``None`` if none), with the grid
    (current value included) and its ln(gain).

    The grid is solved from the current value outward, first its
    :data:`SCAN_FIRST` nearest points (one batch), the rest (a second
    batch) only when those hold no sign change whose polish can do without
    them (:func:`_inside`).  What is returned is the side's grid as far as it
    was solved; each member's figures are what a single batch would give, so
    the threshold is the same.
    """
    n = math.ceil(math.log(SEARCH_RANGE) / step)
    ks = np.arange(-n, 1) if down else np.arange(0, n + 1)
    xs = x0 + step * ks
    gs = np.full(xs.size, np.nan)
    here = int(np.flatnonzero(ks == 0)[0])
    gs[here] = g0
    # The grid's indices ordered from the current value outward.
    order = np.arange(xs.size)[::-1] if down else np.arange(xs.size)
    first = np.sort(order[1 : SCAN_FIRST + 1])
    gs[first] = trials.log_gain(xs[first])
    k = _nearest_change(gs, down)
    if k is not None and _inside(k, gs, order[: SCAN_FIRST + 1], down):
        kept = np.sort(order[: SCAN_FIRST + 1])
        return k - int(kept[0]), xs[kept], gs[kept]
    rest = np.sort(order[SCAN_FIRST + 1 :])
    if rest.size:
        gs[rest] = trials.log_gain(xs[rest])
    return _nearest_change(gs, down), xs, gs


def _nearest_change(gs: np.ndarray, down: bool) -> int | None:
    """The interval nearest the current value (the grid's top when ``down``,
    else its bottom) where ln(gain) changes sign between finite points."""
    finite = np.isfinite(gs)
    change = np.flatnonzero(finite[:-1] & finite[1:] & ((gs[:-1] > 0) != (gs[1:] > 0)))
    if not change.size:
        return None
    return int(change[-1] if down else change[0])


def _inside(k: int, gs: np.ndarray, solved: np.ndarray, down: bool) -> bool:
    """Whether the polish of interval k reads nothing of the grid beyond the
    solved indices: the neighbour beyond the interval's far end is solved
    (its first parabola may use it), and a grid point the interpolation may
    use lies nearer than any unsolved one (the next point toward the current
    value, never a round's trial, or both ends of the interval, at most one
    of which a trial can coincide with)."""
    lo, hi = int(solved.min()), int(solved.max())
    if (k - 1 < lo) if down else (k + 2 > hi):
        return False
    inner = k + 2 if down else k - 1
    if 0 <= inner < gs.size and _usable(float(gs[inner])):
        return True
    return _usable(float(gs[k])) and _usable(float(gs[k + 1]))


def _ln(gain: float) -> float:
    return math.log(gain) if gain > 0 else NO_LOOP


def _settled_below(g: np.ndarray, k: int) -> bool:
    """Below interval k the near grid stays below gain 1 with a loop throughout,
    (or without a loop), so no lower rising crossing hides inside it."""
    below = g[: k + 1]
    return bool(np.all(np.isfinite(below) & (below < 0)))


def _pick_interval(g: np.ndarray, centre: int, rising: bool, xs: np.ndarray) -> int | None:
    """Index k of the interval (xs[k], xs[k+1]) holding the crossing to report.

    Rising parts: the lowest interval where ln(gain) rises through 0.
    Others: the nearest interval in the direction the trend of the loop gain
    points to (:func:`_goes_down`), else the nearest the other way.
    ``centre`` is the index of the current value.
    """
    finite = np.isfinite(g)
    change = finite[:-1] & finite[1:] & ((g[:-1] > 0) != (g[1:] > 0))
    if rising:
        change &= g[1:] > 0
        found = np.flatnonzero(change)
        return int(found[0]) if found.size else None
    found = np.flatnonzero(change)
    if not found.size:
        return None
    below, above = found[found < centre], found[found >= centre]
    first, second = (below[::-1], above) if _goes_down(xs, g, centre) else (above, below[::-1])
    return int(first[0]) if first.size else int(second[0])


def _goes_down(xs: np.ndarray, g: np.ndarray, centre: int) -> bool:
    """Whether the trend of the loop gain points to lower values: the gain is
    above 1 and rises with the value, or below 1 and falls.  The trend is the
    chord from the current value to the point nearest where the root would be
    if the gain were proportional to the value (at most a decade away)."""
    g0 = g[centre]
    target = xs[centre] - max(-MAX_STEP, min(MAX_STEP, g0))
    others = np.flatnonzero(np.isfinite(g) & (np.arange(g.size) != centre))
    if not others.size:
        return bool(g0 > 0)
    j = others[np.argmin(np.abs(xs[others] - target))]
    slope = (g[j] - g0) / (xs[j] - xs[centre])
    return bool((g0 > 0) == (slope > 0))


def _on_trend_side(xs: np.ndarray, g: np.ndarray, centre: int, k: int, rising: bool) -> bool:
    """Whether interval k of the first small batch is the crossing to report:
    for a rising part, below the current value when the gain is above 1 there
    and above it otherwise; for any other part, on the trend's side."""
    down = bool(g[centre] > 0) if rising else _goes_down(xs, g, centre)
    return k < centre if down else k >= centre


def _newton_estimate(
    xs: list[float], ys: list[float], a: float, b: float
) -> tuple[float, float] | None:
    """Root estimate from three points by the parabola through them, with its
    expected error: Newton's step from the middle point on the parabola's
    slope, the error its square times |g''/(2g')| (quadratic convergence).

    ``None`` when a point has no loop or the estimate leaves the bracket (a, b).
    """
    if any(y == NO_LOOP for y in ys):
        return None
    (x0, x1, x2), (y0, y1, y2) = xs, ys
    d01, d12 = (y1 - y0) / (x1 - x0), (y2 - y1) / (x2 - x1)
    curv = (d12 - d01) / (x2 - x0)  # g''/2
    slope = d01 + curv * (x1 - x0)  # g' at x1
    if slope == 0 or not math.isfinite(slope):
        return None
    step = -y1 / slope
    x = x1 + step
    if not a < x < b:
        return None
    return x, abs(curv / slope) * step * step


def _polish(trials: _Trials, xs: np.ndarray, gs: np.ndarray, k: int) -> tuple[float, float]:
    """Narrow the sign change of ln(gain) in grid interval k to a root, a batch per round.

    Returns the root (ln value) and ln(gain) there.  Each round solves an
    estimate x, x ± h/8 and x ± h (only x and x ± h when h is at most
    :data:`THREE_POINT_REACH`) and keeps the tightest sign change among
    them.  The estimate is Newton's step on the parabola through the last
    three points (the grid's, then the round's inner three), h a few times
    its expected error, so a round straddles the root and the next parabola
    is tight; when that fails (no loop at a point, or a step out of the
    bracket) the estimate is the bracket's regula falsi or middle, h a
    quarter of the bracket (it shrinks at least fourfold).  A round whose
    points pin the root down by interpolation ends the search
    (:func:`_interpolated_root`).
    """
    a, ga, b, gb = float(xs[k]), float(gs[k]), float(xs[k + 1]), float(gs[k + 1])
    best_x, best_g = (a, ga) if abs(ga) < abs(gb) else (b, gb)
    j = k if k + 2 < xs.size and math.isfinite(gs[k + 2]) else k - 1
    last = (xs[j : j + 3].tolist(), gs[j : j + 3].tolist()) if j >= 0 else None
    seen = [(x, g) for x, g in zip(xs.tolist(), gs.tolist(), strict=True) if _usable(g)]
    trials.warm_near(best_x)
    for _ in range(POLISH_ROUNDS):
        width = b - a
        if width <= BRACKET_XTOL:
            break
        found = None if last is None else _newton_estimate(*last, a, b)
        if found is not None:
            x, err = found
            h = min(max(ERROR_MARGIN * err, BRACKET_XTOL), 0.25 * width)
        else:
            usable = ga != NO_LOOP and gb != NO_LOOP
            x = a - ga * width / (gb - ga) if usable else 0.5 * (a + b)
            h = 0.25 * width
        x = min(max(x, a + h), b - h)
        if h <= THREE_POINT_REACH:
            trial = np.array([x - h, x, x + h])
        else:
            d = INNER_FRACTION * h
            trial = np.array([x - h, x - d, x, x + d, x + h])
        gt = trials.log_gain(trial)
        mid = trial.size // 2
        trials.warm_from(mid)
        points = list(zip(trial.tolist(), gt.tolist(), strict=True))
        inner = points[mid - 1 : mid + 2]
        last = ([p for p, _g in inner], [g for _p, g in inner])
        if not all(math.isfinite(g) for g in last[1]):
            last = None
        outer = [p for p in points if p not in inner and _usable(p[1])]
        others = seen
        seen = seen + [p for p in points if _usable(p[1])]
        for p, g in points:
            if not math.isfinite(g):
                continue
            if abs(g) < abs(best_g):
                best_x, best_g = p, g
            if (g > 0) == (ga > 0):
                a, ga = p, g
            else:
                b, gb = p, g
                break
        if abs(best_g) <= LOG_GAIN_TOL:
            break
        close = _interpolated_root(last, outer, others, a, b)
        if close is not None:
            return close
    return best_x, best_g


def _usable(g: float) -> bool:
    """A trial's ln gain that interpolation may use (a loop crossing was found)."""
    return math.isfinite(g) and g != NO_LOOP


def _interpolated_root(
    last: tuple[list[float], list[float]] | None,
    outer: list[tuple[float, float]],
    others: list[tuple[float, float]],
    a: float,
    b: float,
) -> tuple[float, float] | None:
    """The root read off a round's points without another round, when
    interpolation already pins it down.

    The root of the parabola through the round's inner three points (``last``)
    is compared with the root of the cubic through them and the nearer of
    the round's ``outer`` points, and that with the quartic's through both;
    failing those, the parabola's with the cubic's through the inner points
    and the nearest earlier point.  The difference of two successive roots
    is the lower one's interpolation error (the higher polynomial's extra
    term), and it must be within :data:`INTERPOLATION_SHARE` of
    :data:`LOG_GAIN_TOL` in ln gain.  A jump among the points (the loop
    losing its crossing) shows as a large difference, or as an inner point
    beyond :data:`INTERPOLATION_REACH`.

    Returns the higher polynomial's root and the error bound in ln gain, or
    ``None`` (another round is needed).
    """
    if last is None or not all(_usable(y) for y in last[1]):
        return None
    xs, ys = last
    if max(abs(y) for y in ys) > INTERPOLATION_REACH:
        return None
    middle = xs[1]
    parabola = _polynomial_root(xs, ys, middle)
    lower = parabola
    px, py = list(xs), list(ys)
    for x, y in sorted(outer, key=lambda p: abs(p[0] - middle)):
        px.append(x)
        py.append(y)
        higher = _polynomial_root(px, py, middle)
        agreed = _agreed(lower, higher, a, b)
        if agreed is not None:
            return agreed
        lower = higher
    near = [p for p in others if p[0] not in xs]
    if not near:
        return None
    x4, y4 = min(near, key=lambda p: abs(p[0] - middle))
    return _agreed(parabola, _polynomial_root([*xs, x4], [*ys, y4], middle), a, b)


def _agreed(
    lower: tuple[float, float] | None, higher: tuple[float, float] | None, a: float, b: float
) -> tuple[float, float] | None:
    """The higher polynomial's root and the error bound in ln gain when the two
    roots agree within :data:`INTERPOLATION_SHARE` of :data:`LOG_GAIN_TOL`
    inside the bracket (a, b), else ``None``."""
    if lower is None or higher is None or not a <= higher[0] <= b:
        return None
    bound = abs(higher[0] - lower[0]) * abs(higher[1])
    if bound > INTERPOLATION_SHARE * LOG_GAIN_TOL:
        return None
    return higher[0], bound


def _polynomial_root(xs: list[float], ys: list[float], start: float) -> tuple[float, float] | None:
    """Root (and slope there) of the polynomial through the points (Newton's
    divided differences), by Newton's method from ``start``; ``None`` when it
    does not settle within the points' span."""
    n = len(xs)
    coef = list(ys)
    for level in range(1, n):
        for i in range(n - 1, level - 1, -1):
            coef[i] = (coef[i] - coef[i - 1]) / (xs[i] - xs[i - level])
    lo, hi = min(xs), max(xs)
    span = hi - lo
    x = start
    for _ in range(POLY_NEWTON_STEPS):
        value, slope = coef[-1], 0.0
        for i in range(n - 2, -1, -1):
            slope = slope * (x - xs[i]) + value
            value = value * (x - xs[i]) + coef[i]
        if slope == 0.0 or not math.isfinite(slope):
            return None
        step = value / slope
        x -= step
        if not lo - span <= x <= hi + span:
            return None
        if abs(step) <= BRACKET_XTOL:
            return x, slope
    return None


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
