"""One design taken through netlist, DC point, linearisation and loop search.

This is the step every analysis shares: the full analysis, the threshold
finder, sweeps and the budget all start from a :class:`Solved` design.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ringwise.analysis.dc import OperatingPoint, operating_point, solve_dc
from ringwise.analysis.loop import LoopFigures, find_oscillation
from ringwise.circuit.mna import LinearSystem, SmallSignal, assemble, small_signal
from ringwise.circuit.netlist import Netlist
from ringwise.circuit.npn import HybridPi, hybrid_pi
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


def solve(design: Design, x0: np.ndarray | None = None, f_guess: float | None = None) -> Solved:
    """Build, bias and linearise ``design`` and find its oscillation frequency.

    ``x0`` (a DC solution of a neighbouring design) and ``f_guess`` speed up
    repeated solves in sweeps and root searches.
    """
    netlist = build(design)
    system = assemble(netlist)
    if x0 is not None and x0.shape != (system.layout.size,):
        x0 = None
    x = solve_dc(system, x0)
    op = operating_point(system, x)
    hp = hybrid_pi(op.state, design.device.fT, design.device.C_mu)
    ss = small_signal(system, hp)
    tank = tank_figures(design)
    loop = find_oscillation(ss, tank.f_ideal, f_guess)
    return Solved(design, netlist, system, op, hp, ss, tank, loop)
