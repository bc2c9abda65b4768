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
    law = junction_law.inverse_law(*args)

    def f(u: float) -> tuple[float, float]:
        V, C = law(C_b * u)
        return V - V_b - (u - u_b), C_b / C - 1.0

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

    def linear_step(self, h: float) -> tuple:
        """(B, K, M, A⁻¹·2C/h²) at step h, kept: what the step linearisations need."""
        key = ("linear", h)
        if key not in self._cache:
            sm = self._run_matrices(h)[1]
            self._cache[key] = (sm.B, sm.K, sm.M, sm.Ainv @ (2.0 * self.dyn.C / h**2))
        return self._cache[key]

    def _run_matrices(self, h: float) -> tuple:
        """The step of :meth:`run` as one matrix, and the pieces it is made of.

        The state enters through z_j = B x_j + c − K φ_j (the known part of the
        next step), which obeys z_{j+1} = B z_j + c − (B + I)K φ_{j+1}; one
        matrix-vector product with [B | 0 | c | −(B + I)K] stacked over Wᵀ
        times it carries the row [z_j, a_j, 1, φ_{j+1}] to [z_{j+1}, a_{j+1}],
        a = Wᵀz being the right-hand side of the next Newton solve.
        """
        key = ("run", h)
        if key not in self._cache:
            sm = self.step_matrices(h)
            n, k = sm.K.shape
            top = np.hstack((sm.B, np.zeros((n, k)), sm.c[:, None], -(sm.B @ sm.K + sm.K)))
            ext = np.ascontiguousarray(np.vstack((top, self.Wt @ top)))
            self._cache[key] = (ext, sm, tuple(sm.M.ravel().tolist()))
        return self._cache[key]

    def run(self, x0: np.ndarray, h: float, count: int, substeps: int = 0, partial: bool = False):
        """``count`` steps of h from x0, the same steps as :meth:`step` with one
        matrix-vector product each (see :meth:`_run_matrices`).

        Returns (states (count + 1, n), the device tuples end to end as one
        flat list), or ``None`` if a step fails.  With ``substeps`` > 0 a step
        whose Newton iteration fails is retried as 2, 4, … 2**substeps
        shorter steps (:func:`split_step`).  With ``partial`` a step that
        still fails ends the run there: the states up to it are returned
        (fewer than count + 1 rows) instead of ``None``.
        """
        k = 2 + len(self.extra)
        if k > 3:
            return self.run_steps(x0, [h] * count, substeps, partial)
        ext, sm, m = self._run_matrices(h)
        n = sm.K.shape[0]
        cur = slice(n + k + 1, n + 2 * k + 1)
        Z = np.empty((count + 1, n + 2 * k + 1))
        Z[:, n + k] = 1.0
        v = self.controls(x0)
        ph = self.phi(*v)
        z0 = sm.B @ x0 + sm.c - sm.K @ self._currents(ph)
        Z[0, :n] = z0
        Z[0, n : n + k] = self.Wt @ z0
        a = Z[0, n : n + k].tolist()
        flat = list(ph)
        # the last four controls, newest first (v, v1, v2, v3): Newton starts
        # from their cubic extrapolation (two orders of magnitude closer than
        # the linear one on the orbits of the samples: fewer evaluations of
        # φ a step), then from the last controls
        v1 = v2 = v3 = v
        fixes: dict[int, np.ndarray] = {}
        newton, newton3, dot = self._newton, self._newton3, np.dot
        rows = list(Z)  # the rows as views, made once
        c0, c1, c2 = n + k + 1, n + k + 2, n + k + 3
        for j in range(count):
            row = rows[j]
            if k == 2:
                found = newton(
                    4.0 * (v[0] + v2[0]) - 6.0 * v1[0] - v3[0],
                    4.0 * (v[1] + v2[1]) - 6.0 * v1[1] - v3[1],
                    *a, *m,
                )  # fmt: skip
                if found is None:
                    found = newton(v[0], v[1], *a, *m)
                if found is not None:
                    v_new, q = (found[0], found[1]), found[2]
                    row[c0] = q[0]
                    row[c1] = q[1]
            else:
                guess = [4.0 * (v[i] + v2[i]) - 6.0 * v1[i] - v3[i] for i in range(3)]
                found = newton3(*guess, *a, *m)
                if found is None:
                    found = newton3(*v, *a, *m)
                if found is not None:
                    v_new, q = found[:3], found[3]
                    row[c0] = q[0]
                    row[c1] = q[1]
                    row[c2] = q[8]
            nxt = rows[j + 1]
            if found is not None:
                dot(ext, row, out=nxt[: n + k])
            else:
                if j in fixes:
                    x_j = fixes[j]
                elif j == 0:
                    x_j = x0
                else:
                    x_j = Z[j - 1, :n] - sm.K @ Z[j - 1, cur]
                stepped = split_step(self, h, x_j, v, ph, substeps)
                if stepped is None:
                    if not partial:
                        return None
                    count = j
                    break
                x_new, v_new, q = stepped
                fixes[j + 1] = x_new
                row[cur] = self._currents(q)
                z = sm.B @ x_new + sm.c - sm.K @ self._currents(q)
                nxt[:n] = z
                nxt[n : n + k] = self.Wt @ z
            a = nxt[n : n + k].tolist()
            flat.extend(q)
            v3, v2, v1, v, ph = v2, v1, v, v_new, q
        X = np.empty((count + 1, n))
        X[0] = x0
        X[1:] = Z[:count, :n] - Z[:count, cur] @ sm.K.T
        for j, x in fixes.items():
            X[j] = x
        return X, flat

    def run_steps(self, x0: np.ndarray, hs: list[float], substeps: int = 0, partial: bool = False):
        """:meth:`run` with any steps ``hs``, by :meth:`step` one at a time."""
        x = x0
        v = v_prev = self.controls(x)
        ph = self.phi(*v)
        X = np.empty((len(hs) + 1, len(x0)))
        X[0] = x0
        flat = list(ph)
        for j, h in enumerate(hs, 1):
            stepped = self.step(h, x, v, v_prev, ph)
            if stepped is None:
                stepped = split_step(self, h, x, v, ph, substeps)
                if stepped is None:
                    if not partial:
                        return None
                    return X[:j].copy(), flat
            x, v_new, ph = stepped
            v_prev, v = v, v_new
            X[j] = x
            flat.extend(ph)
        return X, flat

    def _extended_matrices(self, h: float) -> StepMatrices:
        key = ("extended", h)
        if key not in self._cache:
            self._cache[key] = self.step_matrices(h)
        return self._cache[key]

    def _currents(self, ph: tuple) -> np.ndarray:
        """The nonlinear currents of a device tuple: the transistor's two, then each
        further nonlinearity's value."""
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
        found = self._newton3(*v.tolist(), *a.tolist(), *M.ravel().tolist())
        return None if found is None else ((found[0], found[1], found[2]), found[3])

    def _newton3(self, v0, v1, v2, a0, a1, a2, m00, m01, m02, m10, m11, m12, m20, m21, m22):
        """Solve v + M·φ(v) = a on three controls (the transistor's two and one
        varactor's charge); ``None`` if it does not converge.  Returns
        (v0, v1, v2, tuple), the tuple being the transistor's and then the
        varactor's (value, slope), at the last iterate (see :meth:`_newton`)."""
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
            q4, q5, q6, q7 = q[4], q[5], q[6], q[7]
            j00 = 1.0 + m00 * q4 + m01 * q6
            j01 = m00 * q5 + m01 * q7
            j02 = m02 * s
            j10 = m10 * q4 + m11 * q6
            j11 = 1.0 + m10 * q5 + m11 * q7
            j12 = m12 * s
            j20 = m20 * q4 + m21 * q6
            j21 = m20 * q5 + m21 * q7
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
                return v0, v1, v2, (*q, u, s)
            if d0 > clamp or d0 < -clamp or d1 > clamp or d1 < -clamp or d2 > clamp or d2 < -clamp:
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


def split_step(stepper: _Stepper, h: float, x: np.ndarray, v: tuple, ph: tuple, levels: int):
    """One step of h taken as 2**k equal steps, the smallest k ≤ ``levels`` that works."""
    for k in range(1, levels + 1):
        parts = 2**k
        xs, vs, phs, v_prev = x, v, ph, v
        for _ in range(parts):
            stepped = stepper.step(h / parts, xs, vs, v_prev, phs)
            if stepped is None:
                break
            v_prev = vs
            xs, vs, phs = stepped
        else:
            return xs, vs, phs
    return None
