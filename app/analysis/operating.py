"""One design taken through the pipeline: netlist, DC point, linearisation, loop search.

This is the step every single-design analysis shares: the full analysis,
the budget, the poles and the checks start from a :class:`Solved` design.
It is the batch pipeline (:mod:`ringwise.analysis.pipeline`) run on a batch
of one, with the member's figures unpacked as plain numbers.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ringwise.analysis.dc import DCConvergenceError, OperatingPoint, operating_point_from
from ringwise.analysis.loop import LoopFigures
from ringwise.analysis.pipeline import (
    BatchSolution,
    changed_values,
    part_values,
    patterns_of_structure,
    solve_designs,
    solve_values,
)
from ringwise.circuit.mna import LinearSystem, SmallSignal
from ringwise.circuit.netlist import NPN, Netlist, NPNParams
from ringwise.circuit.npn import HybridPi, JunctionState
from ringwise.circuit.topologies import TankFigures, build, tank_figures
from ringwise.design import Design


@dataclass(frozen=True)
class Solved:
    """A design with its circuit, operating point and loop figures."""

    design: Design
    netlist: Netlist
    system: LinearSystem
    op: OperatingPoint
    hybrid: HybridPi
    ss: SmallSignal
    tank: TankFigures
    loop: LoopFigures

    @property
    def f_osc(self) -> float | None:
        f = float(self.loop.f_osc)
        return f if np.isfinite(f) else None

    @property
    def VT(self) -> float:
        """Thermal voltage at the design temperature, V."""
        return self.system.devices[0].params.VT

    @property
    def gain(self) -> float:
        """|T(f_osc)|, or 0 when the loop has no zero-phase crossing."""
        g = float(self.loop.gain)
        return g if np.isfinite(g) else 0.0


def member(sol: BatchSolution, i: int, design: Design, netlist: Netlist | None = None) -> Solved:
    """Member ``i`` of a batch solution as a :class:`Solved` design (floats, not arrays).

    Raises
    ------
    DCConvergenceError
        If that member's DC solve did not converge.
    """
    if not sol.converged[i]:
        raise DCConvergenceError("no DC operating point found (Newton and source stepping failed)")
    dev = sol.system.devices[0]
    params = NPNParams(
        *(float(np.asarray(v).reshape(-1)[i % np.size(v)]) for v in _fields(sol.params))
    )
    system = LinearSystem(
        sol.system.layout,
        sol.system.G[i],
        sol.system.C[i],
        sol.system.b[i],
        (NPN(dev.name, dev.c, dev.b, dev.e, params),),
    )
    op = operating_point_of(sol, i, system)
    h = sol.hybrid
    hp = HybridPi(
        gm=float(h.gm[i]),
        g_pi=float(h.g_pi[i]),
        g_o=float(h.g_o[i]),
        g_r=float(h.g_r[i]),
        C_pi=float(h.C_pi[i]),
        C_mu=float(h.C_mu[i]),
    )
    ss = SmallSignal(sol.ss.layout, sol.ss.G[i], sol.ss.C[i], hp.gm, sol.ss.u, sol.ss.w, hp)
    lp = sol.loop
    loop = LoopFigures(
        *(
            np.asarray(a[i])
            for a in (lp.f_osc, lp.T, lp.gain, lp.phase_slope, lp.Q_loaded, lp.Z_out, lp.dT_ds)
        )
    )
    return Solved(design, netlist or build(design), system, op, hp, ss, tank_figures(design), loop)


def operating_point_of(sol: BatchSolution, i: int, system: LinearSystem) -> OperatingPoint:
    """Member ``i``'s operating point from the batch's own device figures."""
    st = JunctionState(*(float(v[i]) for v in sol.junction))
    return operating_point_from(system, sol.x[i], st, float(sol.vbe[i]), float(sol.vce[i]))


def _fields(params: NPNParams) -> tuple:
    return (params.IS, params.beta, params.beta_R, params.VA, params.VT, params.fT, params.C_mu)


def solve(design: Design, x0: np.ndarray | None = None, f_guess: float | None = None) -> Solved:
    """Build, bias and linearise ``design`` and find its oscillation frequency.

    ``x0`` (a DC solution of a neighbouring design) and ``f_guess`` speed up
    repeated solves in sweeps and root searches.
    """
    netlist = build(design)
    sol = solve_designs([design], x0, f_guess)
    if x0 is not None and not sol.converged[0]:
        sol = solve_designs([design])
    return member(sol, 0, design, netlist)


def solve_with(
    design: Design, changes: Sequence[Mapping[str, float | None]]
) -> tuple[Solved, BatchSolution]:
    """:func:`solve`, with designs of the same structure (``changes`` of its part
    values) solved in the same batch as members 1 … (the design itself is
    member 0: its figures are those of :func:`solve`).

    Raises
    ------
    DCConvergenceError
        If the design's own DC solve did not converge.
    """
    if not changes:
        sol = solve_designs([design])
    else:
        values = changed_values(part_values(design), [{}, *changes])
        sol = solve_values(patterns_of_structure(design), values, 1 + len(changes))
    return member(sol, 0, design), sol
