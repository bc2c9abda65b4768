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
from ringwise.analysis.stepper import dynamic_unknowns, varactor_remainder
from ringwise.analysis.transient import transient_system
from ringwise.circuit.mna import LinearSystem, nonlinear_residual
from ringwise.circuit.topologies import T1
from ringwise.design import Design


def integrate_reference(
    system: LinearSystem,
    x0: np.ndarray,
    t_end: float,
    t_eval: np.ndarray,
    rtol: float = 1e-7,
    method: str = "Radau",
) -> np.ndarray:
    """Full states (len(t_eval), n) from ``x0`` by ``solve_ivp`` on the circuit's equations."""
    dyn = dynamic_unknowns(system.C, system.G)
    Cdd_inv = np.linalg.inv(system.C[np.ix_(dyn, dyn)])
    x_full = x0.copy()
    # each varactor's charge law in its branch row (the stepper's own remainder function)
    laws = [(system.layout.branch[el.name], varactor_remainder(el)) for el in system.varactors]

    def residual(xd: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x_full[dyn] = xd
        F, J = nonlinear_residual(system, x_full)
        for k, law in laws:
            value, slope = law(float(x_full[k]))
            F[k] -= value
            J[k, k] -= slope
        return F, J

    def rhs(_t: float, xd: np.ndarray) -> np.ndarray:
        return -Cdd_inv @ residual(xd)[0][dyn]

    def jac(_t: float, xd: np.ndarray) -> np.ndarray:
        return -Cdd_inv @ residual(xd)[1][np.ix_(dyn, dyn)]

    sol = solve_ivp(
        rhs, (0.0, t_end), x0[dyn], method=method, jac=jac, rtol=rtol,
        atol=1e-9, t_eval=t_eval,
    )  # fmt: skip
    if not sol.success:  # pragma: no cover - reported, not expected
        raise ArithmeticError(f"reference solver failed: {sol.message}")
    full = np.repeat(x0[None, :], len(sol.t), axis=0)
    full[:, dyn] = sol.y.T
    return full


def reference_run(
    design: Design, cycles: float, rtol: float = 1e-7, samples_per_cycle: int = 64
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, float]:
    """t, tank voltage, base voltage, emitter voltage, and f_ref by Radau on the same equations."""
    solved = solve(design)
    system, x0 = transient_system(solved)
    lay = system.layout
    f_ref = solved.f_osc or solved.tank.f_ideal
    t_end = cycles / f_ref
    t = np.linspace(0.0, t_end, int(cycles * samples_per_cycle) + 1)
    full = integrate_reference(system, x0, t_end, t, rtol)
    i_out, i_b, i_e = lay.node[T1], lay.node["b"], lay.node["e"]
    return t, full[:, i_out], full[:, i_b], full[:, i_e], f_ref
