r"""Stability of a periodic orbit from its Floquet multipliers.

The multipliers are the eigenvalues of the monodromy matrix Φ (the
linearised period map, :class:`ringwise.analysis.steady.Orbit`).  A small
deviation δ from the orbit returns after one period as Φδ: along an
eigenvector with multiplier μ it is multiplied by μ each period.  One
multiplier is exactly 1 for any autonomous oscillator (a shift along the
orbit neither grows nor decays: the *trivial* one, its eigenvector is the
flow ẋ); groups of DC-floating nodes add one multiplier 1 − O(G_MIN·T/C)
each (a charge held by capacitors alone); both are set aside.  The others
decide what the circuit does:

* all inside the unit circle — the orbit **settles**; the slowest deviation
  shrinks by |μ|max per period, so it falls to 1 % after
  ln(0.01)/ln|μ|max periods;
* a complex pair outside — the amplitude itself oscillates about the
  orbit at a rate set by arg μ, growing: the envelope beats, collapses and
  rebuilds (**squegs**);
* a real multiplier below −1 — a deviation flips sign every period and
  grows: alternate cycles differ, a line at f/2 appears (**period-doubling**);
* a real multiplier above 1 — the orbit is **unstable** (the circuit leaves
  it for another state).

References
----------
Parker & Chua, *Practical Numerical Algorithms for Chaotic Systems*, 1989,
ch. 2 and 4 (Floquet multipliers of limit cycles, their bifurcations);
Kuznetsov, *Elements of Applied Bifurcation Theory*, ch. 1 and 7
(flip and Neimark-Sacker bifurcations of cycles); both from memory.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

import numpy as np

#: Behaviours, as named in the result contract.
SETTLES: Final = "settles"
SQUEGS: Final = "squegs"
PERIOD_DOUBLING: Final = "period-doubling"
UNSTABLE: Final = "unstable"
NO_ORBIT: Final = "no-orbit"
BEHAVIOURS: Final = (SETTLES, SQUEGS, PERIOD_DOUBLING, UNSTABLE, NO_ORBIT)
#: A multiplier counts as outside the unit circle above 1 + this (round-off).
UNIT_TOL: Final = 1e-7
#: Fraction a deviation must fall to for the orbit to count as settled (1 %).
SETTLE_FRACTION: Final = 0.01


@dataclass(frozen=True)
class Floquet:
    """The multipliers of an orbit, sorted, and what they mean.

    ``multipliers`` are the physical ones (trivial and floating-charge ones
    set aside), largest magnitude first; ``trivial`` is the computed value of
    the one along the flow (1 to round-off); ``settle_cycles`` the periods
    for a deviation to fall to 1 % (``None`` unless it settles).
    """

    multipliers: np.ndarray
    trivial: complex
    behaviour: str
    settle_cycles: float | None

    @property
    def largest(self) -> complex | None:
        return complex(self.multipliers[0]) if self.multipliers.size else None


def classify(monodromy: np.ndarray, flow: np.ndarray, floating: int = 0) -> Floquet:
    """Multipliers of ``monodromy`` and the orbit's behaviour.

    ``flow`` is ẋ at the orbit's start on the same (scaled) coordinates:
    the trivial multiplier is the one whose eigenvector lies along it.
    ``floating`` is the number of DC-floating node groups: that many further
    multipliers nearest 1 are set aside too.
    """
    mu, vec = np.linalg.eig(monodromy)
    unit = flow / (np.linalg.norm(flow) or 1.0)
    align = np.abs(unit.conj() @ vec) / np.linalg.norm(vec, axis=0)
    # the trivial one: near 1, eigenvector along the flow
    score = np.abs(mu - 1.0) - align
    i_trivial = int(np.argmin(score))
    trivial = complex(mu[i_trivial])
    rest = np.delete(mu, i_trivial)
    if floating:
        near = np.argsort(np.abs(rest - 1.0))[:floating]
        rest = np.delete(rest, near)
    rest = rest[np.argsort(-np.abs(rest), kind="stable")]
    return Floquet(rest, trivial, behaviour_of(rest), settle_cycles(rest))


def behaviour_of(multipliers: np.ndarray) -> str:
    """settles / squegs / period-doubling / unstable from the non-trivial multipliers."""
    outside = multipliers[np.abs(multipliers) > 1.0 + UNIT_TOL]
    if not outside.size:
        return SETTLES
    worst = outside[np.argmax(np.abs(outside))]
    if worst.imag != 0.0:
        return SQUEGS
    return PERIOD_DOUBLING if worst.real < 0.0 else UNSTABLE


def settle_cycles(multipliers: np.ndarray) -> float | None:
    """Periods for the slowest deviation to fall to 1 %: ln(0.01)/ln|μ|max."""
    if not multipliers.size:
        return 0.0
    rho = float(np.max(np.abs(multipliers)))
    if rho >= 1.0:
        return None
    if rho == 0.0:
        return 1.0
    return math.log(SETTLE_FRACTION) / math.log(rho)
