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
from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.analysis.criteria import Region, region_of
from ringwise.circuit.mna import (
    Incidence,
    LinearSystem,
    device_currents,
    incidence_of,
    residual_and_device,
)
from ringwise.circuit.netlist import NPNParams
from ringwise.circuit.npn import JunctionState
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

#: Newton stops when no unknown moves more than this (V or A) ...
STEP_TOL: Final = 1e-10
#: ... relative to its size.
REL_TOL: Final = 1e-9
MAX_NEWTON: Final = 100
SOURCE_STEPS: Final = (0.05, 0.1, 0.2, 0.35, 0.5, 0.7, 0.85, 1.0)
#: Initial guess of the collector current for Newton's starting point, A.
GUESS_CURRENT: Final = 1e-3
#: Smallest fraction of a Newton step that junction limiting may leave.
MIN_DAMPING: Final = 1e-3


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


def _pnjlim(v_new, v_old, VT, v_crit) -> np.ndarray:
    """SPICE's junction-voltage limiting, elementwise (Nagel, SPICE2 thesis, 1975; from memory)."""
    v_new = np.asarray(v_new, dtype=float)
    limit = (v_new > v_crit) & (np.abs(v_new - v_old) > 2.0 * VT)
    with np.errstate(invalid="ignore", divide="ignore"):
        arg = 1.0 + (v_new - v_old) / VT
        from_old = np.where(arg > 0, v_old + VT * np.log(np.where(arg > 0, arg, 1.0)), v_crit)
        # (v_crit < 0 only for absurdly large I_S, as the describing function may try)
        from_zero = np.where(v_new > 0, VT * np.log(np.where(v_new > 0, v_new, 1.0) / VT), v_new)
    return np.where(limit, np.where(v_old > 0, from_old, from_zero), v_new)


def _damping(inc: Incidence, params: NPNParams, x: np.ndarray, dx: np.ndarray) -> np.ndarray:
    """Step fraction per member that keeps both junctions within ``pnjlim``."""
    VT, IS = params.VT, params.IS
    v_crit = VT * np.log(VT / (np.sqrt(2.0) * IS))
    vbe0, vce0 = x @ inc.W_BE, x @ inc.W_CE
    vbe1, vce1 = vbe0 + dx @ inc.W_BE, vce0 + dx @ inc.W_CE
    alpha = np.ones(x.shape[0])
    for v_old, v_new in ((vbe0, vbe1), (vbe0 - vce0, vbe1 - vce1)):
        v_lim = _pnjlim(v_new, v_old, VT, v_crit)
        moved = (v_lim != v_new) & (v_new != v_old)
        with np.errstate(invalid="ignore", divide="ignore"):
            frac = np.maximum((v_lim - v_old) / (v_new - v_old), MIN_DAMPING)
        alpha = np.where(moved, np.minimum(alpha, frac), alpha)
    return alpha


def _newton(
    system: LinearSystem, inc: Incidence, params: NPNParams, x: np.ndarray, scale: float
) -> np.ndarray:
    """Damped Newton for every member of ``x`` (B, n), updated in place; returns converged (B,)."""
    B = x.shape[0]
    G = np.broadcast_to(system.G, (B, *system.G.shape[-2:]))
    b = np.broadcast_to(system.b, x.shape)
    todo = np.arange(B)
    ok = np.zeros(B, dtype=bool)
    sub = LinearSystem(system.layout, G, system.C, b, system.devices)
    for _ in range(MAX_NEWTON):
        if todo.size == 0:
            break
        p = _take(params, todo) if todo.size < B else params
        part = dataclasses.replace(sub, G=G[todo], b=b[todo]) if todo.size < B else sub
        xt = x[todo]
        F, J, _d = residual_and_device(part, inc, xt, scale, p)
        try:
            dx = -np.linalg.solve(J, F[..., None])[..., 0]
        except np.linalg.LinAlgError:
            dx = _solve_each(J, F)
        alpha = _damping(inc, p, xt, dx)
        xt = xt + alpha[:, None] * dx
        x[todo] = xt
        finite = np.all(np.isfinite(xt), axis=1)
        done = (alpha == 1.0) & np.all(np.abs(dx) <= STEP_TOL + REL_TOL * np.abs(xt), axis=1)
        ok[todo[done & finite]] = True
        todo = todo[~done & finite]
    return ok


def _solve_each(J: np.ndarray, F: np.ndarray) -> np.ndarray:
    """−J⁻¹F member by member, NaN for a singular member."""
    out = np.full(F.shape, np.nan)
    for i in range(F.shape[0]):
        try:
            out[i] = -np.linalg.solve(J[i], F[i])
        except np.linalg.LinAlgError:
            continue
    return out


def initial_guess(system: LinearSystem, params: NPNParams, batch: int) -> np.ndarray:
    """Linear solution without the transistor, emitter one junction drop below the base.

    The drop is V_T·ln(``GUESS_CURRENT``/I_S) per member; shape (batch, n).
    """
    G = np.broadcast_to(system.G, (batch, *system.G.shape[-2:]))
    b = np.broadcast_to(system.b, (batch, system.G.shape[-1]))
    x = np.linalg.solve(G, b[..., None])[..., 0]
    lay = system.layout
    dev = system.devices[0]
    if dev.e in lay.node:
        vbe = params.VT * np.log(GUESS_CURRENT / np.asarray(params.IS))
        x[:, lay.node[dev.e]] = lay.v(x, dev.b) - vbe
    return x


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
    member's :func:`initial_guess`).  Members whose plain Newton fails are
    solved again by source stepping from zero.
    """
    params = params or system.devices[0].params
    if batch is None:
        shapes = [np.shape(system.G)[:-2], np.shape(system.b)[:-1]]
        shapes += [np.shape(v) for v in dataclasses.astuple(params)]
        shapes.append(np.shape(x0)[:-1] if x0 is not None else ())
        batch = int(np.prod(np.broadcast_shapes(*shapes))) or 1
    inc = incidence_of(system)
    if x0 is None:
        x = initial_guess(system, params, batch)
    else:
        x = np.array(np.broadcast_to(x0, (batch, system.layout.size)), dtype=float)
    ok = _newton(system, inc, params, x, 1.0)
    stepped = ~ok
    if np.any(stepped):
        idx = np.nonzero(stepped)[0]
        G = np.broadcast_to(system.G, (batch, *system.G.shape[-2:]))[idx]
        b = np.broadcast_to(system.b, x.shape)[idx]
        sub = LinearSystem(system.layout, G, system.C, b, system.devices)
        p = _take(params, idx)
        xs = np.zeros((idx.size, system.layout.size))
        alive = np.ones(idx.size, dtype=bool)
        for scale in SOURCE_STEPS:
            live = np.nonzero(alive)[0]
            if live.size == 0:
                break
            part = dataclasses.replace(sub, G=G[live], b=b[live])
            xl = xs[live]
            alive[live] = _newton(part, inc, _take(p, live), xl, scale)
            xs[live] = xl
        x[idx] = xs
        ok[idx] = alive
    x[~ok] = np.nan
    return DCBatch(x=x, converged=ok, stepped=stepped)


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
    lay = system.layout
    dev = system.devices[0]
    d = device_currents(incidence_of(system), x, params or dev.params)
    st = JunctionState(*(float(v) for v in d.junction))
    vbe, vce = float(d.vbe), float(d.vce)
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
