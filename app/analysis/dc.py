"""DC operating point: Newton's method on the nonlinear nodal equations, batched.

Capacitors are open and inductors are shorts (through their loss resistance)
simply because the MNA matrices are taken at s = 0.  Newton steps are damped
so that no junction voltage jumps by more than SPICE's ``pnjlim`` rule would
allow; a member whose plain Newton fails has its supply ramped up in steps
(source stepping).  Every member of a batch is solved on its own terms: its
own damping, its own convergence test, its own source stepping; a converged
member is no longer touched, so a batch of N gives the N answers of N
single solves.  One design is a batch of one.

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

import numpy as np

from ringwise.analysis.criteria import Region, region_of
from ringwise.circuit.mna import (
    LinearSystem,
    Reduced,
    incidence_of,
    reduce_to_controls,
)
from ringwise.circuit.netlist import NPNParams
from ringwise.circuit.npn import JunctionState, exp_and_slope_array, junction_currents
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
#: Batches up to this size run each member's Newton in float arithmetic
#: (the same iterates; a few dozen array operations per step cost more than
#: a handful of float loops up to about this size, warm or cold — measured on the
#: samples' analyses, the threshold scan of 24 points included).
SCALAR_BATCH: Final = 24
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


def _pnjlim(v_new: np.ndarray, v_old: np.ndarray, VT, v_crit) -> np.ndarray:
    """SPICE's junction-voltage limiting, elementwise (Nagel, SPICE2 thesis, 1975; from memory)."""
    limit = (v_new > v_crit) & (np.abs(v_new - v_old) > 2.0 * VT)
    if not limit.any():
        return v_new
    arg = 1.0 + (v_new - v_old) / VT
    from_old = np.where(arg > 0, v_old + VT * np.log(np.where(arg > 0, arg, 1.0)), v_crit)
    # (v_crit < 0 only for absurdly large I_S, as the describing function may try)
    from_zero = np.where(v_new > 0, VT * np.log(np.where(v_new > 0, v_new, VT) / VT), v_new)
    return np.where(limit, np.where(v_old > 0, from_old, from_zero), v_new)


def _limited_fraction(v_old, step, VT, v_crit) -> np.ndarray:
    """Fraction of a step on one junction voltage that ``pnjlim`` allows (1 when none)."""
    v_new = v_old + step
    v_lim = _pnjlim(v_new, v_old, VT, v_crit)
    moved = (v_lim != v_new) & (step != 0.0)
    if not moved.any():
        return np.ones(np.shape(v_new))
    frac = np.maximum((v_lim - v_old) / np.where(moved, step, 1.0), MIN_DAMPING)
    return np.where(moved, frac, 1.0)


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


def _newton(red: Reduced, params: NPNParams, v: np.ndarray, scale: float, todo: np.ndarray):
    """Damped Newton on v + M·φ(v) = s·a for the members in ``todo`` (a boolean mask).

    ``v`` (B, 2) holds (v_BE, v_CE) and is updated in place; returns the mask
    of members that converged.  Members outside ``todo`` are not touched, so
    each member's iterates are those of its own single solve.
    """
    IS, beta, beta_R, VA, VT = params.IS, params.beta, params.beta_R, params.VA, params.VT
    v_crit = VT * np.log(VT / (SQRT2 * IS))
    m00, m01 = red.M[:, 0, 0], red.M[:, 0, 1]
    m10, m11 = red.M[:, 1, 0], red.M[:, 1, 1]
    a0, a1 = scale * red.a[:, 0], scale * red.a[:, 1]
    vbe, vce = v[:, 0].copy(), v[:, 1].copy()
    ok = np.zeros(len(vbe), dtype=bool)
    live = todo.copy()
    for _ in range(MAX_NEWTON):
        if not live.any():
            break
        q = junction_currents(vbe, vce, IS, beta, beta_R, VA, VT, exp_and_slope_array)
        with np.errstate(divide="ignore", invalid="ignore"):
            d_be, d_ce, _det = _newton_step(vbe, vce, q, m00, m01, m10, m11, a0, a1)
        # Junction limiting on v_BE and v_BC = v_BE − v_CE, one fraction per member.
        alpha = np.minimum(
            _limited_fraction(vbe, d_be, VT, v_crit),
            _limited_fraction(vbe - vce, d_be - d_ce, VT, v_crit),
        )
        new_be = vbe + alpha * d_be
        new_ce = vce + alpha * d_ce
        finite = np.isfinite(new_be) & np.isfinite(new_ce)
        vbe = np.where(live, new_be, vbe)
        vce = np.where(live, new_ce, vce)
        small = (np.abs(d_be) <= STEP_TOL + REL_TOL * np.abs(vbe)) & (
            np.abs(d_ce) <= STEP_TOL + REL_TOL * np.abs(vce)
        )
        done = live & finite & (alpha == 1.0) & small
        ok |= done
        live &= finite & ~done
    v[:, 0] = np.where(todo, vbe, v[:, 0])
    v[:, 1] = np.where(todo, vce, v[:, 1])
    return ok


def _pnjlim_one(v_new: float, v_old: float, VT: float, v_crit: float) -> float:
    """:func:`_pnjlim` for one junction, in float arithmetic."""
    if v_new > v_crit and abs(v_new - v_old) > 2.0 * VT:
        if v_old > 0:
            arg = 1.0 + (v_new - v_old) / VT
            return v_old + VT * math.log(arg) if arg > 0 else v_crit
        return VT * math.log(v_new / VT) if v_new > 0 else v_new
    return v_new


def _fraction_one(v_old: float, step: float, VT: float, v_crit: float) -> float:
    v_new = v_old + step
    v_lim = _pnjlim_one(v_new, v_old, VT, v_crit)
    if v_lim == v_new or step == 0.0:
        return 1.0
    return max((v_lim - v_old) / step, MIN_DAMPING)


def _newton_floats(
    device: tuple[float, ...], M: list[list[float]], a: tuple[float, float], v: list[float]
) -> tuple[bool, tuple[float, float]] | None:
    """:func:`_newton` for one member in float arithmetic, from ``v`` = [v_BE, v_CE]:
    the same iterates without array overhead (the pipeline's one scalar fast path, for
    small batches).  Returns whether it converged and the last finite iterate
    (``None`` when the first step already fails)."""
    IS, beta, beta_R, VA, VT = device
    v_crit = VT * math.log(VT / (SQRT2 * IS))
    (m00, m01), (m10, m11) = M
    a0, a1 = a
    vbe, vce = v
    last = None
    for _ in range(MAX_NEWTON):
        try:
            q = junction_currents(vbe, vce, IS, beta, beta_R, VA, VT)
        except OverflowError:
            return None if last is None else (False, last)
        try:
            d_be, d_ce, det = _newton_step(vbe, vce, q, m00, m01, m10, m11, a0, a1)
        except ZeroDivisionError:
            return None if last is None else (False, last)
        if not math.isfinite(det):
            return None if last is None else (False, last)
        alpha = min(
            _fraction_one(vbe, d_be, VT, v_crit),
            _fraction_one(vbe - vce, d_be - d_ce, VT, v_crit),
        )
        vbe += alpha * d_be
        vce += alpha * d_ce
        if not (math.isfinite(vbe) and math.isfinite(vce)):
            return None if last is None else (False, last)
        last = (vbe, vce)
        if (
            alpha == 1.0
            and abs(d_be) <= STEP_TOL + REL_TOL * abs(vbe)
            and abs(d_ce) <= STEP_TOL + REL_TOL * abs(vce)
        ):
            return True, last
    return False, last


def _solve_controls(red: Reduced, params: NPNParams, v: np.ndarray, scale: float, todo):
    """Newton for the members in ``todo``: float arithmetic, member by member, for a
    batch of at most :data:`SCALAR_BATCH`."""
    B = len(v)
    if B > SCALAR_BATCH:
        return _newton(red, params, v, scale, todo)
    # every member's numbers as Python floats at once (not element by element)
    fields = (params.IS, params.beta, params.beta_R, params.VA, params.VT)
    columns = [[float(p)] * B if np.ndim(p) == 0 else np.asarray(p, float).tolist() for p in fields]
    Ms = red.M.tolist()
    As = (scale * red.a).tolist()
    starts = v.tolist()
    ok = np.zeros(B, dtype=bool)
    for i in range(B):
        if not todo[i]:
            continue
        device = tuple(c[i] for c in columns)
        found = _newton_floats(device, Ms[i], (As[i][0], As[i][1]), starts[i])
        if found is not None:
            ok[i], (v[i, 0], v[i, 1]) = found
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
