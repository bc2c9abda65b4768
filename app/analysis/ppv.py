r"""Phase sensitivity of an oscillator along its orbit: the perturbation projection vector.

A small deviation δx of the state at a point of the periodic orbit either
dies out (the orbit is stable) or leaves a lasting *time shift* α: the
oscillation runs on as if it were α seconds ahead.  To first order
α = p(t)ᵀ·δx with p(t) the left Floquet eigenvector of the trivial
multiplier, normalised p(t)ᵀ·ẋs(t) = 1 (a deviation along the orbit's own
flow is a pure time shift).  For the descriptor form C·ẋ + i(x) = b + u(t)
an injected charge q (the integral of the noise current u) moves the state
by C⁻¹q, so the time shift per unit injected charge is the perturbation
projection vector v1 = C⁻ᵀp with v1ᵀ·C·ẋs = 1 (Demir, Mehrotra &
Roychowdhury 2000; Demir & Roychowdhury 2003).

Discrete form, exact for the trapezoidal stepper the orbit was found with
(:mod:`ringwise.analysis.steady`).  One step of the stepper with a noise
current averaged over the step, ū_k, is

.. math:: \bar A_{k+1}\,\delta x_{k+1} = (2C/h_k - G - P J_k W^T)\,\delta x_k + 2\bar u_k,
          \qquad \bar A_{k+1} = 2C/h_k + G + P J_{k+1} W^T,

i.e. δx_{k+1} = S_k δx_k + 2Ā_{k+1}⁻¹ū_k with the orbit's one-step
linearisation S_k.  The time shift is invariant along the orbit, so
p_kᵀ = p_{k+1}ᵀ S_k: the adjoint recursion run *backwards* over one period
from p_N = p_0, the left eigenvector of the monodromy matrix Φ = S_{N−1}⋯S_0
for the multiplier 1.  Backwards, the adjoint is stable (every other
component shrinks by its multiplier per period), so one sweep is enough.
The time shift of the injection over step k is then

.. math:: \Delta\alpha_k = 2 p_{k+1}^T \bar A_{k+1}^{-1} \bar u_k = h_k\,\psi_k^T \bar u_k,
          \qquad \psi_k = \frac{2}{h_k}\bar A_{k+1}^{-T} p_{k+1},

ψ_k being the discrete v1 on the step (s per coulomb on node rows, s per
volt-second on branch rows).  Normalisation: pᵀr = 1 with r the flow at the
start of the orbit (a central difference across its periodic end, second
order like the stepper); pᵀr is then the same at every point because r is
carried forward by the same S_k.

Why the perturbation projection vector and not the impulse sensitivity
function: the ISF of Hajimiri & Lee is found by injecting impulses at each
node and each instant and watching the phase settle — N·n transient runs,
or a fit; the PPV is one adjoint sweep over matrices the shooting already
has, it is exact for the discretised circuit (so the 1/f² level and a
stochastic run of the same stepper agree closely), and it includes
amplitude-to-phase conversion through the bias network automatically.  For
a node the two carry the same information: Γ(ωt)/q_max = 2π f0·v1(t).

References
----------
A. Demir, A. Mehrotra & J. Roychowdhury, "Phase noise in oscillators: a
unifying theory and numerical methods for characterization", IEEE TCAS-I
47(5), 2000; A. Demir & J. Roychowdhury, "A reliable and efficient
procedure for oscillator PPV computation, with phase noise macromodeling
applications", IEEE TCAD 22(2), 2003; A. Hajimiri & T. H. Lee, "A general
theory of phase noise in electrical oscillators", IEEE JSSC 33(2), 1998;
all from memory.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

import numpy as np
import scipy.linalg

from ringwise.analysis.steady import Orbit
from ringwise.analysis.stepper import Dynamics

#: The trivial multiplier must lie within this of 1 for the orbit to be an
#: oscillator's (a free-running orbit has it at 1 to the solver's tolerance).
TRIVIAL_TOL: Final = 1e-4


class SensitivityError(ArithmeticError):
    """The orbit has no usable trivial multiplier (it is not a free-running oscillation)."""


@dataclass(frozen=True)
class PhaseSensitivity:
    """The perturbation projection vector along one period of an orbit.

    Attributes
    ----------
    T : period of the orbit, s
    h : (N,) the steps, s
    p : (N+1, n) time shift per unit deviation of each unknown at each point,
        s/V on node voltages and s/A on branch currents; zero on the unknowns
        that carry no state (a supply's node and current)
    psi : (N, n) time shift per unit injection during step k: s/C into a node
        row (a current times time), s/(V·s) into a branch row (a voltage in
        series with the branch, times time)
    trivial : the trivial multiplier as computed (1 to round-off)
    """

    T: float
    h: np.ndarray
    p: np.ndarray
    psi: np.ndarray
    trivial: complex

    @property
    def f0(self) -> float:
        """Repetition frequency of the orbit, 1/T, Hz."""
        return 1.0 / self.T


def phase_sensitivity(dyn: Dynamics, orbit: Orbit) -> PhaseSensitivity:
    """The perturbation projection vector of ``orbit`` (found on the stepper of ``dyn``).

    Raises :class:`SensitivityError` when no multiplier lies within
    ``TRIVIAL_TOL`` of 1 with its eigenvector along the flow.
    """
    idx = orbit.dynamic
    n = orbit.x.shape[1]
    N = orbit.N
    flow = orbit.flow
    mu, left, right = scipy.linalg.eig(orbit.monodromy, left=True, right=True)
    # the trivial multiplier: near 1 with its right eigenvector along the flow
    # (DC-floating charges have multipliers near 1 too, with other eigenvectors)
    unit = flow / (np.linalg.norm(flow) or 1.0)
    align = np.abs(unit @ right) / np.linalg.norm(right, axis=0)
    i = int(np.argmin(np.abs(mu - 1.0) - align))
    if abs(mu[i] - 1.0) > TRIVIAL_TOL:
        raise SensitivityError(
            f"no Floquet multiplier within {TRIVIAL_TOL:g} of 1 (nearest {mu[i]:.6g})"
        )
    row = np.conj(left[:, i])  # scipy's left eigenvectors: vᴴΦ = μvᴴ
    p_end = (row / (row @ flow)).real
    # backward adjoint sweep p_k = S_kᵀ p_{k+1} on the state-carrying unknowns
    S = orbit.steps[:, idx[:, None], idx[None, :]]
    p = np.zeros((N + 1, n))
    p[N, idx] = p_end
    pk = p_end
    for k in range(N - 1, -1, -1):
        pk = S[k].T @ pk
        p[k, idx] = pk
    # ψ_k = (2/h_k) Ā_{k+1}⁻ᵀ p_{k+1}, all steps in one batched solve
    h = orbit.h
    JW = orbit.J[1:] @ dyn.W.T  # (N, 2, n)
    A_bar = 2.0 * dyn.C[None] / h[:, None, None] + dyn.G[None] + dyn.P[None] @ JW
    psi = np.linalg.solve(np.transpose(A_bar, (0, 2, 1)), p[1:, :, None])[..., 0]
    psi *= (2.0 / h)[:, None]
    return PhaseSensitivity(T=orbit.T, h=h, p=p, psi=psi, trivial=complex(mu[i]))
