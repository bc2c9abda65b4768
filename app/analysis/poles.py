r"""Natural frequencies of the linearised circuit.

The poles are the generalised eigenvalues of the MNA pencil,
:math:`(G_{full} + sC)\,v = 0`, computed by the QZ algorithm with frequency
scaled by the tank's resonance for conditioning.  The dominant pair (the one
nearest the oscillation frequency) is then polished by Newton's method on
:math:`1 - T(s) = 0`, the same condition written through the return ratio, so
that the sign of its real part σ agrees with the loop gain to round-off.

σ > 0 means the oscillation grows from noise (it starts), with an envelope
time constant 1/σ.  Any other right-half-plane pole is reported: a
low-frequency one, from coupling or bypass capacitors, is the classic cause
of squegging (the envelope collapsing and rebuilding).

References
----------
Moler & Stewart, "An algorithm for generalized matrix eigenvalue problems",
SIAM J. Numer. Anal., 1973 (QZ), from memory; ``scipy.linalg.eig``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Final

import numpy as np
import scipy.linalg

from ringwise.analysis.crossing import loop_at
from ringwise.circuit.mna import SmallSignal

#: Eigenvalues larger than this multiple of the reference frequency are the
#: "infinite" ones of the singular C matrix (or far parasitics) and are dropped.
FAR_POLE_FACTOR: Final = 1e6
#: Poles closer to the origin than this fraction of the reference frequency
#: are the artefacts of G_MIN on DC-floating nodes and are dropped.
NEAR_ZERO_FACTOR: Final = 1e-7
#: A pole counts as right-half-plane when σ exceeds this fraction of ω_ref.
RHP_TOLERANCE: Final = 1e-9
NEWTON_STEPS: Final = 20
NEWTON_RTOL: Final = 1e-13


@dataclass(frozen=True)
class Pole:
    """A natural frequency s = σ + jω, with σ in 1/s and f = ω/2π in Hz."""

    sigma: float
    f: float


@dataclass(frozen=True)
class PoleFigures:
    """Dominant pair (``None`` if there is no complex pair) and the other RHP poles."""

    dominant: Pole | None
    other_rhp: list[Pole] = field(default_factory=list)

    @property
    def growth_time(self) -> float | None:
        """1/σ of the dominant pair, s (``None`` unless it grows)."""
        if self.dominant is None or self.dominant.sigma <= 0:
            return None
        return 1.0 / self.dominant.sigma


def all_poles(ss: SmallSignal, f_ref: float) -> np.ndarray:
    """Finite natural frequencies (rad/s) of an unbatched small-signal circuit."""
    w_ref = 2.0 * math.pi * f_ref
    p = scipy.linalg.eigvals(-ss.G_full, w_ref * ss.C, check_finite=False)
    p = p[np.isfinite(p)]
    p = p[(np.abs(p) < FAR_POLE_FACTOR) & (np.abs(p) > NEAR_ZERO_FACTOR)]
    return p * w_ref


def _polish(ss: SmallSignal, s0: complex) -> complex:
    """Newton on 1 − T(s) = 0 from s0; returns s0 unchanged if it fails."""
    s = s0
    G, C = np.ascontiguousarray(ss.G, dtype=float), np.ascontiguousarray(ss.C, dtype=float)
    u, w, gm = ss.u.astype(complex), ss.w.astype(complex), float(ss.gm)
    for _ in range(NEWTON_STEPS):
        T, dT = loop_at(G, C, u, w, gm, complex(s))
        if dT == 0 or not np.isfinite(dT):
            return s0
        step = (1.0 - T) / dT
        s = s + step
        if abs(step) <= NEWTON_RTOL * abs(s):
            return s
    return s if abs(s - s0) < 0.1 * abs(s0) else s0


def natural_frequencies(ss: SmallSignal, f_ref: float, f_osc: float | None) -> PoleFigures:
    """Dominant pole pair near ``f_osc`` (or ``f_ref``) and any other RHP poles."""
    w_ref = 2.0 * math.pi * f_ref
    poles = all_poles(ss, f_ref)
    upper = poles[poles.imag > RHP_TOLERANCE * w_ref]
    target = 2.0 * math.pi * (f_osc if f_osc is not None else f_ref)
    dominant: Pole | None = None
    if upper.size:
        s0 = upper[np.argmin(np.abs(np.log(upper.imag / target)))]
        s = _polish(ss, complex(s0))
        dominant = Pole(sigma=s.real, f=s.imag / (2.0 * math.pi))
        rest = poles[np.abs(poles - s0) > 1e-6 * abs(s0)]
        rest = rest[np.abs(rest - np.conj(s0)) > 1e-6 * abs(s0)]
    else:
        rest = poles
    rhp = rest[(rest.real > RHP_TOLERANCE * w_ref) & (rest.imag >= 0)]
    others = [Pole(sigma=float(p.real), f=float(p.imag) / (2.0 * math.pi)) for p in rhp]
    return PoleFigures(dominant=dominant, other_rhp=sorted(others, key=lambda p: p.f))
