"""DC operating point: Newton's method on the nonlinear nodal equations.

Capacitors are open and inductors are shorts (through their loss resistance)
simply because the MNA matrices are taken at s = 0.  Newton steps are damped
so that no junction voltage jumps by more than SPICE's ``pnjlim`` rule would
allow; if that fails, the supply is ramped up in steps (source stepping).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum
from typing import Final

import numpy as np

from ringwise.circuit.mna import (
    LinearSystem,
    device_state,
    device_voltages,
    nonlinear_residual,
)
from ringwise.circuit.netlist import NPN
from ringwise.circuit.npn import JunctionState
from ringwise.errors import DesignError

#: Newton stops when no unknown moves more than this (V or A) ...
STEP_TOL: Final = 1e-10
#: ... relative to its size.
REL_TOL: Final = 1e-9
MAX_NEWTON: Final = 100
SOURCE_STEPS: Final = (0.05, 0.1, 0.2, 0.35, 0.5, 0.7, 0.85, 1.0)
#: Forward junction current below which the transistor is called cut off, A.
CUTOFF_CURRENT: Final = 1e-9
#: The transistor is called saturated when the base-collector junction
#: current exceeds this fraction of the base-emitter one (V_CE ≲ 4.6 V_T).
SATURATION_FRACTION: Final = 0.01
#: Initial guess of the collector current for Newton's starting point, A.
GUESS_CURRENT: Final = 1e-3


class Region(str, Enum):
    ACTIVE = "active"
    SATURATION = "saturation"
    CUTOFF = "cut-off"


class DCConvergenceError(DesignError, ArithmeticError):
    """Newton's method found no operating point."""


@dataclass(frozen=True)
class OperatingPoint:
    """Transistor operating point, SI units (V, A, W)."""

    VB: float
    VE: float
    VC: float
    IC: float
    IB: float
    VCE: float
    VBE: float
    P_device: float
    region: Region
    state: JunctionState
    x: np.ndarray


def _pnjlim(v_new: float, v_old: float, VT: float, v_crit: float) -> float:
    """SPICE's junction-voltage limiting (Nagel, SPICE2 thesis, 1975; from memory)."""
    if v_new > v_crit and abs(v_new - v_old) > 2.0 * VT:
        if v_old > 0:
            arg = 1.0 + (v_new - v_old) / VT
            return v_old + VT * math.log(arg) if arg > 0 else v_crit
        # (v_crit < 0 only for absurdly large I_S, as the describing function may try)
        return VT * math.log(v_new / VT) if v_new > 0 else v_new
    return v_new


def _newton(system: LinearSystem, x0: np.ndarray, scale: float) -> np.ndarray | None:
    lay = system.layout
    x = x0.copy()
    for _ in range(MAX_NEWTON):
        F, J = nonlinear_residual(system, x, scale)
        try:
            dx = -np.linalg.solve(J, F)
        except np.linalg.LinAlgError:
            return None
        alpha = 1.0
        for dev in system.devices:
            alpha = min(alpha, _junction_damping(lay, dev, x, dx))
        x = x + alpha * dx
        if not np.all(np.isfinite(x)):
            return None
        if alpha == 1.0 and np.all(np.abs(dx) <= STEP_TOL + REL_TOL * np.abs(x)):
            return x
    return None


def _junction_damping(lay, dev: NPN, x: np.ndarray, dx: np.ndarray) -> float:
    p = dev.params
    v_crit = p.VT * math.log(p.VT / (math.sqrt(2.0) * p.IS))
    vbe0, vce0 = device_voltages(lay, dev, x)
    vbe1, vce1 = device_voltages(lay, dev, x + dx)
    alpha = 1.0
    for v_old, v_new in ((vbe0, vbe1), (vbe0 - vce0, vbe1 - vce1)):
        v_lim = _pnjlim(v_new, v_old, p.VT, v_crit)
        if v_lim != v_new and v_new != v_old:
            alpha = min(alpha, max((v_lim - v_old) / (v_new - v_old), 1e-3))
    return alpha


def _initial_guess(system: LinearSystem) -> np.ndarray:
    """Linear solution without the transistors, emitters put one junction drop below the base."""
    x = np.linalg.solve(system.G, system.b)
    lay = system.layout
    for dev in system.devices:
        p = dev.params
        vbe = p.VT * math.log(GUESS_CURRENT / p.IS)
        vb = float(lay.v(x, dev.b))
        if dev.e in lay.node:
            x[lay.node[dev.e]] = vb - vbe
    return x


def solve_dc(system: LinearSystem, x0: np.ndarray | None = None) -> np.ndarray:
    """Node voltages and branch currents at DC.

    Raises
    ------
    DCConvergenceError
        If neither plain Newton nor source stepping converges.
    """
    start = _initial_guess(system) if x0 is None else x0
    x = _newton(system, start, 1.0)
    if x is not None:
        return x
    x = np.zeros(system.layout.size)
    for scale in SOURCE_STEPS:
        step = _newton(system, x, scale)
        if step is None:
            raise DCConvergenceError(f"no DC operating point found (source step {scale:g})")
        x = step
    return x


def operating_point(system: LinearSystem, x: np.ndarray) -> OperatingPoint:
    """Describe the (single) transistor's operating point in solution ``x``."""
    lay = system.layout
    dev = system.devices[0]
    st = device_state(lay, dev, x)
    vbe, vce = device_voltages(lay, dev, x)
    if st.I_F < CUTOFF_CURRENT:
        region = Region.CUTOFF
    elif st.I_R > SATURATION_FRACTION * st.I_F:
        region = Region.SATURATION
    else:
        region = Region.ACTIVE
    return OperatingPoint(
        VB=float(lay.v(x, dev.b)),
        VE=float(lay.v(x, dev.e)),
        VC=float(lay.v(x, dev.c)),
        IC=st.IC,
        IB=st.IB,
        VCE=vce,
        VBE=vbe,
        P_device=st.IC * vce + st.IB * vbe,
        region=region,
        state=st,
        x=x,
    )
