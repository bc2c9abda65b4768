"""The transient's equations handed to SciPy's general-purpose solver, as a reference.

The DAE C·ẋ + f(x) = 0 of :mod:`ringwise.analysis.transient` becomes an ODE once
the supply nodes and supply currents (fixed by the supply) are taken out: every
other unknown of these circuits has a capacitor or the coil in its row, so
the remaining block of C is invertible.  ``scipy.integrate.solve_ivp`` with
the Radau method then integrates it.  Used by ``make bench`` and the tests;
never on the sheet's hot path.
"""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp

from ringwise.analysis.operating import solve
from ringwise.analysis.transient import transient_system
from ringwise.circuit.mna import nonlinear_residual
from ringwise.circuit.netlist import DCSupply
from ringwise.circuit.topologies import T1
from ringwise.design import Design


def reference_run(
    design: Design, cycles: float, rtol: float = 1e-7, samples_per_cycle: int = 64
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, float]:
    """t, tank voltage, base voltage, emitter voltage, and f_ref by Radau on the same equations."""
    solved = solve(design)
    system, x0 = transient_system(solved)
    lay = system.layout
    fixed = []
    for el in solved.netlist.of_kind(DCSupply):
        fixed += [lay.node[el.pos], lay.branch[el.name]]
    dyn = np.array([i for i in range(lay.size) if i not in fixed])
    Cdd_inv = np.linalg.inv(system.C[np.ix_(dyn, dyn)])
    x_full = x0.copy()

    def rhs(_t: float, xd: np.ndarray) -> np.ndarray:
        x_full[dyn] = xd
        F, _J = nonlinear_residual(system, x_full)
        return -Cdd_inv @ F[dyn]

    def jac(_t: float, xd: np.ndarray) -> np.ndarray:
        x_full[dyn] = xd
        _F, J = nonlinear_residual(system, x_full)
        return -Cdd_inv @ J[np.ix_(dyn, dyn)]

    f_ref = solved.f_osc or solved.tank.f_ideal
    t_end = cycles / f_ref
    t_eval = np.linspace(0.0, t_end, int(cycles * samples_per_cycle) + 1)
    sol = solve_ivp(
        rhs, (0.0, t_end), x0[dyn], method="Radau", jac=jac, rtol=rtol,
        atol=1e-9, t_eval=t_eval,
    )  # fmt: skip
    if not sol.success:  # pragma: no cover - reported, not expected
        raise ArithmeticError(f"reference solver failed: {sol.message}")
    full = np.repeat(x0[None, :], len(sol.t), axis=0)
    full[:, dyn] = sol.y.T
    i_out, i_b, i_e = lay.node[T1], lay.node["b"], lay.node["e"]
    return sol.t, full[:, i_out], full[:, i_b], full[:, i_e], f_ref
