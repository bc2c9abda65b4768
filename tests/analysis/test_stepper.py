"""The shared stepper's contract on its own (no external values: common practice, no source)."""

from __future__ import annotations

import math

import numpy as np

from ringwise.analysis.stepper import Dynamics, _Stepper


def _tank_with_breakdown(limit: float) -> Dynamics:
    """van der Pol's tank (1 F, 1 H, i = 0.2(v³/3 − v)) whose law ends at |v| = limit:
    beyond it φ is NaN, so no Newton iteration converges there."""

    def phi(v0: float, _v1: float) -> tuple:
        if abs(v0) > limit:
            return (math.nan,) * 8
        return (0.2 * (v0**3 / 3.0 - v0), 0.0, 0.0, 0.0, 0.2 * (v0 * v0 - 1.0), 0.0, 0.0, 0.0)

    C = np.array([[1.0, 0.0], [0.0, -1.0]])
    G = np.array([[0.0, 1.0], [1.0, 0.0]])
    P = W = np.array([[1.0, 0.0], [0.0, 0.0]])
    return Dynamics(C, G, np.zeros(2), P, W, phi)


def test_a_partial_run_stops_before_the_first_failing_step() -> None:
    stepper = _Stepper(_tank_with_breakdown(1.7))
    x0, h = np.array([0.0, 1.6]), 2 * math.pi / 128
    assert stepper.run(x0, h, 256) is None
    X, flat = stepper.run(x0, h, 256, partial=True)
    done = len(X) - 1
    assert 0 < done < 256 and len(flat) == 8 * len(X)
    assert np.abs(X[:, 0]).max() <= 1.7
    # the steps before the failure are those of a run that ends there, and of
    # the one-step-at-a-time path
    whole, _ = stepper.run(x0, h, done)
    one_by_one, _ = stepper.run_steps(x0, [h] * 256, partial=True)
    assert np.allclose(X, whole, rtol=0, atol=1e-9)
    assert np.allclose(X, one_by_one, rtol=0, atol=1e-9)
