r"""The trapezoidal stepper shared by the transient, the steady state and the noise runs.

The equations are the MNA ones of :mod:`ringwise.circuit.mna` with the
junction capacitances added (:func:`ringwise.analysis.transient.transient_system`):

.. math:: C\,\dot x + G\,x + P\,\varphi(W^T x) = b

where :math:`\varphi = (I_C, I_B)` is the transistor's current pair as a
function of its two controlling voltages :math:`W^T x = (v_{BE}, v_{CE})`
(and, with a varactor, its charge law on one more control).  With
:math:`A = 2C/h + G` one trapezoidal step is

.. math:: x_{n+1} = \underbrace{A^{-1}(2C/h - G)}_{B}\,x_n + 2A^{-1}b
          - A^{-1}P\,(\varphi_n + \varphi_{n+1}),

so with :math:`A^{-1}` factorised once per step size the Newton iteration
runs on the controls only (a 2×2 system; the Woodbury identity in effect),
in plain Python floats: :class:`_Stepper`.  :mod:`ringwise.analysis.transient`
drives it with a local-error control, :mod:`ringwise.analysis.steady` on a
fixed grid for the period map, :mod:`ringwise.analysis.stochastic` with noise.

References
----------
Hairer, Nørsett & Wanner, *Solving Ordinary Differential Equations I*
(trapezoidal rule: A-stable, order 2, symplectic on linear oscillators), from memory.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.circuit import varactor as junction_law
from ringwise.circuit.mna import LinearSystem, incidence
from ringwise.circuit.netlist import Varactor
from ringwise.circuit.npn import junction_currents

#: Newton on the two controlling voltages.
NEWTON_TOL: Final = 1e-10
NEWTON_MAX: Final = 50
#: Largest change of a controlling voltage per Newton iteration, V.
NEWTON_CLAMP: Final = 0.1


@dataclass(frozen=True)
class Dynamics:
    r"""The equations the stepper integrates: :math:`C\dot x + Gx + P\varphi(W^Tx) = b`.

    ``P`` and ``W`` are (n, 2): where the two nonlinear currents go and which
    two voltages control them.  ``phi(v0, v1)`` returns the two currents and
    their four partial derivatives in the order of
    :func:`ringwise.circuit.npn.junction_currents`:
    ``(i0, i1, _, _, di0/dv0, di0/dv1, di1/dv0, di1/dv1)``.  A circuit's
    dynamics come from :func:`circuit_dynamics`; the tests also hand the
    stepper other two-port nonlinearities (a cubic conductance).
    """

    C: np.ndarray
    G: np.ndarray
    b: np.ndarray
    P: np.ndarray
    W: np.ndarray
    phi: Callable[[float, float], tuple]
    #: Further one-control nonlinearities (a varactor's charge law), P's and W's
    #: columns 2, 3, …: each maps its control u to (value, slope); ``extra_scale``
    #: is each control's size per volt (1 for a varactor's charge in volts).
    extra: tuple[Callable[[float], tuple[float, float]], ...] = ()
    extra_scale: tuple[float, ...] = ()


def varactor_remainder(el: Varactor) -> Callable[[float], tuple[float, float]]:
    """The varactor's nonlinearity in its branch row as a function of its charge in
    volts u = q/C_b (C_b = C(V_bias)): V(C_b·u) − V_bias − u + q(V_bias)/C_b, and
    its slope C_b/C(V) − 1 (the linear stamps hold the rest, so it is zero with
    zero slope at the bias)."""
    args = (el.C_j0, el.phi, el.m)
    C_b, V_b = el.C_bias, el.V_bias
    u_b = float(junction_law.charge(V_b, *args)) / C_b

    def f(u: float) -> tuple[float, float]:
        V = junction_law.voltage(C_b * u, *args)
        return V - V_b - (u - u_b), C_b / junction_law.capacitance_at(V, *args) - 1.0

    return f


def circuit_dynamics(system: LinearSystem) -> Dynamics:
    """The transistor circuit as :class:`Dynamics`: φ = (I_C, I_B) of (v_BE, v_CE),
    and each varactor's charge law in its branch row (control: its charge)."""
    lay = system.layout
    dev = system.devices[0]
    missing = {dev.c, dev.b, dev.e} - set(lay.node)
    if missing:
        raise ValueError(f"transistor terminals at ground are not supported: {missing}")
    p = dev.params
    args = (p.IS, p.beta, p.beta_R, p.VA, p.VT)

    def phi(vbe: float, vce: float) -> tuple:
        return junction_currents(vbe, vce, *args)

    # the device enters as P·φ(Wᵀx): the same incidence as every other
    # analysis (mna.device_currents), reduced here to its two controls
    inc = incidence(lay, dev)
    P, W = inc.P, inc.W
    if not system.varactors:
        return Dynamics(system.C, system.G, system.b, P, W, phi)
    # the row reads … − V(q) = offset: the remainder enters with −1 in the varactor's row
    rows = np.zeros((lay.size, len(system.varactors)))
    for j, el in enumerate(system.varactors):
        rows[lay.branch[el.name], j] = 1.0
    return Dynamics(
        system.C, system.G, system.b, np.column_stack((P, -rows)), np.column_stack((W, rows)),
        phi, tuple(varactor_remainder(el) for el in system.varactors),
        tuple(1.0 for _el in system.varactors),
    )  # fmt: skip


@dataclass(frozen=True)
class StepMatrices:
    """The trapezoidal step at one step size h, factorised once.

    ``B`` = A⁻¹(2C/h − G) and ``c`` = 2A⁻¹b with A = 2C/h + G; ``K`` = A⁻¹P;
    ``M`` = WᵀK (2×2), the controls' response to the device currents.
    """

    B: np.ndarray
    c: np.ndarray
    K: np.ndarray
    M: np.ndarray
    Ainv: np.ndarray


def dynamic_unknowns(C: np.ndarray, G: np.ndarray) -> np.ndarray:
    """Indices of the unknowns that carry a state.

    An unknown carries a state when a capacitor or the coil touches it and no
    supply pins it: a row without C whose G part names one unknown alone
    (v_+ = V) fixes that unknown.  The others (the supply nodes and the
    supplies' currents) follow from the supply; ``C`` restricted to the
    dynamic unknowns is invertible in every form.
    """
    no_c = ~np.any(C != 0.0, axis=1)
    pinned = [int(np.flatnonzero(G[k])[0]) for k in np.flatnonzero(no_c)
              if np.count_nonzero(G[k]) == 1]  # fmt: skip
    touched = np.any(C != 0.0, axis=0) | np.any(C != 0.0, axis=1)
    touched[pinned] = False
    return np.flatnonzero(touched)


class _Stepper:
    """Trapezoidal steps with the factorisation kept per step size."""

    def __init__(self, dyn: Dynamics) -> None:
        self.dyn = dyn
        self.phi = dyn.phi
        self.Wt = np.ascontiguousarray(dyn.W.T)
        self._cache: dict[float, tuple] = {}
        self.extra = dyn.extra
        if self.extra:
            self.phi = self._phi_all

    def controls(self, x: np.ndarray) -> tuple:
        """The controls of state x: (v_BE, v_CE), then each further nonlinearity's."""
        v = (self.Wt @ x).tolist()
        return tuple(v) if self.extra else (v[0], v[1])

    def _phi_all(self, *v: float) -> tuple:
        """The transistor's tuple, then (value, slope) of each further nonlinearity."""
        out = list(self.dyn.phi(v[0], v[1]))
        for f, u in zip(self.extra, v[2:], strict=True):
            out += f(u)
        return tuple(out)

    def unpack(self, qs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Device tuples along a trajectory (rows) as currents (…, k) and Jacobians (…, k, k)."""
        J2 = qs[:, 4:8].reshape(-1, 2, 2)
        if not self.extra:
            return qs[:, :2], J2
        k = 2 + len(self.extra)
        J = np.zeros((len(qs), k, k))
        J[:, :2, :2] = J2
        idx = np.arange(2, k)
        J[:, idx, idx] = qs[:, 9::2]
        return np.column_stack((qs[:, :2], qs[:, 8::2])), J

    def step_matrices(self, h: float) -> StepMatrices:
        d = self.dyn
        Ainv = np.linalg.inv(2.0 * d.C / h + d.G)
        K = Ainv @ d.P
        return StepMatrices(Ainv @ (2.0 * d.C / h - d.G), 2.0 * (Ainv @ d.b), K, self.Wt @ K, Ainv)

    def matrices(self, h: float) -> tuple:
        if h not in self._cache:
            sm = self.step_matrices(h)
            m = sm.M.ravel().tolist()
            self._cache[h] = (sm.B, sm.c, np.ascontiguousarray(sm.K), *m)
        return self._cache[h]

    def step(self, h: float, x: np.ndarray, v: tuple, v_prev: tuple, ph: tuple):
        """One step from state x (controls v, previous controls v_prev, device state ph)."""
        if self.extra:
            return self._step_extended(h, x, v, v_prev, ph)
        B, c, K, m00, m01, m10, m11 = self.matrices(h)
        # as few numpy calls as possible: this runs 128 times a period
        y = np.dot(B, x)
        y += c
        wy0, wy1 = np.dot(self.Wt, y).tolist()
        ic_n, ib_n = ph[0], ph[1]
        a0 = wy0 - (m00 * ic_n + m01 * ib_n)
        a1 = wy1 - (m10 * ic_n + m11 * ib_n)
        # Start Newton from the linear extrapolation of the controls, and from
        # the last controls if that does not converge.
        for vbe, vce in ((2.0 * v[0] - v_prev[0], 2.0 * v[1] - v_prev[1]), v):
            found = self._newton(vbe, vce, a0, a1, m00, m01, m10, m11)
            if found is not None:
                break
        else:
            return None
        vbe, vce, q = found
        y -= np.dot(K, np.array((ic_n + q[0], ib_n + q[1])))
        return y, (vbe, vce), q

    def _extended_matrices(self, h: float) -> StepMatrices:
        key = ("extended", h)
        if key not in self._cache:
            self._cache[key] = self.step_matrices(h)
        return self._cache[key]

    def _currents(self, ph: tuple) -> np.ndarray:
        return np.array((ph[0], ph[1], *ph[8::2]))

    def _step_extended(self, h: float, x: np.ndarray, v: tuple, v_prev: tuple, ph: tuple):
        """:meth:`step` with further nonlinearities: Newton on all k controls (a k×k solve)."""
        sm = self._extended_matrices(h)
        y = sm.B @ x + sm.c
        i_n = self._currents(ph)
        a = self.Wt @ y - sm.M @ i_n
        v_now = np.array(v)
        solve = self._newton_three if len(v) == 3 else self._newton_extended
        for start in (2.0 * v_now - np.array(v_prev), v_now):
            found = solve(start, a, sm.M)
            if found is not None:
                break
        else:
            return None
        found, q = found  # the last iterate and φ there (see :meth:`_newton`)
        x_new = y - sm.K @ (i_n + self._currents(q))
        return x_new, found, q

    def _newton_three(self, v: np.ndarray, a: np.ndarray, M: np.ndarray) -> tuple | None:
        """:meth:`_newton_extended` for three controls (one varactor), in plain floats."""
        v0, v1, v2 = v.tolist()
        a0, a1, a2 = a.tolist()
        (m00, m01, m02), (m10, m11, m12), (m20, m21, m22) = M.tolist()
        phi, f = self.dyn.phi, self.extra[0]
        clamp, tol = NEWTON_CLAMP, NEWTON_TOL
        for _ in range(NEWTON_MAX):
            q = phi(v0, v1)
            u, s = f(v2)
            c0, c1 = q[0], q[1]
            g0 = v0 + m00 * c0 + m01 * c1 + m02 * u - a0
            g1 = v1 + m10 * c0 + m11 * c1 + m12 * u - a1
            g2 = v2 + m20 * c0 + m21 * c1 + m22 * u - a2
            # I + M·Jφ, Jφ = [[q4, q5, 0], [q6, q7, 0], [0, 0, s]]
            j00 = 1.0 + m00 * q[4] + m01 * q[6]
            j01 = m00 * q[5] + m01 * q[7]
            j02 = m02 * s
            j10 = m10 * q[4] + m11 * q[6]
            j11 = 1.0 + m10 * q[5] + m11 * q[7]
            j12 = m12 * s
            j20 = m20 * q[4] + m21 * q[6]
            j21 = m20 * q[5] + m21 * q[7]
            j22 = 1.0 + m22 * s
            k0 = j11 * j22 - j12 * j21
            k1 = j12 * j20 - j10 * j22
            k2 = j10 * j21 - j11 * j20
            det = j00 * k0 + j01 * k1 + j02 * k2
            if det == 0.0 or det != det:
                return None
            d0 = (g0 * k0 + j01 * (j12 * g2 - g1 * j22) + j02 * (g1 * j21 - j11 * g2)) / det
            d1 = (j00 * (g1 * j22 - j12 * g2) + g0 * k1 + j02 * (j10 * g2 - g1 * j20)) / det
            d2 = (j00 * (j11 * g2 - g1 * j21) + j01 * (g1 * j20 - j10 * g2) + g0 * k2) / det
            if d0 != d0 or d1 != d1 or d2 != d2:
                return None
            if -tol < d0 < tol and -tol < d1 < tol and -tol < d2 < tol:
                return (v0, v1, v2), (*q, u, s)
            d0 = max(-clamp, min(clamp, d0))
            d1 = max(-clamp, min(clamp, d1))
            d2 = max(-clamp, min(clamp, d2))
            v0, v1, v2 = v0 - d0, v1 - d1, v2 - d2
        return None

    def _newton_extended(self, v: np.ndarray, a: np.ndarray, M: np.ndarray) -> tuple | None:
        """Solve v + M·φ(v) = a on every control; ``None`` if it does not converge.

        The transistor's controls are clamped as in :meth:`_newton`; a further
        control (a charge) to NEWTON_CLAMP volts' worth of its scale."""
        k = len(v)
        scale = np.array((1.0, 1.0, *self.dyn.extra_scale))
        clamp, tol = NEWTON_CLAMP * scale, NEWTON_TOL * scale
        eye = np.eye(k)
        for _ in range(NEWTON_MAX):
            q = self.phi(*v.tolist())
            cur = self._currents(q)
            Jphi = np.zeros((k, k))
            Jphi[:2, :2] = ((q[4], q[5]), (q[6], q[7]))
            Jphi[range(2, k), range(2, k)] = q[9::2]
            g = v + M @ cur - a
            try:
                d = np.linalg.solve(eye + M @ Jphi, g)
            except np.linalg.LinAlgError:
                return None
            if not np.all(np.isfinite(d)):
                return None
            if np.all(np.abs(d) < tol):
                return tuple(v.tolist()), q
            d = np.clip(d, -clamp, clamp)
            v = v - d
        return None

    def _newton(self, vbe, vce, a0, a1, m00, m01, m10, m11) -> tuple | None:
        """Solve v + M·φ(v) = a for the two controls; ``None`` if it does not converge.

        Returns the last iterate at which φ was evaluated, with φ there: the
        correction that passed the test (below NEWTON_TOL) is not applied, so
        the controls and the device tuple stay one consistent pair without a
        further evaluation of φ.
        """
        phi, clamp, tol = self.phi, NEWTON_CLAMP, NEWTON_TOL
        for _ in range(NEWTON_MAX):
            q = phi(vbe, vce)
            g0 = vbe + m00 * q[0] + m01 * q[1] - a0
            g1 = vce + m10 * q[0] + m11 * q[1] - a1
            # Jacobian I + M·Jφ with Jφ = [[dIC/dvbe, dIC/dvce], [dIB/dvbe, dIB/dvce]]
            j00 = 1.0 + m00 * q[4] + m01 * q[6]
            j01 = m00 * q[5] + m01 * q[7]
            j10 = m10 * q[4] + m11 * q[6]
            j11 = 1.0 + m10 * q[5] + m11 * q[7]
            det = j00 * j11 - j01 * j10
            if det == 0.0 or det != det:
                return None  # singular (or NaN): this start does not converge
            d0 = (g0 * j11 - g1 * j01) / det
            d1 = (j00 * g1 - j10 * g0) / det
            if -tol < d0 < tol and -tol < d1 < tol:
                return vbe, vce, q
            if d0 > clamp or d0 < -clamp or d1 > clamp or d1 < -clamp:
                d0 = max(-clamp, min(clamp, d0))
                d1 = max(-clamp, min(clamp, d1))
            vbe -= d0
            vce -= d1
        return None
