"""Elimination across the batch against LAPACK (``numpy.linalg.solve``, the reference
library), the backward-error check and its fallback."""

from __future__ import annotations

import numpy as np
import pytest

from ringwise.circuit.batchlu import BACKWARD_LIMIT, BatchLU, matvec, solve_batch, unreliable


def _accretive(rng, n: int, batch: tuple[int, ...]) -> np.ndarray:
    """Matrices (n, n, *batch) with a positive definite Hermitian part and a large
    skew part, like G + jωC near a resonance (no pivot vanishes)."""
    H = rng.normal(size=(*batch, n, n))
    H = H @ np.swapaxes(H, -1, -2) * 1e-3 + np.eye(n) * 1e-9
    S = rng.normal(size=(*batch, n, n))
    return np.moveaxis(H + 1j * (S + np.swapaxes(S, -1, -2)), (-2, -1), (0, 1))


@pytest.mark.parametrize("batch", [(300,), (40, 7)])
def test_solutions_equal_lapack(batch) -> None:
    rng = np.random.default_rng(3)
    A = _accretive(rng, 7, batch)
    b = rng.normal(size=7)
    x, y = solve_batch(A, b, lambda x: 2.0 * x)
    As = np.moveaxis(A, (0, 1), (-2, -1))
    for got, rhs in ((x, np.broadcast_to(b, (*batch, 7))), (y, 2.0 * np.moveaxis(x, 0, -1))):
        ref = np.linalg.solve(As, rhs[..., None])[..., 0]
        scale = np.abs(ref).max(axis=-1, keepdims=True)
        np.testing.assert_allclose(np.moveaxis(got, 0, -1) / scale, ref / scale, atol=1e-11)


def test_a_member_needing_pivots_is_solved_by_lapack() -> None:
    # Member 1 has a zero leading pivot: the unpivoted elimination breaks down
    # there, its residual says so, and partial pivoting solves it.
    rng = np.random.default_rng(5)
    A = _accretive(rng, 4, (3,))
    A[:, :, 1] = np.array([[0, 1, 0, 0], [1, 0, 0, 0], [0, 0, 2, 1], [0, 0, 1, 3]], dtype=complex)
    b = np.array([1.0, 2.0, 3.0, 4.0])
    x = BatchLU(A).solve(b)
    size = np.abs(A).max(axis=(0, 1))
    assert unreliable(matvec(A, x) - b[:, None], size, x, b).tolist() == [False, True, False]
    x, _ = solve_batch(A, b)
    for i in range(3):
        np.testing.assert_allclose(A[:, :, i] @ x[:, i], b, atol=1e-12)


def test_the_check_sees_a_wrong_solution() -> None:
    rng = np.random.default_rng(7)
    A = _accretive(rng, 5, (4,))
    b = rng.normal(size=5)
    x = BatchLU(A).solve(b)
    size = np.abs(A).max(axis=(0, 1))
    assert not unreliable(matvec(A, x) - b[:, None], size, x, b).any()
    x[2, 3] *= 1.0 + 1e3 * BACKWARD_LIMIT
    got = unreliable(matvec(A, x) - b[:, None], size, x, b)
    assert got.tolist() == [False, False, False, True]
