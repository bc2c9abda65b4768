"""Many small systems by the compiled LU (ringwise.circuit.smalllu).

External check: numpy.linalg.solve (LAPACK, the reference library) on the
same systems.
"""

from __future__ import annotations

import numpy as np

from ringwise.circuit.smalllu import solve_many


def test_solve_many_equals_lapack_and_pivots() -> None:
    rng = np.random.default_rng(7)
    A = rng.normal(size=(50, 9, 9))
    A[:, 0, 0] = 0.0  # a zero leading entry: only row pivoting gets past it
    R = rng.normal(size=(50, 9, 3))
    np.testing.assert_allclose(solve_many(A, R), np.linalg.solve(A, R), rtol=1e-9, atol=1e-12)


def test_a_singular_member_is_nan_and_the_others_are_solved() -> None:
    A = np.stack([np.eye(4), np.ones((4, 4)), 2.0 * np.eye(4)])
    R = np.ones((3, 4, 2))
    X = solve_many(A, R)
    assert np.all(np.isnan(X[1]))
    np.testing.assert_allclose(X[0], R[0])
    np.testing.assert_allclose(X[2], 0.5 * R[2])
