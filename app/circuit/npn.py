r"""NPN transport model (Ebers-Moll with forward Early effect) and its hybrid-π.

Large signal, with :math:`v_{BE}`, :math:`v_{BC}` the junction voltages and
:math:`v_{CE} = v_{BE} - v_{BC}`:

.. math::

    I_F = I_S\,(e^{v_{BE}/V_T} - 1), \qquad I_R = I_S\,(e^{v_{BC}/V_T} - 1)

    I_C = (I_F - I_R)\,(1 + v_{CE}/V_A) - I_R/\beta_R, \qquad
    I_B = I_F/\beta_F + I_R/\beta_R

In the forward-active region this is :math:`I_C = I_S e^{V_{BE}/V_T}(1 + V_{CE}/V_A)`,
:math:`I_B = I_C/\beta` (to within the Early factor); the base-collector junction
makes saturation real.  No junction drop is assumed anywhere: it follows
from :math:`I_S` and the current.

Small signal (hybrid-π) at an operating point:
:math:`g_m = \partial I_C/\partial v_{BE}`,
:math:`g_o = 1/r_o = \partial I_C/\partial v_{CE}`,
:math:`g_\pi = 1/r_\pi = \partial I_B/\partial v_{BE}`,
and :math:`C_\pi = g_m/(2\pi f_T) - C_\mu` (not below zero).

References
----------
Sedra & Smith, *Microelectronic Circuits*, BJT chapter (transport model,
hybrid-π, :math:`f_T = g_m / 2\pi(C_\pi + C_\mu)`), from memory.
Gray, Hurst, Lewis & Meyer, *Analysis and Design of Analog Integrated
Circuits*, ch. 1-2 (Ebers-Moll, temperature law of :math:`I_S`), from memory.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final, NamedTuple

import numpy as np
from scipy import constants

#: Reference temperature of the device data, K (25 °C).
T_NOMINAL: Final = constants.zero_Celsius + 25.0
#: Silicon band gap used in the I_S(T) law, eV (SPICE default, from memory).
EG_SILICON_EV: Final = 1.11
#: Temperature exponent of I_S (SPICE XTI default for a BJT, from memory).
XTI: Final = 3.0
#: Reverse current gain: a generic small value, typical, from memory.
BETA_REVERSE: Final = 1.0
#: Exponent argument beyond which e^x is continued linearly, so Newton steps
#: far outside the physical range do not overflow.
EXP_ARG_LIMIT: Final = 80.0


def thermal_voltage(T_kelvin: float) -> float:
    """V_T = k·T/q in volts, from CODATA constants (``scipy.constants``); T in K
    (a float or an array)."""
    return constants.k * T_kelvin / constants.e


def saturation_current(IS_nominal: float, T_kelvin: float) -> float:
    r"""I_S at temperature T from its value at 25 °C.

    .. math:: I_S(T) = I_S(T_0)\,(T/T_0)^{X_{TI}}\,
              \exp\!\left[\frac{q E_g}{k}\left(\frac{1}{T_0} - \frac{1}{T}\right)\right]

    With E_g = 1.11 eV and X_TI = 3 this gives the familiar fall of V_BE of
    about 2 mV/°C at constant current.  Floats or arrays alike.
    """
    ratio = T_kelvin / T_NOMINAL
    exponent = EG_SILICON_EV * constants.e / constants.k * (1.0 / T_NOMINAL - 1.0 / T_kelvin)
    return IS_nominal * ratio**XTI * np.exp(exponent)


def _exp_and_slope(x: float) -> tuple[float, float]:
    """e^x and its derivative, continued linearly beyond ``EXP_ARG_LIMIT``."""
    if x <= EXP_ARG_LIMIT:
        value = math.exp(x)
        return value, value
    edge = math.exp(EXP_ARG_LIMIT)
    return edge * (1.0 + x - EXP_ARG_LIMIT), edge


class JunctionState(NamedTuple):
    """Terminal currents and their partial derivatives at (v_BE, v_CE), in A and S.

    Currents flow *into* the terminals.  ``dX_dvbe`` is taken at constant
    v_CE and ``dX_dvce`` at constant v_BE, which are exactly the hybrid-π
    conductances: g_m = dIC_dvbe, g_o = dIC_dvce, g_π = dIB_dvbe,
    g_r = dIB_dvce.  Fields are floats for one transistor or arrays for a
    batch (the same names either way).
    """

    IC: float
    IB: float
    I_F: float
    I_R: float
    dIC_dvbe: float
    dIC_dvce: float
    dIB_dvbe: float
    dIB_dvce: float


def exp_and_slope_array(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_exp_and_slope` elementwise, for batches of junctions."""
    clipped = np.minimum(x, EXP_ARG_LIMIT)
    value = np.exp(clipped)
    return value * (1.0 + (x - clipped)), value


def junction_currents(
    vbe, vce, IS, beta, beta_R, VA, VT, exp_and_slope=_exp_and_slope
) -> JunctionState:
    """The transport model at (v_BE, v_CE): currents and their derivatives.

    The one place the device equations are written.  The transient calls it
    in its inner loop with floats; :func:`ringwise.circuit.mna.device_currents`
    calls it with arrays and ``exp_and_slope=exp_and_slope_array``.
    """
    vbc = vbe - vce
    ef, def_ = exp_and_slope(vbe / VT)
    er, der = exp_and_slope(vbc / VT)
    I_F = IS * (ef - 1.0)
    I_R = IS * (er - 1.0)
    gF = IS * def_ / VT  # dI_F/dv_BE
    gR = IS * der / VT  # dI_R/dv_BC
    early = 1.0 + vce / VA
    transport = I_F - I_R
    # v_BC = v_BE - v_CE, so d/dv_BE|v_CE picks up +dI_R/dv_BC and d/dv_CE picks up -.
    return JunctionState(
        transport * early - I_R / beta_R,
        I_F / beta + I_R / beta_R,
        I_F,
        I_R,
        (gF - gR) * early - gR / beta_R,
        gR * early + transport / VA + gR / beta_R,
        gF / beta + gR / beta_R,
        -gR / beta_R,
    )


def junction_state(
    vbe: float, vce: float, IS: float, beta: float, beta_R: float, VA: float, VT: float
) -> JunctionState:
    """Evaluate the transport model at junction voltages ``vbe``, ``vce`` (V)."""
    return junction_currents(vbe, vce, IS, beta, beta_R, VA, VT)


@dataclass(frozen=True, slots=True)
class HybridPi:
    """Small-signal hybrid-π elements (SI units: S, S, S, S, F, F).

    ``g_r`` is the small reverse transconductance dI_B/dv_CE (zero in the
    forward-active region, significant only in saturation).
    """

    gm: float
    g_pi: float
    g_o: float
    g_r: float
    C_pi: float
    C_mu: float

    @property
    def r_pi(self) -> float:
        return 1.0 / self.g_pi if self.g_pi > 0 else math.inf

    @property
    def r_o(self) -> float:
        return 1.0 / self.g_o if self.g_o > 0 else math.inf


def hybrid_pi(state: JunctionState, fT, C_mu) -> HybridPi:
    """Hybrid-π at an operating point; C_π = g_m/(2π·f_T) − C_μ, floored at zero.

    Floats for one transistor, arrays for a batch (``fT`` and ``C_mu`` in Hz
    and F broadcast against the state's arrays).
    """
    gm = state.dIC_dvbe
    C_pi = np.maximum(gm / (2.0 * math.pi * fT) - C_mu, 0.0)
    if np.ndim(C_pi) == 0:
        C_pi, C_mu = float(C_pi), float(C_mu)
    else:
        C_mu = np.broadcast_to(np.asarray(C_mu, dtype=float), np.shape(C_pi))
    return HybridPi(
        gm=gm,
        g_pi=state.dIB_dvbe,
        g_o=state.dIC_dvce,
        g_r=state.dIB_dvce,
        C_pi=C_pi,
        C_mu=C_mu,
    )
