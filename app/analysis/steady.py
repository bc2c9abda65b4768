r"""Periodic steady state by shooting-Newton on the transient's own stepper.

The orbit is the fixed point of the period map of the trapezoidal stepper of
:mod:`ringwise.analysis.transient` (the same matrices, the same device
function, the same step): N equal steps of h = T/N carry the state
:math:`x_0` to :math:`x_N(x_0, T)`, and the orbit satisfies

.. math:: x_N(x_0, T) - x_0 = 0, \qquad \dot x_0^T\,(x_0 - x_0^{prev}) = 0,

the second equation being the phase condition (each Newton step is taken
orthogonal to the flow, which removes the freedom of time shift).  The
unknowns are the *dynamic* part of the state (every unknown with a capacitor
or the coil on it) and T.

The Newton matrix is exact.  One trapezoidal step
:math:`A x_{k+1} = (2C/h - G)x_k + 2b - P(\varphi_k + \varphi_{k+1})`,
with :math:`\varphi_k = \varphi(W^T x_k)` and its 2×2 Jacobian :math:`J_k`,
linearises to

.. math:: \delta x_{k+1} = S_k\,\delta x_k + g_k\,\delta h, \quad
          S_k = (I + K J_{k+1} W^T)^{-1}(B - K J_k W^T), \quad
          g_k = (I + K J_{k+1} W^T)^{-1} A^{-1}\frac{2C}{h^2}(x_{k+1} - x_k)

with :math:`B = A^{-1}(2C/h - G)` and :math:`K = A^{-1}P`; the inverse is a
2×2 solve (Woodbury).  The monodromy matrix is the product
:math:`\Phi = S_{N-1}\cdots S_0` and :math:`\partial x_N/\partial T =
(1/N)\sum_k S_{N-1}\cdots S_{k+1} g_k`; both come from one batched product of
the augmented matrices :math:`\begin{pmatrix}S_k & g_k\\ 0 & 1\end{pmatrix}`
(pairwise, log₂N levels).  Its eigenvalues are the Floquet multipliers
(:mod:`ringwise.analysis.floquet`).

Slow bias time constants cost nothing here: a bias mode that needs thousands
of periods to settle in a transient is one more (nearly neutral) direction
of the Newton step.

References
----------
T. J. Aprille & T. N. Trick, "Steady-state analysis of nonlinear circuits
with periodic inputs", Proc. IEEE 60(1), 1972, and "A computer algorithm to
determine the steady-state response of nonlinear oscillators", IEEE Trans.
Circuit Theory CT-19(4), 1972 (shooting with the monodromy matrix, the
period as an unknown); Seydel, *Practical Bifurcation and Stability
Analysis*, ch. 7 (phase conditions), all from memory.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Final

import numpy as np
import scipy.linalg

from ringwise.analysis.stepper import Dynamics, _Stepper, dynamic_unknowns

#: Steps per period of the orbit, at first (the transient's nominal step).
STEPS_PER_PERIOD: Final = 128
#: The grid is doubled up to MAX_LEVEL times while the trapezoidal local
#: error of a waveform exceeds GRID_TOL of its range (see :func:`steps_needed`):
#: sharp current pulses of hard-driven designs need it, to put their
#: multipliers on the right side of the unit circle.
MAX_LEVEL: Final = 3
GRID_TOL: Final = 5e-3
#: Newton on (x0, T): iteration cap, and convergence when the period step
#: is below PERIOD_TOL relative and either the largest scaled mismatch
#: x_N − x_0 is below RESIDUAL_TOL times the state's scale or the Newton
#: step itself is below STEP_TOL volts (scaled) in every unknown; the step
#: computed there is still taken, along the step linearisations, which
#: leaves an error second order in it (see :func:`shoot`): ~1e-9 V for a
#: step of 30 µV on the samples, whose cold and warm figures then agree to
#: a few parts in 1e9.  (A residual test alone waits one more period map
#: where the mismatch is just above its bound but the step already tiny.)
NEWTON_MAX: Final = 40
RESIDUAL_TOL: Final = 1e-6
PERIOD_TOL: Final = 1e-6
STEP_TOL: Final = 3e-5
#: A mismatch the damped Newton cannot reduce further is accepted below this
#: fraction of the state's scale (round-off along DC-floating charges).
ACCEPT_TOL: Final = 1e-6
#: Step halvings tried when a full Newton step does not reduce the mismatch.
LINE_SEARCH_HALVINGS: Final = 6
#: Largest relative change of the period in one Newton step.
MAX_PERIOD_STEP: Final = 0.1


class ShootingError(ArithmeticError):
    """Shooting-Newton found no periodic orbit from the start it was given."""


@dataclass(frozen=True)
class Orbit:
    r"""One period of the periodic steady state and its linearisation.

    The states ``x[k]`` (k = 0 … N, ``x[N]`` = ``x[0]`` to the solver's
    tolerance) are the full unknown vectors of the circuit at the times
    ``t[k]`` (steps h_k = T·dtau_k); the device currents and their Jacobians
    along the orbit are ``phi[k]`` and ``J[k]``.  ``steps[k]`` is the
    one-step linearisation :math:`S_k` (δx_{k+1} = S_k δx_k on the full
    vector) and ``monodromy`` the product over one period restricted to the
    ``dynamic`` unknowns.  Its eigenvalues are the Floquet multipliers; its
    left eigenvector for the trivial multiplier, carried backward with
    :math:`S_k^T` (restricted to ``dynamic``), gives the perturbation
    projection vector along the orbit (phase-noise work).

    Attributes
    ----------
    T : period of the discrete orbit, N·h, s
    f : oscillation frequency with the trapezoidal rule's frequency warping
        undone (:func:`unwarped_frequency`), Hz
    dtau : (N,) the steps as fractions of the period (equal steps, their
        number from :func:`steps_needed`)
    x : (N+1, n) states, V and A
    phi : (N+1, 2) the two device currents (I_C, I_B for a transistor), A
    J : (N+1, 2, 2) their Jacobian with respect to the two controls, S
    steps : (N, n, n) one-step linearisations
    dynamic : indices of the unknowns that carry a state
    monodromy : (m, m) monodromy on the dynamic unknowns
    dxdT : (n,) ∂x_N/∂T at fixed x_0 (the flow at the end of the period)
    iterations : Newton iterations taken
    """

    T: float
    f: float
    dtau: np.ndarray
    x: np.ndarray
    phi: np.ndarray
    J: np.ndarray
    steps: np.ndarray
    dynamic: np.ndarray
    monodromy: np.ndarray
    dxdT: np.ndarray
    iterations: int

    @property
    def N(self) -> int:
        return len(self.steps)

    @property
    def h(self) -> np.ndarray:
        """The steps, s."""
        return self.T * self.dtau

    @property
    def t(self) -> np.ndarray:
        """Times of the states, s."""
        return np.concatenate(([0.0], np.cumsum(self.h)))

    @functools.cached_property
    def _mean_weights(self) -> np.ndarray:
        """The trapezoidal rule's weights of the N+1 samples (they sum to 1)."""
        w = np.zeros(len(self.dtau) + 1)
        w[:-1] += 0.5 * self.dtau
        w[1:] += 0.5 * self.dtau
        return w

    def mean(self, values: np.ndarray) -> np.ndarray:
        """Period average of samples on the orbit's grid (trapezoidal rule), along axis 0."""
        values = np.asarray(values)
        if values.ndim <= 2:
            return np.dot(self._mean_weights, values)
        return np.tensordot(self._mean_weights, values, axes=(0, 0))

    def fourier(self, values: np.ndarray, harmonics: int) -> np.ndarray:
        """Complex peak amplitudes c_0 … c_harmonics of samples on the grid.

        c_k = (2/T)∫v(t)e^{−jkωt}dt (c_0 the mean), by the trapezoidal rule
        on the grid: second-order accurate, like the orbit itself.  ``values``
        (N+1,) gives (harmonics+1,); (N+1, m), m signals at once, (harmonics+1, m).
        """
        tau = np.concatenate(([0.0], np.cumsum(self.dtau)))
        k = np.arange(harmonics + 1)
        kernel = np.exp(-2j * np.pi * np.outer(tau, k))  # (N+1, H+1)
        c = (self._mean_weights[:, None] * kernel).T @ values
        c[1:] *= 2.0
        return c

    @property
    def flow(self) -> np.ndarray:
        """ẋ at the start on the dynamic unknowns (central difference across the period's end)."""
        return (self.x[1] - self.x[-2])[self.dynamic] / (self.h[0] + self.h[-1])

    @property
    def multipliers(self) -> np.ndarray:
        """Eigenvalues of the monodromy matrix (complex)."""
        return np.linalg.eigvals(self.monodromy)


def uniform_grid(N: int = STEPS_PER_PERIOD) -> np.ndarray:
    """N equal steps, as fractions of the period."""
    return np.full(N, 1.0 / N)


def steps_needed(signals: np.ndarray, N: int) -> int:
    """Equal steps per period that follow ``signals`` (N+1 samples of one period, on N steps).

    The trapezoidal rule's local error is h³·s‴/12, read here as the third
    difference |Δ³s|/12 relative to each signal's range; it falls 8-fold
    per halving of the step, so the grid is doubled k = ⌈log₈(error/GRID_TOL)⌉
    times, up to N·2**MAX_LEVEL steps.  A uniform grid keeps the period map
    the time-h map of one autonomous (modified) flow, so the trivial
    multiplier stays 1 to round-off.
    """
    u = signals[:-1]
    span = u.max(axis=0) - u.min(axis=0)
    span[span == 0.0] = 1.0
    d3 = np.abs(
        np.roll(u, -2, axis=0) - 3.0 * np.roll(u, -1, axis=0) + 3.0 * u - np.roll(u, 1, axis=0)
    )
    worst = float(np.max(d3.max(axis=0) / 12.0 / span))
    if worst <= GRID_TOL:
        return N
    k = min(MAX_LEVEL, math.ceil(math.log(worst / GRID_TOL) / math.log(8.0)))
    return N * 2**k


def warped_period(f: float, N: int = STEPS_PER_PERIOD) -> float:
    """Period of the discrete orbit of N equal steps whose unwarped frequency is ``f``.

    With h = T/N the bilinear map puts a resonance f at f_d, tan(π f_d h) = π f h,
    so f_d = π f/(N tan(π/N)).
    """
    return N * math.tan(math.pi / N) / (math.pi * f)


#: Newton steps and tolerance for the unwarped frequency.
UNWARP_STEPS: Final = 20
UNWARP_TOL: Final = 1e-14


def unwarped_frequency(T: float, dtau: np.ndarray) -> float:
    r"""The frequency whose trapezoidal phase advance over the grid is one turn, Hz.

    The bilinear map advances a resonance ω by 2·atan(ωh/2) per step h
    (Oppenheim & Schafer, *Discrete-Time Signal Processing*, bilinear
    transformation, from memory), so the orbit's ω solves
    :math:`\sum_k 2\arctan(\omega h_k/2) = 2\pi`; on N equal steps this is
    tan(π/N)·N/(πT).
    """
    h = T * dtau
    w = 2.0 * math.pi / T
    for _ in range(UNWARP_STEPS):
        g = float(np.sum(2.0 * np.arctan(0.5 * w * h))) - 2.0 * math.pi
        dg = float(np.sum(h / (1.0 + (0.5 * w * h) ** 2)))
        step = g / dg
        w -= step
        if abs(step) < UNWARP_TOL * w:
            break
    return w / (2.0 * math.pi)


def _trajectory(stepper: _Stepper, x0: np.ndarray, hs, N: int | None = None, substeps: int = 0):
    """Steps ``hs`` (an array of step sizes, or one size taken N times) from x0.

    Returns (states, currents, Jacobians), or ``None`` if a step fails.
    With ``substeps`` > 0 a step whose Newton iteration fails is retried as
    2, 4, … 2**substeps shorter steps (the way in to an orbit, never the
    period map itself, which must be the same map at every evaluation).
    Equal steps (the orbit's grid) run through :meth:`_Stepper.run`.
    """
    if N is None:
        sizes = np.asarray(hs, dtype=float)
        if sizes.size and np.all(sizes == sizes[0]):
            hs, N = float(sizes[0]), len(sizes)
    if N is not None:
        ran = stepper.run(x0, hs, N, substeps)
    else:
        ran = stepper.run_steps(x0, sizes.tolist(), substeps)
    if ran is None:
        return None
    X, flat = ran
    return X, *stepper.unpack(np.array(flat).reshape(len(X), -1))


def _linearisation(stepper: _Stepper, hs: np.ndarray, X: np.ndarray, J: np.ndarray):
    """Per-step S_k (N, n, n), the monodromy (n, n) and Σ-products of g_k·h_k (n,).

    The last is ∂x_N/∂T·T when the steps are fixed fractions of T
    (∂h_k/∂T = h_k/T).
    """
    S, _g, Phi, dxdT_T = _linearisation_steps(stepper, hs, X, J)
    return S, Phi, dxdT_T


def _linearisation_steps(stepper: _Stepper, hs: np.ndarray, X: np.ndarray, J: np.ndarray):
    """As :func:`_linearisation`, with the per-step g_k·h_k (N, n) second."""
    Wt = stepper.Wt
    n = X.shape[1]
    sizes, which = np.unique(hs, return_inverse=True)
    mats = [stepper.linear_step(float(h)) for h in sizes]
    if len(sizes) == 1:  # the orbit's equal steps: one set of matrices, broadcast
        B, K, M, D = mats[0]
    else:
        B, K, M, D = (np.stack(parts)[which] for parts in zip(*mats, strict=True))
    E = B - K @ (J[:-1] @ Wt)  # B − K J_k Wᵀ
    Q = np.linalg.solve(np.eye(J.shape[-1])[None] + J[1:] @ M, J[1:])  # (I + J M)⁻¹ J
    S = E - K @ (Q @ (Wt @ E))
    dX = X[1:] - X[:-1]
    v = (dX @ D.T if D.ndim == 2 else np.einsum("kij,kj->ki", D, dX)) * hs[:, None]
    Qv = np.einsum("kij,kj->ki", Q, v @ Wt.T)
    g = v - (Qv @ K.T if K.ndim == 2 else np.einsum("kij,kj->ki", K, Qv))
    N = len(hs)
    aug = np.zeros((N, n + 1, n + 1))
    aug[:, :n, :n] = S
    aug[:, :n, n] = g
    aug[:, n, n] = 1.0
    prod = aug
    while len(prod) > 1:
        if len(prod) % 2:
            pairs = prod[1:-1:2] @ prod[0:-1:2]
            pairs[-1] = prod[-1] @ pairs[-1]
            prod = pairs
        else:
            prod = prod[1::2] @ prod[0::2]
    return S, g, prod[0][:n, :n], prod[0][:n, n]


def _bordered(
    monodromy: np.ndarray,
    dxdT_T: np.ndarray,
    flow: np.ndarray,
    T: float,
    w: np.ndarray,
    U: np.ndarray,
) -> np.ndarray:
    """The shooting Newton matrix, scaled, bordered by the phase condition and
    the floating groups: unknowns (w·δx, δT/T, the floating multipliers).

    ``monodromy`` and ``dxdT_T`` (∂x_N/∂T·T) are on the dynamic unknowns,
    ``flow`` the flow at the start, ``T`` the period, ``w`` their weights and ``U``
    the floating groups' indicator columns (m, p).
    """
    m, p = len(w), U.shape[1]
    A = np.zeros((m + 1 + p, m + 1 + p))
    A[:m, :m] = (w[:, None] * (monodromy - np.eye(m))) / w[None, :]
    A[:m, m] = w * dxdT_T
    A[m, :m] = w * flow * T
    A[:m, m + 1 :] = w[:, None] * U
    A[m + 1 :, :m] = U.T / w[None, :]
    return A


def _bordered_solve(A: np.ndarray, r_w: np.ndarray) -> tuple[np.ndarray, tuple]:
    """Newton's step of the bordered system for a scaled mismatch ``r_w`` (w·r),
    and the factors of ``A`` (for simplified steps with the same matrix)."""
    rhs = np.zeros(len(A))
    rhs[: len(r_w)] = -r_w
    try:
        lu = scipy.linalg.lu_factor(A, check_finite=False)
    except (np.linalg.LinAlgError, ValueError) as err_:
        raise ShootingError("the shooting matrix is singular") from err_
    step = scipy.linalg.lu_solve(lu, rhs, check_finite=False)
    if not np.all(np.isfinite(step)):
        raise ShootingError("the shooting matrix is singular")
    return step, lu


def neighbour_period(
    orbit: Orbit,
    dyn: Dynamics,
    x_start: np.ndarray,
    scale: np.ndarray,
    floating: np.ndarray | None = None,
) -> float:
    """The period of a circuit next to ``orbit``'s (a part moved a little), to first
    order in the move: one period of the neighbour's dynamics from ``x_start``
    (the orbit's start moved by the change of the DC point) on the orbit's grid,
    and one Newton step with the orbit's own bordered matrix.

    At a converged orbit this is the implicit function theorem: the step is
    −A⁻¹·∂r/∂p·δp plus terms of second order in δp, so a central difference of
    two neighbours gives dT/dp with an error of second order (sensitivity of a
    periodic orbit through its shooting Jacobian; Aprille & Trick 1972, and the
    parameter sensitivity of shooting methods generally, from memory).  Raises
    :class:`ShootingError` when the neighbour's period cannot be stepped.
    """
    dyn_idx = orbit.dynamic
    w = scale[dyn_idx]
    U = np.zeros((len(dyn_idx), 0)) if floating is None else floating[dyn_idx]
    T, dtau = orbit.T, orbit.dtau
    traj = _trajectory(_Stepper(dyn), x_start, T * dtau)
    if traj is None:
        raise ShootingError("a trapezoidal step failed on the neighbour's period")
    r = (traj[0][-1] - x_start)[dyn_idx]
    hs0, hsN = T * dtau[0], T * dtau[-1]
    flow = (orbit.x[1] - orbit.x[-2])[dyn_idx] / (hs0 + hsN)
    A = _bordered(orbit.monodromy, orbit.dxdT[dyn_idx] * T, flow, T, w, U)
    step, _lu = _bordered_solve(A, r * w)
    return T * (1.0 + float(step[len(dyn_idx)]))


def shoot(
    dyn: Dynamics,
    x0: np.ndarray,
    T0: float,
    scale: np.ndarray,
    floating: np.ndarray | None = None,
    dtau: np.ndarray | None = None,
) -> Orbit:
    """Shooting-Newton for the periodic orbit through (about) ``x0`` with period (about) ``T0``.

    ``scale`` (n,) weighs the unknowns (1 for voltages, an impedance for
    branch currents) so that the phase condition and the convergence test
    compare like with like.  ``dtau`` is the grid (fractions of the period,
    uniform by default), fixed during the iteration so that the period map
    is one smooth map.  Raises :class:`ShootingError` when Newton's method
    does not converge or the orbit collapses to a point.

    ``floating`` (n, p) holds one indicator vector per group of DC-floating
    nodes (joined to ground only through G_MIN).  Shifting such a group's
    voltages together changes no current but G_MIN's, so the period map has
    a multiplier 1 − O(G_MIN·T/C) there: Newton is held off these
    directions (bordered like the phase condition) and each group is then
    placed where the G_MIN currents average to zero, as in the long run.
    """
    dtau = uniform_grid() if dtau is None else dtau
    stepper = _Stepper(dyn)
    dyn_idx = dynamic_unknowns(dyn.C, dyn.G)
    m = len(dyn_idx)
    w = scale[dyn_idx]
    U = np.zeros((m, 0)) if floating is None else floating[dyn_idx]
    p = U.shape[1]
    x, T = x0.astype(float).copy(), float(T0)
    level = float(np.max(np.abs(w * x[dyn_idx]))) or 1.0
    tol = RESIDUAL_TOL * level

    def mismatch(x_start: np.ndarray, period: float):
        traj = _trajectory(stepper, x_start, period * dtau)
        if traj is None:
            return None, math.inf
        r = (traj[0][-1] - x_start)[dyn_idx] * w
        return traj, float(np.max(np.abs(r)))

    traj, err = mismatch(x, T)
    if traj is None:
        raise ShootingError("a trapezoidal step failed on the first period")
    for it in range(1, NEWTON_MAX + 1):
        X, _phi, J = traj
        hs = T * dtau
        S, g, Phi, dxdT_T = _linearisation_steps(stepper, hs, X, J)
        r = (X[-1] - X[0])[dyn_idx]
        # flow at the start: central difference across the periodic end
        f0 = (X[1] - X[-2])[dyn_idx] / (hs[0] + hs[-1])
        A = _bordered(Phi[np.ix_(dyn_idx, dyn_idx)], dxdT_T[dyn_idx], f0, T, w, U)
        step, lu = _bordered_solve(A, r * w)
        dT = step[m] * T
        limit = MAX_PERIOD_STEP * T
        if abs(dT) > limit:
            step *= limit / abs(dT)
            dT = step[m] * T
        dx = np.zeros_like(x)
        dx[dyn_idx] = step[:m] / w
        done = (T, dtau, S, Phi, dxdT_T / T, dyn_idx, it - 1, w, level, floating)
        small = err <= tol or float(np.max(np.abs(step[:m]))) <= STEP_TOL
        if small and abs(dT) <= PERIOD_TOL * T:
            # One more Newton step, carried along the period by the step
            # linearisations (δx_{k+1} = S_k δx_k + g_k δT/T) instead of a new
            # integration: its error is second order in a step already below
            # the tolerance, so what is left of the start point — a residual
            # of 1e-9 is an error of 1e-5 along a multiplier of 0.9999 — falls
            # to round-off and the orbit does not depend on where Newton began.
            T_new = T + dT
            X_new = _corrected(traj[0], S, g, dx, dT / T)
            # the device and the linearisation at the corrected states, so that
            # the monodromy (its trivial multiplier 1) belongs to this orbit
            phi = stepper.phi
            flat = [c for v in (X_new @ dyn.W).tolist() for c in phi(*v)]
            phi_new, J_new = stepper.unpack(np.array(flat).reshape(len(X_new), -1))
            S, _g, Phi, dxdT_T = _linearisation_steps(stepper, T_new * dtau, X_new, J_new)
            done = (T_new, dtau, S, Phi, dxdT_T / T_new, dyn_idx, it, w, level, floating)
            return _finish((X_new, phi_new, J_new), *done)
        # Damped Newton with the natural monotonicity test: a step is taken
        # when the simplified correction A⁻¹r(new) is shorter than A⁻¹r(old),
        # which weighs slow (bias) directions by their effect, not their
        # residual (Deuflhard, Newton Methods for Nonlinear Problems, 2004,
        # ch. 3, from memory).
        size = float(np.linalg.norm(step))
        lam = 1.0
        for _ in range(LINE_SEARCH_HALVINGS + 1):
            new_traj, new_err = mismatch(x + lam * dx, T + lam * dT)
            if new_traj is not None:
                r_new = (new_traj[0][-1] - new_traj[0][0])[dyn_idx]
                simplified = scipy.linalg.lu_solve(
                    lu, np.concatenate((-w * r_new, np.zeros(1 + p))), check_finite=False
                )
                if float(np.linalg.norm(simplified)) <= (1.0 - lam / 4.0) * size or new_err < err:
                    break
            lam *= 0.5
        else:
            if err <= ACCEPT_TOL * level:
                # the round-off floor: what is left lies along the nearly
                # neutral charge of DC-floating nodes (G_MIN only)
                return _finish(traj, *done)
            raise ShootingError(f"Newton stalled at a mismatch of {err:.3g} after {it} steps")
        x, T, traj, err = x + lam * dx, T + lam * dT, new_traj, new_err
        if not (T > 0.0 and math.isfinite(T)):
            raise ShootingError("the period left the positive numbers")
    raise ShootingError(f"no convergence in {NEWTON_MAX} Newton steps (mismatch {err:.3g})")


def _corrected(X: np.ndarray, S: np.ndarray, g: np.ndarray, dx: np.ndarray, rel_dT: float):
    """The states moved by the linearised response to (δx_0, δT/T)."""
    dX = np.empty_like(X)
    dX[0] = dx
    dX[1:] = g * rel_dT
    dot = np.dot
    for k in range(len(S)):
        dX[k + 1] += dot(S[k], dX[k])
    return X + dX


def _finish(traj, T, dtau, S, Phi, dxdT, dyn_idx, iterations, w, level, floating) -> Orbit:
    X, phi, J = traj
    if floating is not None and floating.size:
        mean = np.tensordot(dtau, 0.5 * (X[:-1] + X[1:]), axes=(0, 0))
        shift = -(floating.T @ mean) / np.sum(floating**2, axis=0)
        X = X + floating @ shift
    orbit = Orbit(
        T=T, f=unwarped_frequency(T, dtau), dtau=dtau, x=X, phi=phi, J=J, steps=S,
        dynamic=dyn_idx, monodromy=Phi[np.ix_(dyn_idx, dyn_idx)], dxdT=dxdT,
        iterations=iterations,
    )  # fmt: skip
    _check_not_a_point(orbit, w, level)
    return orbit


#: An orbit whose scaled swing is below this fraction of the state's scale is
#: the DC point, not an oscillation.
COLLAPSED: Final = 1e-6


def _check_not_a_point(orbit: Orbit, w: np.ndarray, level: float) -> None:
    X = orbit.x[:, orbit.dynamic] * w
    if float(np.max(X.max(axis=0) - X.min(axis=0))) < COLLAPSED * level:
        raise ShootingError("the orbit collapsed to the DC point")
