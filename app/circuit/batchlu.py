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

from typing import Final

import numpy as np

#: Largest normwise backward error (relative residual) accepted from the
#: unpivoted elimination; above it the member is solved again with partial
#: pivoting.  Some 10⁴ unit round-offs: a stable elimination of order ≤ 20
#: stays far below it.
BACKWARD_LIMIT: Final = 1e-12


class BatchLU:
    """The LU factors (unit lower L, upper U, unpivoted) of matrices ``A`` (n, n, …).

    ``A`` is copied; the trailing axes are the batch.  :meth:`solve` solves for
    right-hand sides of shape (n, …) (or (n,), shared by every member).
    """

    def __init__(self, A: np.ndarray) -> None:
        self.A = A
        LU = np.array(A, dtype=np.result_type(A, float), order="C")
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
        x[...] = b.reshape(b.shape + (1,) * (x.ndim - b.ndim))
        with np.errstate(divide="ignore", invalid="ignore"):
            for i in range(1, n):
                x[i] -= (LU[i, :i] * x[:i]).sum(axis=0)
            x[n - 1] /= LU[n - 1, n - 1]
            for i in range(n - 2, -1, -1):
                x[i] -= (LU[i, i + 1 :] * x[i + 1 :]).sum(axis=0)
                x[i] /= LU[i, i]
        return x

    def unreliable(self, x: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Members (a mask of the batch shape) whose solution ``x`` of A x = b has a
        backward error above :data:`BACKWARD_LIMIT` (or is not finite)."""
        A = self.A
        b = b.reshape(b.shape + (1,) * (x.ndim - b.ndim))
        r = np.einsum("ij...,j...->i...", A, x) - b
        size_A = np.abs(A).max(axis=(0, 1))
        err = np.abs(r).max(axis=0)
        scale = size_A * np.abs(x).max(axis=0) + np.abs(b).max(axis=0)
        with np.errstate(invalid="ignore"):
            return ~(err <= BACKWARD_LIMIT * scale)


def solve_batch(A: np.ndarray, b: np.ndarray, more=None) -> tuple[np.ndarray, np.ndarray | None]:
    """x = A⁻¹b for matrices ``A`` (n, n, …), ``b`` (n,) or (n, …); and, if given,
    ``more(x)`` → c (n, …), also y = A⁻¹c with the same factors.

    Members the unpivoted elimination cannot solve to :data:`BACKWARD_LIMIT`
    are solved by ``numpy.linalg.solve`` (LAPACK, partial pivoting) instead.
    """
    lu = BatchLU(A)
    x = lu.solve(b)
    bad = lu.unreliable(x, b)
    if bad.any():
        Ab = np.moveaxis(A[..., bad], -1, 0)  # (m, n, n)
        bb = np.broadcast_to(b.reshape(b.shape + (1,) * (x.ndim - b.ndim)), x.shape)
        x[:, bad] = np.linalg.solve(Ab, bb[:, bad].T[..., None])[..., 0].T
    if more is None:
        return x, None
    c = more(x)
    y = lu.solve(c)
    if bad.any():
        y[:, bad] = np.linalg.solve(Ab, c[:, bad].T[..., None])[..., 0].T
    return x, y
