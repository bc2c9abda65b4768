r"""Return ratio of the loop through the transistor's controlled source.

Bode's method: the controlled source :math:`g_m v_{be}` is replaced by an
independent test current :math:`i_t` injected into the collector node and
drawn from the emitter node; with everything else in place,

.. math:: T(s) = -\,g_m\,v_{be}(s) / i_t .

With this sign :math:`T = +1` is the oscillation threshold and the ideal
common-emitter Colpitts gives :math:`T = g_m R_C C_1/C_2`.  The determinant of
the complete circuit is :math:`\det(Y_{broken})\,(1 - T)`, so the natural
frequencies are the roots of :math:`1 - T(s)`.

The oscillation frequency is where the phase of T crosses zero (falling) near
the tank's resonance; the loop gain is :math:`|T|` there; the loaded Q follows
from the phase slope, :math:`Q_{L,loaded} = (\omega_0/2)\,|d\varphi/d\omega|`.

Every function here works on a :class:`~ringwise.circuit.mna.SmallSignal` whose
matrices may carry leading batch axes (many variants of one circuit at once),
which is how budgets and Monte Carlo runs stay vectorised.

References
----------
Bode, *Network Analysis and Feedback Amplifier Design*, 1945 (return ratio);
Razavi, *RF Microelectronics*, oscillator chapter (phase-slope Q), both from memory.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.circuit.mna import SmallSignal

#: The zero-phase crossing is sought between f_ref / SPAN and f_ref * SPAN.
SEARCH_SPAN: Final = 3.0
SEARCH_POINTS: Final = 41
#: Relative frequency tolerance of a refined crossing.
FREQ_RTOL: Final = 1e-11
#: Newton steps that stop shrinking below this relative size have reached the
#: round-off floor of Im T and are accepted.
NOISE_RTOL: Final = 1e-8
#: Bisection narrows a bracket to this relative width, then hands over to Newton.
BISECT_HANDOVER: Final = 1e-6
BISECT_MAX: Final = 60
#: Newton iterations allowed when refining a crossing.
NEWTON_STEPS: Final = 30
TWO_PI: Final = 2.0 * math.pi


def return_ratio(ss: SmallSignal, s: np.ndarray | complex) -> np.ndarray:
    """T(s) for complex frequencies ``s`` (rad/s).

    ``s`` broadcasts against the batch shape of ``ss``: for an unbatched
    circuit and ``s`` of shape (K,), the result has shape (K,).
    """
    s_arr = np.asarray(s, dtype=complex)
    Y = ss.G[..., None, :, :] + s_arr[..., :, None, None] * ss.C[..., None, :, :]
    if s_arr.ndim == 0:
        Y = ss.G + s_arr * ss.C
    x = np.linalg.solve(Y, np.broadcast_to(ss.u.astype(complex), Y.shape[:-1])[..., None])
    gm = np.asarray(ss.gm)[..., None] if s_arr.ndim else ss.gm
    return -gm * (x[..., 0] @ ss.w)


def return_ratio_slope(ss: SmallSignal, s: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """T, dT/ds and x for one s per batch member (``s`` has the batch shape)."""
    s = np.asarray(s)
    Yinv = np.linalg.inv(ss.G + s[..., None, None] * ss.C)
    x = Yinv @ ss.u
    dx = -(Yinv @ (ss.C @ x[..., None]))[..., 0]
    return -ss.gm * (x @ ss.w), -ss.gm * (dx @ ss.w), x


@dataclass(frozen=True)
class LoopFigures:
    """The loop at its oscillation frequency (arrays when the circuit is batched).

    Attributes
    ----------
    f_osc : zero-phase frequency of T, Hz (NaN where none was found)
    T : return ratio there (real and positive up to round-off)
    gain : |T(f_osc)|
    phase_slope : dφ/dω at f_osc, s (negative for a proper resonator)
    Q_loaded : (ω/2)·|dφ/dω|
    Z_out : |v_ce / i_t| at f_osc, Ω: what the controlled source drives
    """

    f_osc: np.ndarray
    T: np.ndarray
    gain: np.ndarray
    phase_slope: np.ndarray
    Q_loaded: np.ndarray
    Z_out: np.ndarray
    #: dT/ds at f_osc, s (for a first Newton step toward the dominant pole)
    dT_ds: np.ndarray

    @property
    def found(self) -> np.ndarray:
        return np.isfinite(self.f_osc)


def refine_crossing(
    ss: SmallSignal, f0: np.ndarray, f_lo: np.ndarray, f_hi: np.ndarray
) -> LoopFigures:
    """Newton on Im T(j2πf) = 0 for every batch member, kept inside [f_lo, f_hi].

    Members whose iteration leaves the interval, meets a rising phase or a
    negative real part are returned with NaN figures.
    """
    if np.ndim(ss.gm) == 0:
        return _refine_one(ss, float(f0), float(f_lo), float(f_hi))
    f = np.array(f0, dtype=float, copy=True)
    alive = np.ones(f.shape, dtype=bool)
    done = np.zeros(f.shape, dtype=bool)
    prev_step = np.full(f.shape, np.inf)
    last = None
    for _ in range(NEWTON_STEPS):
        T, dT_ds, x = return_ratio_slope(ss, TWO_PI * 1j * f)
        last = (f, T, dT_ds, x)
        slope = dT_ds.real  # d(Im T)/dω = Im(j dT/ds) = Re(dT/ds)
        bad = (slope >= 0) | (T.real <= 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            step = np.where(bad | done, 0.0, -T.imag / slope / TWO_PI)
        f_new = f + step
        bad |= (f_new < f_lo) | (f_new > f_hi)
        alive &= ~(bad & ~done)
        f = np.where(alive, f_new, f)
        size = np.abs(step)
        # Converged, or stuck at the round-off floor of Im T (steps no longer shrink).
        done |= alive & (
            (size <= FREQ_RTOL * f) | ((size <= NOISE_RTOL * f) & (size >= 0.5 * prev_step))
        )
        prev_step = size
        if np.all(done | ~alive):
            break
    ok = done & alive
    assert last is not None
    f_last, T, dT_ds, x = last
    # The figures of the last evaluation: its frequency is within the tolerance
    # of the converged one, so no further solve is needed.
    return _figures_from(ss, np.where(ok, f_last, np.nan), T, dT_ds, x)


def _refine_one(ss: SmallSignal, f: float, f_lo: float, f_hi: float) -> LoopFigures:
    """The same Newton iteration for one circuit, in scalar arithmetic (far less overhead)."""
    gm, u, w, G, C = float(ss.gm), ss.u, ss.w, ss.G, ss.C
    prev_step = math.inf
    for _ in range(NEWTON_STEPS):
        Yinv = np.linalg.inv(G + (TWO_PI * 1j * f) * C)
        x = Yinv @ u
        T = complex(-gm * (x @ w))
        dT_ds = complex(gm * ((Yinv @ (C @ x)) @ w))
        slope = dT_ds.real  # d(Im T)/dω
        if slope >= 0 or T.real <= 0:
            break
        step = -T.imag / slope / TWO_PI
        size = abs(step)
        if size <= FREQ_RTOL * f or (size <= NOISE_RTOL * f and size >= 0.5 * prev_step):
            return _figures_from(ss, np.asarray(f), np.asarray(T), np.asarray(dT_ds), x)
        f += step
        if not f_lo <= f <= f_hi:
            break
        prev_step = size
    nan = np.asarray(math.nan)
    cnan = np.asarray(complex(math.nan, math.nan))
    return LoopFigures(nan, cnan, nan, nan, nan, nan, cnan)


def _figures(ss: SmallSignal, f_osc: np.ndarray) -> LoopFigures:
    w = TWO_PI * np.nan_to_num(f_osc, nan=1.0)
    T, dT_ds, x = return_ratio_slope(ss, 1j * w)
    return _figures_from(ss, f_osc, T, dT_ds, x)


def _figures_from(
    ss: SmallSignal, f_osc: np.ndarray, T: np.ndarray, dT_ds: np.ndarray, x: np.ndarray
) -> LoopFigures:
    w = TWO_PI * np.nan_to_num(f_osc, nan=1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (dT_ds / T).real  # dφ/dω = Im((dT/dω)/T), dT/dω = j dT/ds
    nan = ~np.isfinite(f_osc) | ~np.isfinite(slope) | (np.abs(T) == 0)

    def mask(a: np.ndarray) -> np.ndarray:
        return np.where(nan, np.nan, a)

    return LoopFigures(
        f_osc=f_osc,
        T=np.where(nan, np.nan + 0j, T),
        gain=mask(np.abs(T)),
        phase_slope=mask(slope),
        Q_loaded=mask(0.5 * w * np.abs(slope)),
        Z_out=mask(np.abs(x @ ss.u)),
        dT_ds=np.where(nan, np.nan + 0j, dT_ds),
    )


def find_oscillation(
    ss: SmallSignal, f_ref: float | np.ndarray, f_guess: float | np.ndarray | None = None
) -> LoopFigures:
    """The falling zero-phase crossing of T nearest ``f_ref`` (NaN where there is none).

    Newton starts from ``f_guess`` (default ``f_ref``); members for which it
    fails get a grid search over f_ref/SPAN … f_ref·SPAN and a bracketed
    Newton refinement.
    """
    batch = np.shape(ss.gm)
    f_ref_a = np.broadcast_to(np.asarray(f_ref, dtype=float), batch)
    start = f_ref_a if f_guess is None else np.broadcast_to(np.asarray(f_guess, float), batch)
    first = refine_crossing(ss, start, start / SEARCH_SPAN, start * SEARCH_SPAN)
    if np.all(first.found):
        return first
    if not batch:
        return _grid_search(ss, f_ref_a)
    # Search the grid only for the members Newton could not settle.
    todo = ~first.found
    sub = dataclasses.replace(ss, G=ss.G[todo], C=ss.C[todo], gm=np.asarray(ss.gm)[todo])
    second = _grid_search(sub, f_ref_a[todo])
    merged = [a.copy() for a in _astuple(first)]
    for out, part in zip(merged, _astuple(second), strict=True):
        out[todo] = part
    return LoopFigures(*merged)


def _grid_search(ss: SmallSignal, f_ref: np.ndarray) -> LoopFigures:
    """Grid over f_ref/SPAN … f_ref·SPAN, then bracketed Newton (and bisection if needed)."""
    grid = np.geomspace(1.0 / SEARCH_SPAN, SEARCH_SPAN, SEARCH_POINTS)
    f_grid = f_ref[..., None] * grid
    T = return_ratio(ss, TWO_PI * 1j * f_grid)
    im, re = T.imag, T.real
    falling = (im[..., :-1] > 0) & (im[..., 1:] <= 0) & (re[..., :-1] + re[..., 1:] > 0)
    distance = np.where(falling, np.abs(np.log(grid[:-1] * grid[1:]) / 2), np.inf)
    k = np.argmin(distance, axis=-1)
    has = np.take_along_axis(falling, k[..., None], -1)[..., 0]
    lo = np.take_along_axis(f_grid, k[..., None], -1)[..., 0]
    hi = np.take_along_axis(f_grid, k[..., None] + 1, -1)[..., 0]
    second = refine_crossing(ss, np.sqrt(lo * hi), lo, hi)
    second = _bisect_leftovers(ss, second, lo, hi, has)
    nothing = np.asarray(~has)
    if np.any(nothing):
        second = LoopFigures(*(np.where(nothing, np.nan, a) for a in _astuple(second)))
    return second


def _bisect_leftovers(
    ss: SmallSignal, figs: LoopFigures, lo: np.ndarray, hi: np.ndarray, has: np.ndarray
) -> LoopFigures:
    """Bisection for members with a bracketed crossing where Newton still failed."""
    need = has & ~figs.found
    if not np.any(need):
        return figs
    lo, hi = lo.copy(), hi.copy()
    for _ in range(BISECT_MAX):
        narrow = need & (hi - lo <= BISECT_HANDOVER * hi)
        if np.all(narrow | ~need):
            break
        mid = np.sqrt(lo * hi)
        im = return_ratio(ss, TWO_PI * 1j * mid[..., None])[..., 0].imag
        lo = np.where(need & (im > 0), mid, lo)
        hi = np.where(need & (im <= 0), mid, hi)
    # A narrow bracket is well inside Newton's basin even for a high-Q tank.
    newton = refine_crossing(ss, np.sqrt(lo * hi), lo, hi)
    f = np.where(need, np.where(newton.found, newton.f_osc, np.sqrt(lo * hi)), figs.f_osc)
    return _figures(ss, f)


def _astuple(f: LoopFigures) -> tuple[np.ndarray, ...]:
    return (f.f_osc, f.T, f.gain, f.phase_slope, f.Q_loaded, f.Z_out, f.dT_ds)
