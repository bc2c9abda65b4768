"""DC operating point: Newton's method on the nonlinear nodal equations, batched.

Capacitors are open and inductors are shorts (through their loss resistance)
simply because the MNA matrices are taken at s = 0.  Newton steps are damped
so that no junction voltage jumps by more than SPICE's ``pnjlim`` rule would
allow; a member whose plain Newton fails has its supply ramped up in steps
(source stepping).  Every member of a batch is solved on its own terms: its
own damping, its own convergence test, its own source stepping; a converged
member is no longer touched, so a batch of N gives the N answers of N
single solves.  One design is a batch of one.  The Newton iteration runs
member by member in compiled floats (:func:`_newton_members`).

References
----------
L. W. Nagel, *SPICE2: A Computer Program to Simulate Semiconductor
Circuits*, UC Berkeley ERL-M520, 1975 (junction limiting, source stepping),
from memory.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Final

import numba
import numpy as np
from numba.extending import register_jitable

from ringwise.analysis.criteria import Region, region_of
from ringwise.circuit.mna import (
    LinearSystem,
    Reduced,
    incidence_of,
    reduce_to_controls,
)
from ringwise.circuit.netlist import NPNParams
from ringwise.circuit.npn import (
    JunctionState,
    _exp_and_slope,
    exp_and_slope_array,
    junction_currents,
)
from ringwise.errors import DesignError

__all__ = [
    "DCBatch",
    "DCConvergenceError",
    "OperatingPoint",
    "Region",
    "operating_point",
    "solve_dc",
    "solve_dc_batch",
]

#: Newton stops when neither control voltage moves more than this (V) ...
STEP_TOL: Final = 1e-10
#: ... relative to its size.
REL_TOL: Final = 1e-9
MAX_NEWTON: Final = 100
SOURCE_STEPS: Final = (0.05, 0.1, 0.2, 0.35, 0.5, 0.7, 0.85, 1.0)
#: Initial guess of the collector current for Newton's starting point, A.
GUESS_CURRENT: Final = 1e-3
#: Smallest fraction of a Newton step that junction limiting may leave.
MIN_DAMPING: Final = 1e-3
SQRT2: Final = 2.0**0.5


class DCConvergenceError(DesignError, ArithmeticError):
    """Newton's method found no operating point."""


@dataclass(frozen=True)
class DCBatch:
    """DC solutions of a batch: ``x`` (B, n), ``converged`` (B,), and the device there.

    Members that did not converge hold NaN in ``x``.
    """

    x: np.ndarray
    converged: np.ndarray
    stepped: np.ndarray  # (B,) True where source stepping was needed


def _take(params: NPNParams, idx: np.ndarray) -> NPNParams:
    """The parameters of the members ``idx`` (scalar fields are shared)."""
    return NPNParams(
        *(np.asarray(v)[idx] if np.ndim(v) else v for v in dataclasses.astuple(params))
    )


def _newton_step(vbe, vce, q: JunctionState, m00, m01, m10, m11, a0, a1):
    """The Newton step (d_BE, d_CE) of v + M·φ(v) = a at v, and the Jacobian's determinant.

    The Jacobian is I + M·Jφ with Jφ = [[dIC/dvbe, dIC/dvce], [dIB/dvbe, dIB/dvce]];
    floats for one circuit, arrays for a batch.
    """
    g0 = vbe + m00 * q.IC + m01 * q.IB - a0
    g1 = vce + m10 * q.IC + m11 * q.IB - a1
    j00 = 1.0 + m00 * q.dIC_dvbe + m01 * q.dIB_dvbe
    j01 = m00 * q.dIC_dvce + m01 * q.dIB_dvce
    j10 = m10 * q.dIC_dvbe + m11 * q.dIB_dvbe
    j11 = 1.0 + m10 * q.dIC_dvce + m11 * q.dIB_dvce
    det = j00 * j11 - j01 * j10
    return -(g0 * j11 - g1 * j01) / det, -(j00 * g1 - j10 * g0) / det, det


@register_jitable
def _pnjlim_one(v_new: float, v_old: float, VT: float, v_crit: float) -> float:
    """SPICE's junction-voltage limiting for one junction, in float arithmetic
    (Nagel, SPICE2 thesis, 1975; from memory)."""
    if v_new > v_crit and abs(v_new - v_old) > 2.0 * VT:
        if v_old > 0:
            arg = 1.0 + (v_new - v_old) / VT
            return v_old + VT * math.log(arg) if arg > 0 else v_crit
        return VT * math.log(v_new / VT) if v_new > 0 else v_new
    return v_new


@register_jitable
def _fraction_one(v_old: float, step: float, VT: float, v_crit: float) -> float:
    v_new = v_old + step
    v_lim = _pnjlim_one(v_new, v_old, VT, v_crit)
    if v_lim == v_new or step == 0.0:
        return 1.0
    return max((v_lim - v_old) / step, MIN_DAMPING)


#: The device equations, the Newton step and the junction limiting compiled
#: from their one source for :func:`_newton_members` (no second copy: the
#: Python functions stay what every other caller uses).
_exp_slope = numba.njit(cache=True, error_model="numpy")(_exp_and_slope)
_junction = numba.njit(cache=True, error_model="numpy")(junction_currents)
_step = numba.njit(cache=True, error_model="numpy")(_newton_step)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _newton_members(IS, beta, beta_R, VA, VT, M, a, v, todo, ok) -> None:
    """Damped Newton on v + M·φ(v) = a for every member i with ``todo[i]``, from
    v[i] = (v_BE, v_CE), in float arithmetic member by member (compiled).

    Device parameters, ``M`` (B, 2, 2), ``a`` (B, 2) and ``v`` (B, 2) are per
    member; ``v`` is updated in place to the last finite iterate (left as it
    was when the first step already fails) and ``ok`` set where it converged.
    Junction limiting (SPICE's ``pnjlim``) on v_BE and v_BC = v_BE − v_CE, one
    damping fraction per step; a singular Jacobian or a non-finite iterate
    ends the member's iteration.  The device equations and the step are
    :func:`ringwise.circuit.npn.junction_currents` and :func:`_newton_step`
    themselves, compiled.
    """
    for i in range(v.shape[0]):
        if not todo[i]:
            continue
        vt = VT[i]
        v_crit = vt * math.log(vt / (SQRT2 * IS[i]))
        m00, m01, m10, m11 = M[i, 0, 0], M[i, 0, 1], M[i, 1, 0], M[i, 1, 1]
        a0, a1 = a[i, 0], a[i, 1]
        vbe, vce = v[i, 0], v[i, 1]
        for _ in range(MAX_NEWTON):
            q = _junction(vbe, vce, IS[i], beta[i], beta_R[i], VA[i], vt, _exp_slope)
            d_be, d_ce, det = _step(vbe, vce, q, m00, m01, m10, m11, a0, a1)
            if det == 0.0 or not math.isfinite(det):
                break
            alpha = min(
                _fraction_one(vbe, d_be, vt, v_crit),
                _fraction_one(vbe - vce, d_be - d_ce, vt, v_crit),
            )
            vbe += alpha * d_be
            vce += alpha * d_ce
            if not (math.isfinite(vbe) and math.isfinite(vce)):
                break
            v[i, 0], v[i, 1] = vbe, vce
            if (
                alpha == 1.0
                and abs(d_be) <= STEP_TOL + REL_TOL * abs(vbe)
                and abs(d_ce) <= STEP_TOL + REL_TOL * abs(vce)
            ):
                ok[i] = True
                break


def _solve_controls(red: Reduced, params: NPNParams, v: np.ndarray, scale: float, todo):
    """Newton (:func:`_newton_members`) for the members in ``todo``; returns the
    mask of those that converged."""
    B = len(v)
    fields = (params.IS, params.beta, params.beta_R, params.VA, params.VT)
    IS, beta, beta_R, VA, VT = (
        np.ascontiguousarray(np.broadcast_to(np.asarray(p, dtype=float), (B,))) for p in fields
    )
    ok = np.zeros(B, dtype=bool)
    a = np.ascontiguousarray(scale * red.a)
    M = np.ascontiguousarray(red.M, dtype=float)
    _newton_members(IS, beta, beta_R, VA, VT, M, a, v, np.asarray(todo, dtype=bool), ok)
    return ok


def initial_controls(red: Reduced, params: NPNParams) -> np.ndarray:
    """Start (v_BE, v_CE) per member: the linear solution without the transistor, the
    emitter one junction drop V_T·ln(``GUESS_CURRENT``/I_S) below the base."""
    vbe = params.VT * np.log(GUESS_CURRENT / np.asarray(params.IS))
    vce = red.a[:, 1] - red.a[:, 0] + vbe  # v_C − v_E with v_E = v_B − v_BE
    v = np.empty((len(vce), 2))
    v[:, 0] = vbe
    v[:, 1] = vce
    return v


def solve_dc_batch(
    system: LinearSystem,
    params: NPNParams | None = None,
    x0: np.ndarray | None = None,
    batch: int | None = None,
) -> DCBatch:
    """DC solutions of a batch of circuits that differ only in values.

    ``system.G`` (B, n, n) or (n, n), ``system.b`` (B, n) or (n,);
    ``params`` the transistor's parameters, fields floats or arrays (B,)
    (default: the netlist's); ``x0`` a start, (n,) or (B, n) (default: each
    member's :func:`initial_controls`).  The nodal equations are reduced to
    the transistor's two controls (:func:`ringwise.circuit.mna.reduce_to_controls`:
    G factorised once per member, Newton's iterates unchanged); members whose
    plain Newton fails are solved again by source stepping from zero.
    """
    params = params or system.devices[0].params
    n = system.layout.size
    if batch is None:
        shapes = [np.shape(system.G)[:-2], np.shape(system.b)[:-1]]
        shapes += [np.shape(v) for v in dataclasses.astuple(params)]
        shapes.append(np.shape(x0)[:-1] if x0 is not None else ())
        batch = int(np.prod(np.broadcast_shapes(*shapes))) or 1
    inc = incidence_of(system)
    red = reduce_to_controls(
        _batch_of(system.G, (batch, n, n)), _batch_of(system.b, (batch, n)), inc
    )
    if x0 is None:
        v = initial_controls(red, params)
    else:
        v = np.array(np.broadcast_to(x0, (batch, n)) @ inc.W, dtype=float)
    ok = _solve_controls(red, params, v, 1.0, np.ones(batch, dtype=bool))
    stepped = ~ok
    if stepped.any():
        v[stepped] = 0.0
        alive = stepped.copy()
        for scale in SOURCE_STEPS:
            alive &= _solve_controls(red, params, v, scale, alive)
        ok |= alive
    q = junction_currents(
        v[:, 0], v[:, 1], params.IS, params.beta, params.beta_R, params.VA, params.VT,
        exp_and_slope_array,
    )  # fmt: skip
    x = red.y - red.K[..., 0] * q.IC[:, None] - red.K[..., 1] * q.IB[:, None]
    ok &= np.isfinite(x).all(axis=1)
    if not ok.all():
        x[~ok] = np.nan
    return DCBatch(x=x, converged=ok, stepped=stepped)


def _batch_of(a: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    """``a`` broadcast to ``shape`` (itself when it has that shape already)."""
    return a if np.shape(a) == shape else np.broadcast_to(a, shape)


def solve_dc(system: LinearSystem, x0: np.ndarray | None = None) -> np.ndarray:
    """Node voltages and branch currents at DC of one circuit (a batch of one).

    Raises
    ------
    DCConvergenceError
        If neither plain Newton nor source stepping converges.
    """
    found = solve_dc_batch(system, x0=x0, batch=1)
    if not found.converged[0]:
        raise DCConvergenceError("no DC operating point found (Newton and source stepping failed)")
    return found.x[0]


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


def operating_point(
    system: LinearSystem, x: np.ndarray, params: NPNParams | None = None
) -> OperatingPoint:
    """Describe the (single) transistor's operating point in solution ``x`` (n,)."""
    p = params or system.devices[0].params
    inc = incidence_of(system)
    vbe, vce = float(x @ inc.W_BE), float(x @ inc.W_CE)
    # Float arithmetic (the transport model for one transistor): an absurd
    # trial device overflows to inf quietly, as a single number should.
    st = junction_currents(vbe, vce, p.IS, p.beta, p.beta_R, p.VA, p.VT)
    return operating_point_from(system, x, st, vbe, vce)


def operating_point_from(
    system: LinearSystem, x: np.ndarray, st: JunctionState, vbe: float, vce: float
) -> OperatingPoint:
    """The operating point of solution ``x`` whose device state is already known."""
    lay, dev = system.layout, system.devices[0]
    return OperatingPoint(
        VB=float(lay.v(x, dev.b)),
        VE=float(lay.v(x, dev.e)),
        VC=float(lay.v(x, dev.c)),
        IC=st.IC,
        IB=st.IB,
        VCE=vce,
        VBE=vbe,
        P_device=st.IC * vce + st.IB * vbe,
        region=region_of(st.I_F, st.I_R),
        state=st,
        x=x,
    )
