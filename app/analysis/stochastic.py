r"""A stochastic transient: the phase wander of many noisy runs, measured.

The check of the phase-sensitivity theory (:mod:`ringwise.analysis.phase_noise`)
against brute force.  An ensemble of runs starts on the periodic orbit and is
integrated with the transient's own trapezoidal stepper while every white
noise source injects its current (or voltage) as Wiener increments: on step k

.. math:: C\frac{x_{k+1}-x_k}{h_k} + \frac{i(x_k)+i(x_{k+1})}{2} = b + \bar u_k,
          \qquad \bar u_k = \sum_j e_j\,\sqrt{\frac{s\,S_j(x_k)}{2h_k}}\;\xi_{jk},

ξ independent standard normal, S_j the one-sided density at the start of the
step (Itô, so the shot noise follows the current as the run goes) and s the
stated scale-up factor — the drift-implicit (trapezoidal) form of the
Euler–Maruyama scheme.  The factor s makes the wander measurable in a
bounded run; the measured diffusion constant is divided by s again (the
theory is linear in the densities).  Flicker sources are left out: the check
is of the white diffusion constant.

Phase: the argument of the fundamental of an output signal over each
period, against the orbit's (a period average, so the wideband and the
amplitude noise, at right angles to it, hardly move it).  Over time the
variance of the time shift over the runs grows as c·t plus a bounded term
(the wander of the amplitude and the bias, which also moves the
fundamental's phase a little, settles to a stationary spread), so c is
the least-squares slope of that variance against time once the bounded term
has settled, divided by s; its standard error comes from resampling the runs.

Control variate (optional): the same draws also give the time shift the
linear theory predicts, λ = Σ_k h_k ψ_kᵀū_k, and the exact expectation of
its variance, Σ_k h_k Σ_j (ψ_kᵀe_j)²·s·S_j/2 (a sum of independent
increments).  The estimate slope(var α) − slope(var λ) + slope(E var λ) is
unbiased whatever ψ is — a wrong ψ only widens it — and, with the right ψ,
far narrower, since α and λ then differ by a bounded term (Glasserman,
*Monte Carlo Methods in Financial Engineering*, §4.1, control variates,
from memory).

References
----------
P. E. Kloeden & E. Platen, *Numerical Solution of Stochastic Differential
Equations*, Springer 1992, ch. 9 and 12 (Euler–Maruyama, drift-implicit
schemes); D. J. Higham, "An algorithmic introduction to numerical simulation
of stochastic differential equations", SIAM Review 43(3), 2001; A. Demir et
al., IEEE TCAS-I 47(5), 2000 (var α(t) = c·t); all from memory.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.analysis.noise_sources import NoiseSource
from ringwise.analysis.steady import Orbit
from ringwise.analysis.stepper import NEWTON_CLAMP, NEWTON_MAX, NEWTON_TOL, Dynamics, _Stepper
from ringwise.circuit.mna import LinearSystem
from ringwise.circuit.npn import exp_and_slope_array, junction_currents

#: Resamplings of the runs for the standard error of the measured c.
BOOTSTRAP: Final = 200


class StochasticError(ArithmeticError):
    """A noisy step did not converge."""


PhiBatch = Callable[[np.ndarray, np.ndarray], tuple]


def circuit_phi_batch(system: LinearSystem) -> PhiBatch:
    """The transistor's (I_C, I_B) and their slopes for arrays of controls (same model)."""
    p = system.devices[0].params
    args = (p.IS, p.beta, p.beta_R, p.VA, p.VT)

    def phi(vbe: np.ndarray, vce: np.ndarray) -> tuple:
        return junction_currents(vbe, vce, *args, exp_and_slope_array)

    return phi


@dataclass(frozen=True)
class MeasuredDiffusion:
    """Diffusion constant measured from an ensemble (s), scaled back by ``factor``.

    ``stderr`` is its standard error from the spread of the squared increments.
    """

    c: float
    stderr: float
    factor: float
    runs: int
    periods: int


def measure_diffusion(
    dyn: Dynamics,
    phi_batch: PhiBatch,
    orbit: Orbit,
    sources: Sequence[NoiseSource],
    out: np.ndarray,
    factor: float,
    periods: int,
    runs: int,
    seed: int,
    skip: int,
    psi: np.ndarray | None = None,
) -> MeasuredDiffusion:
    """Run ``runs`` noisy copies for ``periods`` periods from the orbit's start and measure c.

    ``out`` (n,) reads the signal whose fundamental's phase is followed;
    ``factor`` scales every density up (and the result back down); the first
    ``skip`` periods (while the amplitude's wander builds up) are left out
    of the fit.  ``psi`` (N, n), if given, is a control variate (see the
    module text): it narrows the estimate without biasing it.
    """
    rng = np.random.default_rng(seed)
    white = [s for s in sources if not s.flicker]
    alpha, lin, expected = _phases(
        dyn, phi_batch, orbit, white, out, factor, periods, runs, rng, psi
    )
    k = np.arange(skip, periods)
    t = k * orbit.T

    def estimate(pick: np.ndarray) -> float:
        slope = _slope(alpha[pick][:, k], t)
        if psi is not None:
            slope += float(np.polyfit(t, expected[k], 1)[0]) - _slope(lin[pick][:, k], t)
        return slope / factor

    c = estimate(np.arange(runs))
    picks = rng.integers(0, runs, size=(BOOTSTRAP, runs))
    stderr = float(np.std([estimate(pick) for pick in picks]))
    return MeasuredDiffusion(c, stderr, factor, runs, periods)


def _slope(alpha: np.ndarray, t: np.ndarray) -> float:
    """Least-squares slope of the variance over the runs of ``alpha`` (runs, K) against ``t``."""
    var = alpha.var(axis=0, ddof=1)
    return float(np.polyfit(t, var, 1)[0])


def _phases(dyn, phi_batch, orbit, sources, out, factor, periods, runs, rng, psi):
    """Time shifts of each run over each of ``periods`` periods: measured, linear, expected.

    Measured (runs, periods): Z_k = ∫ s(t)·e^{−j2πt/T} dt over period k (the
    trapezoidal rule on the orbit's grid) for s = out·x; the shift is
    arg(Z_k/Z_orbit)·T/2π.  With ``psi``: the linear prediction Σ h·ψᵀū of
    the same draws (runs, periods) and its expected variance (periods,),
    Σ h·Σ_j (ψᵀe_j)²·s·S_j/2 with the densities the runs actually had;
    else zeros.
    """
    stepper = _Stepper(dyn)
    hs = orbit.h
    N = len(hs)
    mats = [stepper.step_matrices(float(h)) for h in hs]
    # trapezoid weights of the fundamental over one period, at the grid points
    t = orbit.t
    rot = np.exp(-2j * np.pi * t / orbit.T)
    wts = np.zeros(N + 1, dtype=complex)
    wts[:-1] += 0.5 * hs * rot[:-1]
    wts[1:] += 0.5 * hs * rot[1:]
    z_orbit = complex(wts @ (orbit.x @ out))
    E = np.array([s.vector for s in sources])  # (S, n)
    scale = factor * np.array([s.scale for s in sources])
    follows = np.array([s.current if s.current is not None else 0 for s in sources])
    power = np.array([s.exponent if s.current is not None else 0.0 for s in sources])
    Wm = dyn.W
    X = np.repeat(orbit.x[:1], runs, axis=0)
    V = X @ Wm
    V_prev = V.copy()
    q = phi_batch(V[:, 0], V[:, 1])
    Phi = np.column_stack((q[0], q[1]))
    shifts = np.empty((runs, periods))
    lin = np.zeros((runs, periods))
    expected = np.zeros(periods)
    lam = np.zeros(runs)
    acc = 0.0
    gains = np.zeros((N, len(sources))) if psi is None else psi @ E.T  # (N, S)
    for k in range(periods):
        z = wts[0] * (X @ out)
        for i, h in enumerate(hs):
            sm = mats[i]
            y = X @ sm.B.T + sm.c
            # the densities of NoiseSource.density, all sources at once (runs, S)
            dens = scale * np.abs(Phi[:, follows]) ** power
            amp = np.sqrt(dens / (2.0 * h)) * rng.standard_normal(dens.shape)
            y += 2.0 * (amp @ E) @ sm.Ainv.T
            if psi is not None:
                lam += h * (amp @ gains[i])
                acc += h * float(np.mean(dens @ gains[i] ** 2)) / 2.0
            a = y @ Wm - Phi @ sm.M.T
            V_new = _newton(phi_batch, sm.M, a, 2.0 * V - V_prev)
            q = phi_batch(V_new[:, 0], V_new[:, 1])
            Phi_new = np.column_stack((q[0], q[1]))
            X = y - (Phi + Phi_new) @ sm.K.T
            V_prev, V, Phi = V, V_new, Phi_new
            z = z + wts[i + 1] * (X @ out)
        # a run ahead by α has Z = e^{jωα}·Z_orbit
        shifts[:, k] = np.angle(z * np.conj(z_orbit)) * orbit.T / (2.0 * np.pi)
        lin[:, k] = lam
        expected[k] = acc
    return shifts, lin, expected


def _newton(phi_batch: PhiBatch, M: np.ndarray, a: np.ndarray, v0: np.ndarray) -> np.ndarray:
    """Solve v + M·φ(v) = a for each run's two controls (the stepper's 2×2 Newton, batched)."""
    v = v0.copy()
    m00, m01, m10, m11 = M.ravel()
    for _ in range(NEWTON_MAX):
        q = phi_batch(v[:, 0], v[:, 1])
        g0 = v[:, 0] + m00 * q[0] + m01 * q[1] - a[:, 0]
        g1 = v[:, 1] + m10 * q[0] + m11 * q[1] - a[:, 1]
        j00 = 1.0 + m00 * q[4] + m01 * q[6]
        j01 = m00 * q[5] + m01 * q[7]
        j10 = m10 * q[4] + m11 * q[6]
        j11 = 1.0 + m10 * q[5] + m11 * q[7]
        det = j00 * j11 - j01 * j10
        d = np.column_stack(((g0 * j11 - g1 * j01) / det, (j00 * g1 - j10 * g0) / det))
        d = np.clip(d, -NEWTON_CLAMP, NEWTON_CLAMP)
        v -= d
        if float(np.max(np.abs(d))) < NEWTON_TOL:
            return v
    raise StochasticError("a noisy step did not converge")
