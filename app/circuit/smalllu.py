"""Many small dense linear systems, one after another, compiled.

LU with partial pivoting (the pivot the largest |Re| + |Im| in its column,
as LAPACK's getrf picks it) of matrices of order ≲ 20, real or complex, in
Numba-compiled loops: for the batches this project solves (a few to some
tens of thousands of circuits of order ≲ 12), LAPACK called once per matrix
spends most of its time in per-call overhead.  Used by the loop search
(:mod:`ringwise.analysis.crossing`) and the DC reduction
(:func:`ringwise.circuit.mna.reduce_to_controls`).  Cached on disk beside
this file.

References
----------
Golub & Van Loan, *Matrix Computations*, §3.4 (Gaussian elimination with
partial pivoting), from memory.
"""

from __future__ import annotations

import math

import numba
import numpy as np


@numba.njit(cache=True, nogil=True)
def _lu(A: np.ndarray, perm: np.ndarray) -> bool:
    """A (n, n), real or complex, in place, into its LU factors with row
    pivoting (the pivots' rows in ``perm``); False if singular."""
    n = A.shape[0]
    for k in range(n):
        p = k
        best = abs(A[k, k].real) + abs(A[k, k].imag)
        for i in range(k + 1, n):
            size = abs(A[i, k].real) + abs(A[i, k].imag)
            if size > best:
                best, p = size, i
        perm[k] = p
        if best == 0.0 or not math.isfinite(best):
            return False
        if p != k:
            for j in range(n):
                A[k, j], A[p, j] = A[p, j], A[k, j]
        pivot = A[k, k]
        for i in range(k + 1, n):
            m = A[i, k] / pivot
            A[i, k] = m
            if m != 0:
                for j in range(k + 1, n):
                    A[i, j] -= m * A[k, j]
    return True


@numba.njit(cache=True, nogil=True)
def _solve(LU: np.ndarray, perm: np.ndarray, b: np.ndarray) -> None:
    """b (n,), in place, into the solution of A x = b from :func:`_lu`."""
    n = LU.shape[0]
    for k in range(n):
        p = perm[k]
        if p != k:
            b[k], b[p] = b[p], b[k]
    for i in range(1, n):
        acc = b[i]
        for j in range(i):
            acc -= LU[i, j] * b[j]
        b[i] = acc
    for i in range(n - 1, -1, -1):
        acc = b[i]
        for j in range(i + 1, n):
            acc -= LU[i, j] * b[j]
        b[i] = acc / LU[i, i]


@numba.njit(cache=True, nogil=True)
def solve_many(A: np.ndarray, R: np.ndarray) -> np.ndarray:
    """X with A[b] X[b] = R[b] for every member b: ``A`` (B, n, n), ``R`` (B, n, k),
    real.  A member whose matrix is singular gets NaN."""
    B, n, k = R.shape
    X = np.empty((B, n, k))
    LU = np.empty((n, n))
    col = np.empty(n)
    perm = np.empty(n, dtype=np.int64)
    for b in range(B):
        for i in range(n):
            for j in range(n):
                LU[i, j] = A[b, i, j]
        if not _lu(LU, perm):
            X[b] = np.nan
            continue
        for c in range(k):
            for i in range(n):
                col[i] = R[b, i, c]
            _solve(LU, perm, col)
            for i in range(n):
                X[b, i, c] = col[i]
    return X
