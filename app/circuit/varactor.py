r"""The varactor's junction law: capacitance, charge and its inverse.

A reverse-biased junction's depletion capacitance at the reverse voltage V
(positive = reverse bias) is

.. math:: C(V) = \frac{C_{j0}}{(1 + V/\varphi)^m}

with C_j0 the capacitance at zero bias, φ the built-in potential and m the
grading coefficient (1/2 for an abrupt junction, 1/3 for a linearly graded
one, above 1/2 for a hyperabrupt profile).  The charge is its integral from
zero bias,

.. math:: q(V) = \frac{C_{j0}\,\varphi}{1 - m}\left[(1 + V/\varphi)^{1-m} - 1\right]

(:math:`C_{j0}\varphi\ln(1 + V/\varphi)` at m = 1).  Towards forward bias
the law diverges at V = −φ; below V = −FC·φ the capacitance is continued
linearly in V, as circuit simulators do (FC = 0.5), so the charge stays a
smooth, increasing function of V over the whole line and has an inverse
V(q), which the transient and the periodic steady state integrate.

References
----------
S. M. Sze, *Physics of Semiconductor Devices*, 2nd ed., ch. 2 (p-n junction
depletion capacitance, abrupt and linearly graded junctions), from memory;
the linear continuation below FC·φ is the usual one of SPICE's junction
capacitance (Nagel, *SPICE2*, 1975, from memory).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Final

import numpy as np

#: Below V = −FC·φ (forward bias) the capacitance is continued linearly
#: (SPICE's default forward-bias coefficient, common practice).
FC: Final = 0.5
#: |1 − m| below this uses the logarithmic (m = 1) form of the charge.
M_ONE: Final = 1e-9
#: Largest argument of e^x taken as a float (beyond it, infinity as numpy's exp).
EXP_LIMIT: Final = 700.0


def capacitance(V, C_j0, phi, m):
    """C(V), F, at the reverse voltage V (V; floats or arrays)."""
    if isinstance(V, float) and isinstance(C_j0, float) and isinstance(phi, float):
        return capacitance_at(V, C_j0, phi, float(m))
    V = np.asarray(V, dtype=float)
    x = 1.0 + np.maximum(V, -FC * phi) / phi
    C_fc = C_j0 * (1.0 - FC) ** (-1.0 - m)
    lin = C_fc * (1.0 - FC * (1.0 + m) - m * V / phi)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(-FC * phi <= V, C_j0 * x**-m, lin)
    return out if out.ndim else float(out)


def capacitance_at(V: float, C_j0: float, phi: float, m: float) -> float:
    """:func:`capacitance` for one float (the steppers' inner loop)."""
    if -FC * phi <= V:
        return C_j0 * (1.0 + V / phi) ** -m
    return C_j0 * (1.0 - FC) ** (-1.0 - m) * (1.0 - FC * (1.0 + m) - m * V / phi)


def _charge_law(x, C_j0, phi, m):
    """q at 1 + V/φ = x (x > 0) by the power law."""
    if abs(1.0 - m) < M_ONE:
        return C_j0 * phi * np.log(x)
    return C_j0 * phi / (1.0 - m) * (x ** (1.0 - m) - 1.0)


def charge(V, C_j0, phi, m):
    """q(V), C: the charge stored from zero bias to the reverse voltage V."""
    V = np.asarray(V, dtype=float)
    v_fc = -FC * phi
    q_fc = _charge_law(1.0 - FC, C_j0, phi, m)
    with np.errstate(invalid="ignore", divide="ignore"):
        law = _charge_law(1.0 + np.maximum(V, v_fc) / phi, C_j0, phi, m)
    # below v_fc: the integral of the linear continuation from v_fc
    C_fc = C_j0 * (1.0 - FC) ** (-1.0 - m)
    d = V - v_fc
    lin = q_fc + C_fc * ((1.0 - FC * (1.0 + m)) * d - m / (2.0 * phi) * (V**2 - v_fc**2))
    out = np.where(v_fc <= V, law, lin)
    return out if out.ndim else float(out)


def voltage(q: float, C_j0: float, phi: float, m: float) -> float:
    """V(q), V: the inverse of :func:`charge` (one float; ``nan`` beyond a
    hyperabrupt law's largest charge C_j0·φ/(m − 1))."""
    return inverse_law(C_j0, phi, m)(q)[0]


def inverse_law(C_j0: float, phi: float, m: float) -> Callable[[float], tuple[float, float]]:
    """q ↦ (V(q), C(V(q))) for one float, the law's constants worked out once
    (the steppers' inner loop); both ``nan`` beyond a hyperabrupt law's
    largest charge."""
    q_fc = float(_charge_law(1.0 - FC, C_j0, phi, m))
    v_fc = -FC * phi
    C_fc = C_j0 * (1.0 - FC) ** (-1.0 - m)
    log_form = abs(1.0 - m) < M_ONE
    q_unit = C_j0 * phi
    per_q = (1.0 - m) / q_unit
    power = 1.0 / (1.0 - m) if not log_form else 0.0
    # linear C below v_fc: q − q_fc = a·d − (m/2φ)(d² + 2·v_fc·d), d = V − v_fc
    a = C_fc * (1.0 - FC * (1.0 + m) - m * v_fc / phi)  # C at v_fc
    b = C_fc * m / (2.0 * phi)
    slope = C_fc * m / phi
    nan = float("nan")

    def law(q: float) -> tuple[float, float]:
        if q >= q_fc:
            if log_form:
                x = math.exp(q / q_unit) if q < EXP_LIMIT * q_unit else math.inf
            else:
                u = 1.0 + q * per_q
                if u <= 0.0:
                    return nan, nan
                x = u**power
            return phi * (x - 1.0), C_j0 * x**-m
        # b·d² − a·d + (q − q_fc) = 0, the root with d ≤ 0 on the increasing branch
        d = (a - math.sqrt(a * a - 4.0 * b * (q - q_fc))) / (2.0 * b) if b > 0 else (q - q_fc) / a
        return v_fc + d, a - slope * d

    return law
