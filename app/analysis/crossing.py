r"""The zero-phase crossing of the return ratio, member by member, compiled.

:func:`ringwise.analysis.loop.refine_crossing` runs its Newton iteration on
Im 1/T(j2πf) = 0 here: for each member of a batch, Y = G + j2πf·C is
factorised (:mod:`ringwise.circuit.smalllu`: LU with partial pivoting), and

.. math:: x = Y^{-1} u,\qquad y = Y^{-1} C x = -\,dx/ds,\qquad
          T = -g_m\,w\cdot x,\qquad dT/ds = g_m\,w\cdot y .

The Newton step on Im 1/T is that of ``refine_crossing``'s docstring.  A
member's iteration is its own: a batch of N gives the N answers of N single
calls, bit for bit.  Compiled with Numba (cached on disk beside this file):
the batches of a single analysis are a few to a few dozen circuits of order
≲ 12, where array operations over the batch spend their time in call
overhead, not arithmetic.

References
----------
Golub & Van Loan, *Matrix Computations*, §3.4 (Gaussian elimination with
partial pivoting), from memory; the LU itself is :mod:`ringwise.circuit.smalllu`.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from ringwise.circuit.smalllu import _lu, _solve

TWO_PI = 2.0 * math.pi


@numba.njit(cache=True, nogil=True)
def _loop_at(
    G: np.ndarray,
    C: np.ndarray,
    u: np.ndarray,
    w: np.ndarray,
    gm: float,
    s: complex,
    Y: np.ndarray,
    perm: np.ndarray,
    x: np.ndarray,
    y: np.ndarray,
) -> tuple[bool, complex, complex]:
    """T and dT/ds of one circuit (G, C (n, n)) at s, x = Y⁻¹u left in ``x``
    (``Y``, ``perm``, ``y`` work space); False where Y is singular."""
    n = G.shape[0]
    for i in range(n):
        for j in range(n):
            Y[i, j] = G[i, j] + s * C[i, j]
    if not _lu(Y, perm):
        return False, 0j, 0j
    for i in range(n):
        x[i] = u[i]
    _solve(Y, perm, x)
    for i in range(n):
        acc = 0j
        for j in range(n):
            acc += C[i, j] * x[j]
        y[i] = acc
    _solve(Y, perm, y)
    wx = 0j
    wy = 0j
    for i in range(n):
        wx += w[i] * x[i]
        wy += w[i] * y[i]
    return True, -gm * wx, gm * wy


@numba.njit(cache=True, nogil=True)
def loop_at(
    G: np.ndarray, C: np.ndarray, u: np.ndarray, w: np.ndarray, gm: float, s: complex
) -> tuple[complex, complex]:
    """T and dT/ds of one circuit at the complex frequency s (rad/s): NaN where
    G + sC is singular."""
    n = G.shape[0]
    Y = np.empty((n, n), dtype=np.complex128)
    x = np.empty(n, dtype=np.complex128)
    y = np.empty(n, dtype=np.complex128)
    perm = np.empty(n, dtype=np.int64)
    ok, T, dT = _loop_at(G, C, u, w, gm, s, Y, perm, x, y)
    if not ok:
        nan = complex(np.nan, np.nan)
        return nan, nan
    return T, dT


@numba.njit(cache=True, nogil=True)
def newton_crossings(
    G: np.ndarray,
    C: np.ndarray,
    u: np.ndarray,
    w: np.ndarray,
    gm: np.ndarray,
    f0: np.ndarray,
    f_lo: np.ndarray,
    f_hi: np.ndarray,
    steps: int,
    accept_rtol: float,
    f_out: np.ndarray,
    T_out: np.ndarray,
    dT_out: np.ndarray,
    x_out: np.ndarray,
) -> None:
    """Newton on Im 1/T(j2πf) = 0 for every member b of G, C (B, n, n), from
    f0[b], kept inside [f_lo[b], f_hi[b]]; ``u``, ``w`` (n,) shared, ``gm`` (B,).

    A member stops when its step falls below ``accept_rtol``·f: ``f_out`` is
    then the stepped frequency, ``T_out`` T extrapolated to it to first order,
    ``dT_out`` dT/ds and ``x_out`` x at the last iterate.  A member whose
    iterate leaves the interval, meets a rising phase (Re T′/T ≥ 0), a
    negative Re T, a singular Y or runs out of ``steps`` keeps the NaN the
    outputs must hold on entry.
    """
    B, n = G.shape[0], G.shape[1]
    Y = np.empty((n, n), dtype=np.complex128)
    x = np.empty(n, dtype=np.complex128)
    y = np.empty(n, dtype=np.complex128)
    perm = np.empty(n, dtype=np.int64)
    for b in range(B):
        f = f0[b]
        for _ in range(steps):
            ok, T, dT = _loop_at(G[b], C[b], u, w, gm[b], complex(0.0, TWO_PI * f), Y, perm, x, y)
            if not ok:
                break
            ratio = dT / T
            inv_T = 1.0 / T
            # dφ/dω = Re(T′/T); d(Im 1/T)/dω = −Re(T′/T²)
            step = inv_T.imag / (ratio * inv_T).real / TWO_PI
            f_new = f + step
            if not (ratio.real < 0.0 and T.real > 0.0 and f_lo[b] <= f_new <= f_hi[b]):
                break
            if abs(step) <= accept_rtol * f:
                f_out[b] = f_new
                T_out[b] = T + dT * complex(0.0, TWO_PI * step)
                dT_out[b] = dT
                for i in range(n):
                    x_out[b, i] = x[i]
                break
            f = f_new
