r"""Many small linear systems at once: Gaussian elimination across the batch.

For thousands of systems of order n ≲ 12 — the broken loop's
:math:`(G + sC)\,x = u` of every member of a Monte Carlo batch — LAPACK called
once per matrix spends most of its time in per-call overhead.  Eliminating
row by row over the whole batch does the same arithmetic in about n²
array operations, each over every member, with no threads woken: matrices
are held with the batch on the *last* axes, shape (n, n, …), so every step is
a contiguous array operation.

No pivoting: the small-signal matrices solved here (a passive network and the
hybrid-π without its controlled source, node rows first, branch rows after,
the rows a supply pins dropped) have, on the jω axis and with each branch row
negated, a Hermitian part that is positive definite (the conductances, G_MIN
at every node and the branches' series resistances) — so no leading minor
vanishes and the elimination never breaks down (Golub & Van Loan, *Matrix
Computations*, §4.4, from memory).  Every member is checked anyway: a solution
whose relative residual ‖Ax − b‖/(‖A‖‖x‖ + ‖b‖) (the normwise backward error of
Rigal & Gaches, 1967, from memory) exceeds :data:`BACKWARD_LIMIT` is solved
again by LAPACK with partial pivoting.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Final

import numpy as np

#: Largest normwise backward error (relative residual) accepted from the
#: unpivoted elimination; above it the member is solved again with partial
#: pivoting.  Some 10⁴ unit round-offs: a stable elimination of order ≤ 20
#: stays far below it.
BACKWARD_LIMIT: Final = 1e-12


class BatchLU:
    """The LU factors (unit lower L, upper U, unpivoted) of matrices ``A`` (n, n, …).

    The trailing axes are the batch; ``A`` is copied unless ``overwrite``.
    :meth:`solve` solves for right-hand sides of shape (n, …) (or (n,), shared
    by every member).
    """

    def __init__(self, A: np.ndarray, overwrite: bool = False) -> None:
        LU = A if overwrite else np.array(A, dtype=np.result_type(A, float), order="C")
        n = LU.shape[0]
        with np.errstate(divide="ignore", invalid="ignore"):
            for k in range(n - 1):
                mult = LU[k + 1 :, k] / LU[k, k]
                LU[k + 1 :, k] = mult
                LU[k + 1 :, k + 1 :] -= mult[:, None] * LU[k, None, k + 1 :]
        self.LU = LU

    def solve(self, b: np.ndarray) -> np.ndarray:
        """x with A x = b for every member, shape (n, …)."""
        LU = self.LU
        n = LU.shape[0]
        x = np.empty(LU.shape[:1] + LU.shape[2:], dtype=np.result_type(LU, b))
        x[...] = _trailing(b, x.ndim)
        with np.errstate(divide="ignore", invalid="ignore"):
            for i in range(1, n):
                x[i] -= (LU[i, :i] * x[:i]).sum(axis=0)
            x[n - 1] /= LU[n - 1, n - 1]
            for i in range(n - 2, -1, -1):
                x[i] -= (LU[i, i + 1 :] * x[i + 1 :]).sum(axis=0)
                x[i] /= LU[i, i]
        return x


def _trailing(b: np.ndarray, ndim: int) -> np.ndarray:
    """``b`` (n,) or (n, …) with unit batch axes appended up to ``ndim`` axes."""
    return b.reshape(b.shape + (1,) * (ndim - b.ndim))


def matvec(A: np.ndarray, x: np.ndarray) -> np.ndarray:
    """A·x for every member: ``A`` (n, n, …), ``x`` (n, …)."""
    return np.einsum("ij...,j...->i...", A, x)


def unreliable(r: np.ndarray, size_A: np.ndarray, x: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Members (a mask of the batch shape) whose residual ``r`` = A x − b (n, …) is a
    backward error above :data:`BACKWARD_LIMIT`, or not finite; ``size_A`` is
    max |A_ij| of every member (or a bound of it)."""
    b = _trailing(b, x.ndim)
    scale = size_A * np.abs(x).max(axis=0) + np.abs(b).max(axis=0)
    with np.errstate(invalid="ignore"):
        return ~(np.abs(r).max(axis=0) <= BACKWARD_LIMIT * scale)


def pivoted(A: np.ndarray, b: np.ndarray) -> np.ndarray:
    """x = A⁻¹b by LAPACK with partial pivoting: ``A`` (n, n, m), ``b`` (n, m)."""
    return np.linalg.solve(np.moveaxis(A, -1, 0), b.T[..., None])[..., 0].T


def solve_batch(
    A: np.ndarray, b: np.ndarray, more: Callable[[np.ndarray], np.ndarray] | None = None
) -> tuple[np.ndarray, np.ndarray | None]:
    """x = A⁻¹b for matrices ``A`` (n, n, …), ``b`` (n,) or (n, …); and, if given,
    ``more(x)`` → c (n, …), also y = A⁻¹c with the same factors.

    Members the unpivoted elimination cannot solve to :data:`BACKWARD_LIMIT`
    are solved by LAPACK with partial pivoting instead (:func:`pivoted`).
    """
    lu = BatchLU(A)
    x = lu.solve(b)
    bad = unreliable(matvec(A, x) - _trailing(b, x.ndim), np.abs(A).max(axis=(0, 1)), x, b)
    if bad.any():
        x[:, bad] = pivoted(A[..., bad], np.broadcast_to(_trailing(b, x.ndim), x.shape)[:, bad])
    if more is None:
        return x, None
    c = more(x)
    y = lu.solve(c)
    if bad.any():
        y[:, bad] = pivoted(A[..., bad], c[:, bad])
    return x, y
