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

from ringwise.analysis.crossing import newton_crossings
from ringwise.circuit.batchlu import BatchLU, matvec, pivoted, unreliable
from ringwise.circuit.mna import SmallSignal, dot_last

#: The zero-phase crossing is sought between f_ref / SPAN and f_ref * SPAN.
SEARCH_SPAN: Final = 3.0
SEARCH_POINTS: Final = 41
#: A Newton step below this fraction of f ends the iteration: the step is
#: taken and T extrapolated to it, leaving an error of order its square
#: (about 1e-14 of f for Q ~ 100).
ACCEPT_RTOL: Final = 1e-7
#: Bisection narrows a bracket to this relative width, then hands over to Newton.
BISECT_HANDOVER: Final = 1e-6
BISECT_MAX: Final = 60
#: Newton iterations allowed when refining a crossing.
NEWTON_STEPS: Final = 30
#: Batches of at least this many members drop the unknowns a supply pins
#: before the search (:func:`without_pinned`): fewer to factorise per step,
#: worth the reindexing once the factorisations dominate.
CONDENSE_BATCH: Final = 64
#: From this many systems (members × frequencies) on, the loop is solved by
#: elimination across the batch (:mod:`ringwise.circuit.batchlu`) instead of
#: LAPACK once per matrix, whose per-call overhead then dominates.
BATCH_ELIMINATION: Final = 64
TWO_PI: Final = 2.0 * math.pi


def loop_solve(
    ss: SmallSignal, s: np.ndarray | complex, slope: bool = False
) -> tuple[np.ndarray, np.ndarray | None]:
    r"""The one solve of the broken loop: :math:`x = (G + sC)^{-1} u` and, with
    ``slope``, :math:`dx/ds = -(G + sC)^{-1} C x`.

    ``s`` (rad/s, complex) has the batch shape of ``ss`` plus optional trailing
    axes of frequencies: with ``ss`` batched (B,) and ``s`` of shape (B, K) the
    result has shape (B, K, n).  Every return-ratio figure comes from here.
    """
    s_arr = np.asarray(s, dtype=complex)
    extra = s_arr.ndim - np.ndim(ss.gm)
    if _eliminates(ss, s_arr):
        return _loop_solve_batched(ss, s_arr, extra, slope)
    G, C = ss.G, ss.C
    for _ in range(extra):
        G, C = G[..., None, :, :], C[..., None, :, :]
    Y = G + s_arr[..., None, None] * C
    if not slope:
        rhs = np.broadcast_to(ss.u.astype(complex), Y.shape[:-1])[..., None]
        return np.linalg.solve(Y, rhs)[..., 0], None
    Yinv = np.linalg.inv(Y)
    x = Yinv @ ss.u
    dx = -(Yinv @ (C @ x[..., None]))[..., 0]
    return x, dx


def _eliminates(ss: SmallSignal, s: np.ndarray) -> bool:
    """Whether :func:`loop_solve` takes the elimination across the batch: enough
    systems, and no zero on the diagonal of the pattern (a supply's row, kept
    when the batch was not condensed by :func:`without_pinned`)."""
    n = ss.G.shape[-1]
    if max(s.size, np.size(ss.gm)) < BATCH_ELIMINATION:  # s: the batch shape, then frequencies
        return False
    G0 = ss.G.reshape(-1, n, n)[0]
    C0 = ss.C.reshape(-1, n, n)[0]
    return bool(np.all((np.diagonal(G0) != 0) | (np.diagonal(C0) != 0)))


def _loop_solve_batched(
    ss: SmallSignal, s: np.ndarray, extra: int, slope: bool
) -> tuple[np.ndarray, np.ndarray | None]:
    """:func:`loop_solve` by elimination across the batch (matrices laid out (n, n, …)).

    The backward error of every member's x is checked with G and C (the
    residual's C·x is the slope's right-hand side), against the bound
    max|G| + |s|·max|C| of max|G + sC|; members above the limit are solved
    again by LAPACK with pivoting.
    """
    n = ss.G.shape[-1]
    G, C = np.moveaxis(ss.G, (-2, -1), (0, 1)), np.moveaxis(ss.C, (-2, -1), (0, 1))
    tail = (slice(None), slice(None), ...) + (None,) * extra
    G, C = G[tail], C[tail]
    shape = np.broadcast_shapes(G.shape[2:], s.shape)
    Y = np.empty((n, n, *shape), dtype=complex)
    parts = Y.view(float).reshape(*Y.shape, 2)  # real and imaginary parts, in place
    np.multiply(C, s.imag, out=parts[..., 1])
    parts[..., 0] = G
    if np.any(s.real):
        parts[..., 0] += C * s.real
    u = ss.u.astype(complex).reshape((n,) + (1,) * len(shape))
    lu = BatchLU(Y, overwrite=True)
    x = lu.solve(u)
    Cx = matvec(C, x)
    residual = matvec(G, x) + s * Cx - u
    size = np.abs(G).max(axis=(0, 1)) + np.abs(s) * np.abs(C).max(axis=(0, 1))
    bad = unreliable(residual, size, x, u)
    dx = -lu.solve(Cx) if slope else None
    if bad.any():
        full = (n, n, *shape)
        Gb, Cb = np.broadcast_to(G, full)[..., bad], np.broadcast_to(C, full)[..., bad]
        Yb = Gb + np.broadcast_to(s, shape)[bad] * Cb
        x[:, bad] = pivoted(Yb, np.broadcast_to(u, x.shape)[:, bad])
        if dx is not None:
            dx[:, bad] = -pivoted(Yb, matvec(Cb, x[:, bad]))
    return np.moveaxis(x, 0, -1), None if dx is None else np.moveaxis(dx, 0, -1)


def _gm(ss: SmallSignal, s: np.ndarray) -> np.ndarray:
    """g_m broadcast over the trailing frequency axes of ``s``."""
    gm = np.asarray(ss.gm)
    return gm.reshape(gm.shape + (1,) * (np.ndim(s) - gm.ndim))


def return_ratio(ss: SmallSignal, s: np.ndarray | complex) -> np.ndarray:
    """T(s) for complex frequencies ``s`` (rad/s).

    ``s`` broadcasts against the batch shape of ``ss``: for an unbatched
    circuit and ``s`` of shape (K,), the result has shape (K,).
    """
    x, _dx = loop_solve(ss, s)
    return -_gm(ss, np.asarray(s)) * dot_last(x, ss.w)


def return_ratio_slope(ss: SmallSignal, s: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """T, dT/ds and x for one s per batch member (``s`` has the batch shape)."""
    x, dx = loop_solve(ss, s, slope=True)
    assert dx is not None
    gm = ss.gm
    return -gm * dot_last(x, ss.w), -gm * dot_last(dx, ss.w), x


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
    """Newton on Im 1/T(j2πf) = 0 for every batch member, kept inside [f_lo, f_hi].

    The zero-phase crossing of T is that of 1/T, and near a resonance 1/T is
    nearly linear in f (T ≈ K/(1 + j2Qδ)), so Newton on Im 1/T takes about
    one step per digit pair where Newton on Im T, which turns over half a
    bandwidth from the crossing, takes several and fails beyond it.
    Members whose iteration leaves the interval, meets a rising phase or a
    negative real part are returned with NaN figures.  A member stops as soon
    as its Newton step falls below ``ACCEPT_RTOL``·f: its crossing is then the
    stepped frequency and T there the first-order extrapolation
    T + T′·j2π·Δf (the neglected term is of order (Q·ACCEPT_RTOL)², far
    below the tolerance of any figure).  The iteration is compiled, member
    by member (:func:`ringwise.analysis.crossing.newton_crossings`).
    """
    shape = np.shape(f0)
    f = np.array(f0, dtype=float).reshape(-1)
    B, n = f.size, ss.u.size
    f_lo = np.ascontiguousarray(_of_shape(f_lo, shape).reshape(B))
    f_hi = np.ascontiguousarray(_of_shape(f_hi, shape).reshape(B))
    G = np.ascontiguousarray(_of_shape(ss.G, (B, n, n)))
    C = np.ascontiguousarray(_of_shape(ss.C, (B, n, n)))
    gm = np.ascontiguousarray(_of_shape(ss.gm, (B,)))
    f_out, T, dT_ds, x = _unsettled(B, n)
    newton_crossings(
        G, C, ss.u.astype(complex), ss.w.astype(complex), gm, f, f_lo, f_hi,
        NEWTON_STEPS, ACCEPT_RTOL, f_out, T, dT_ds, x,
    )  # fmt: skip
    with np.errstate(divide="ignore", invalid="ignore"):
        figs = _figures_from(ss, f_out, T, dT_ds, x)
    if len(shape) == 1:
        return figs
    return LoopFigures(*(a.reshape(shape) for a in _astuple(figs)))


def _unsettled(B: int, n: int) -> tuple[np.ndarray, ...]:
    """f, T, dT/ds and x of ``B`` members without a crossing (yet): NaN."""
    return (np.full(B, np.nan), np.full(B, np.nan + 0j), np.full(B, np.nan + 0j),
            np.full((B, n), np.nan + 0j))  # fmt: skip


def _of_shape(value, shape: tuple[int, ...]) -> np.ndarray:
    """``value`` (a float or an array that broadcasts to ``shape``) as floats of ``shape``."""
    a = np.asarray(value, dtype=float)
    return a if a.shape == shape else np.broadcast_to(a, shape)


def _members(ss: SmallSignal, keep: np.ndarray) -> SmallSignal:
    """The batch members ``keep`` (a boolean mask over the batch axis) of ``ss``."""
    gm = np.asarray(ss.gm)[keep]
    return dataclasses.replace(ss, G=ss.G[keep], C=ss.C[keep], gm=gm)


def _figures(ss: SmallSignal, f_osc: np.ndarray) -> LoopFigures:
    w = TWO_PI * np.nan_to_num(f_osc, nan=1.0)
    T, dT_ds, x = return_ratio_slope(ss, 1j * w)
    return _figures_from(ss, f_osc, T, dT_ds, x)


def _figures_from(
    ss: SmallSignal, f_osc: np.ndarray, T: np.ndarray, dT_ds: np.ndarray, x: np.ndarray
) -> LoopFigures:
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (dT_ds / T).real  # dφ/dω = Im((dT/dω)/T), dT/dω = j dT/ds
    gain = np.abs(T)
    Z_out = np.abs(dot_last(x, ss.u))
    # NaN where there is no crossing (f_osc or the slope not finite, or T = 0)
    nan = ~np.isfinite(f_osc + slope) | (gain == 0)
    if nan.any():
        slope, gain, Z_out = (np.where(nan, np.nan, a) for a in (slope, gain, Z_out))
        T, dT_ds = (np.where(nan, np.nan + 0j, a) for a in (T, dT_ds))
    return LoopFigures(
        f_osc=f_osc,
        T=T,
        gain=gain,
        phase_slope=slope,
        Q_loaded=(0.5 * TWO_PI) * f_osc * np.abs(slope),  # (ω/2)·|dφ/dω|
        Z_out=Z_out,
        dT_ds=dT_ds,
    )


def find_oscillation(
    ss: SmallSignal, f_ref: float | np.ndarray, f_guess: float | np.ndarray | None = None
) -> LoopFigures:
    """The falling zero-phase crossing of T nearest ``f_ref`` (NaN where there is none).

    Newton starts from ``f_guess`` (default ``f_ref``); members for which it
    fails get a grid search over f_ref/SPAN … f_ref·SPAN and a bracketed
    Newton refinement.
    """
    if np.ndim(ss.gm) == 0:
        # One circuit: a batch of one, the figures returned as 0-d arrays.
        one = dataclasses.replace(ss, G=ss.G[None], C=ss.C[None], gm=np.asarray([ss.gm]))
        figs = find_oscillation(
            one, np.reshape(f_ref, 1), None if f_guess is None else np.reshape(f_guess, 1)
        )
        return LoopFigures(*(a[0] for a in _astuple(figs)))
    batch = np.shape(ss.gm)
    if np.size(ss.gm) >= CONDENSE_BATCH:
        ss = without_pinned(ss)
    f_ref_a = _of_shape(f_ref, batch)
    start = f_ref_a if f_guess is None else _of_shape(f_guess, batch)
    first = refine_crossing(ss, start, start / SEARCH_SPAN, start * SEARCH_SPAN)
    if first.found.all():
        return first
    # Search the grid only for the members Newton could not settle.
    todo = ~first.found
    second = _grid_search(_members(ss, todo), f_ref_a[todo])
    merged = [a.copy() for a in _astuple(first)]
    for out, part in zip(merged, _astuple(second), strict=True):
        out[todo] = part
    return LoopFigures(*merged)


def without_pinned(ss: SmallSignal) -> SmallSignal:
    """``ss`` without the unknowns an ideal supply pins, for every member at once.

    A supply's row reads v_p = 0 (it is an AC ground) and its branch current
    appears only in node p's current law, so dropping that row and column
    pair and node p's leaves the other unknowns, T(s), dT/ds and the load the
    controlled source drives (u·x, x_p = 0) exactly as they were, with
    smaller matrices to factorise.  The result's layout is that of ``ss``
    (its indices no longer address the matrices: loop figures only).
    """
    G, C = ss.G, ss.C
    n = G.shape[-1]
    G0, C0 = G.reshape(-1, n, n)[0], C.reshape(-1, n, n)[0]
    drop: list[int] = []
    for k in range(n):
        # the pattern of member 0 names the candidates; every member must share it
        hits = np.flatnonzero(G0[k])
        if hits.size != 1 or hits[0] == k or C0[k].any() or C0[:, k].any():
            continue
        p = int(hits[0])
        if np.flatnonzero(G0[:, k]).tolist() != [p] or p in drop or k in drop:
            continue
        row, col = G[..., k, :], G[..., :, k]
        if (
            np.count_nonzero(row) == row[..., p].size
            and np.count_nonzero(col) == col[..., p].size
            and np.all(np.abs(row[..., p]) == 1.0)
            and not np.any(C[..., k, :])
            and not np.any(C[..., :, k])
        ):
            drop += [k, p]
    keep = np.setdiff1d(np.arange(n), drop)
    if not drop:
        return ss
    return dataclasses.replace(
        ss,
        G=G[..., keep[:, None], keep],
        C=C[..., keep[:, None], keep],
        u=ss.u[keep],
        w=ss.w[keep],
    )


def _grid_search(ss: SmallSignal, f_ref: np.ndarray) -> LoopFigures:
    """Grid over f_ref/SPAN … f_ref·SPAN, then bracketed Newton (and bisection if needed)."""
    grid = _GRID
    f_grid = f_ref[..., None] * grid
    T = return_ratio(ss, TWO_PI * 1j * f_grid)
    im, re = T.imag, T.real
    falling = (im[..., :-1] > 0) & (im[..., 1:] <= 0) & (re[..., :-1] + re[..., 1:] > 0)
    distance = np.where(falling, np.abs(np.log(grid[:-1] * grid[1:]) / 2), np.inf)
    k = np.argmin(distance, axis=-1)
    has = np.take_along_axis(falling, k[..., None], -1)[..., 0]
    lo = np.take_along_axis(f_grid, k[..., None], -1)[..., 0]
    hi = np.take_along_axis(f_grid, k[..., None] + 1, -1)[..., 0]
    out = _no_crossing(has.shape)
    if not np.any(has):
        return out
    # Newton starts where Im 1/T, nearly linear in f near a resonance, is zero
    # on the chord between the interval's ends (their midpoint where that fails).
    with np.errstate(divide="ignore", invalid="ignore"):
        y = (1.0 / T).imag
    y_lo = np.take_along_axis(y, k[..., None], -1)[..., 0]
    y_hi = np.take_along_axis(y, k[..., None] + 1, -1)[..., 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        chord = lo + (hi - lo) * y_lo / (y_lo - y_hi)
    start = np.where((chord > lo) & (chord < hi), chord, np.sqrt(lo * hi))
    # Only the members whose grid holds a falling crossing are refined (each
    # member's refinement is its own: the others' figures would be NaN anyway).
    sub = ss if np.all(has) else _members(ss, has)
    lo, hi, start = lo[has], hi[has], start[has]
    second = refine_crossing(sub, start, lo, hi)
    second = _bisect_leftovers(sub, second, lo, hi, np.ones(lo.shape, dtype=bool))
    for full, part in zip(_astuple(out), _astuple(second), strict=True):
        full[has] = part
    return out


#: The grid of :func:`_grid_search`, relative to f_ref.
_GRID: Final = np.geomspace(1.0 / SEARCH_SPAN, SEARCH_SPAN, SEARCH_POINTS)


def _no_crossing(shape: tuple[int, ...]) -> LoopFigures:
    """Figures of members without a zero-phase crossing: NaN throughout."""
    f_osc, gain, slope, Q, Z = (np.full(shape, np.nan) for _ in range(5))
    T, dT = np.full(shape, np.nan + 0j), np.full(shape, np.nan + 0j)
    return LoopFigures(f_osc, T, gain, slope, Q, Z, dT)


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
