r"""Modified nodal analysis: the one assembly of the circuit equations.

Unknowns are the node voltages followed by one branch current per inductor
and per supply.  The linear elements give

.. math:: (G + sC)\,x = b

with inductor rows :math:`v_a - v_b - (R_s + sL)\,i = 0` and supply rows
:math:`v_+ = V`.  The transistors add their nonlinear currents
:math:`i_{dev}(x)` for DC and transient work, or their hybrid-π stamps for
small-signal work.  Every analysis in :mod:`ringwise.analysis` uses these matrices;
none writes circuit equations of its own.

A conductance ``G_MIN`` from every node to ground (as in SPICE) keeps nodes
that are floating at DC — the tank between two DC blocks — defined.

References
----------
Ho, Ruehli & Brennan, "The modified nodal approach to network analysis",
IEEE Trans. Circuits and Systems, 1975 (from memory).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from ringwise.circuit.netlist import (
    GROUND,
    NPN,
    Capacitor,
    DCSupply,
    Inductor,
    Netlist,
    Resistor,
)
from ringwise.circuit.npn import (
    HybridPi,
    JunctionState,
    exp_and_slope_array,
    junction_currents,
    junction_state,
)

#: Conductance from every node to ground, S (SPICE's default GMIN).
G_MIN = 1e-12


@dataclass(frozen=True)
class Layout:
    """Where each node voltage and branch current sits in the unknown vector."""

    node: dict[str, int]
    branch: dict[str, int]
    size: int

    def v(self, x: np.ndarray, node: str) -> np.ndarray:
        """Voltage of ``node`` in solution(s) ``x`` (last axis indexes unknowns)."""
        if node == GROUND:
            return np.zeros(x.shape[:-1], dtype=x.dtype) if x.ndim > 1 else x.dtype.type(0)
        return x[..., self.node[node]]

    def unit(self, node: str) -> np.ndarray:
        """Unit vector selecting ``node`` (zero vector for ground)."""
        vec = np.zeros(self.size)
        if node != GROUND:
            vec[self.node[node]] = 1.0
        return vec


def layout_of(netlist: Netlist) -> Layout:
    node = {name: i for i, name in enumerate(netlist.nodes)}
    branch: dict[str, int] = {}
    for element in netlist:
        if isinstance(element, Inductor | DCSupply):
            branch[element.name] = len(node) + len(branch)
    return Layout(node=node, branch=branch, size=len(node) + len(branch))


def _stamp_pair(M: np.ndarray, lay: Layout, a: str, b: str, value: float) -> None:
    """Stamp a two-terminal admittance ``value`` between nodes a and b."""
    ia = lay.node.get(a)
    ib = lay.node.get(b)
    if ia is not None:
        M[ia, ia] += value
    if ib is not None:
        M[ib, ib] += value
    if ia is not None and ib is not None:
        M[ia, ib] -= value
        M[ib, ia] -= value


@dataclass(frozen=True)
class LinearSystem:
    """Matrices of the linear elements: (G + sC) x = b."""

    layout: Layout
    G: np.ndarray
    C: np.ndarray
    b: np.ndarray
    devices: tuple[NPN, ...]


def assemble(netlist: Netlist) -> LinearSystem:
    """Assemble G, C and the source vector b of the linear elements."""
    lay = layout_of(netlist)
    n = lay.size
    G = np.zeros((n, n))
    C = np.zeros((n, n))
    b = np.zeros(n)
    for i in lay.node.values():
        G[i, i] += G_MIN
    devices: list[NPN] = []
    for el in netlist:
        if isinstance(el, Resistor):
            if np.isfinite(el.R):
                _stamp_pair(G, lay, el.a, el.b, 1.0 / el.R)
        elif isinstance(el, Capacitor):
            _stamp_pair(C, lay, el.a, el.b, el.C)
        elif isinstance(el, Inductor):
            k = lay.branch[el.name]
            for node, sign in ((el.a, 1.0), (el.b, -1.0)):
                i = lay.node.get(node)
                if i is not None:
                    G[i, k] += sign  # branch current leaves a, enters b
                    G[k, i] += sign  # v_a - v_b ...
            G[k, k] -= el.R_s  # ... - R_s i
            C[k, k] -= el.L  # ... - s L i = 0
        elif isinstance(el, DCSupply):
            k = lay.branch[el.name]
            i = lay.node[el.pos]
            G[i, k] += 1.0
            G[k, i] += 1.0
            b[k] = el.V
        elif isinstance(el, NPN):
            devices.append(el)
        else:  # pragma: no cover - the Element union is closed
            raise TypeError(f"unknown element {el!r}")
    return LinearSystem(lay, G, C, b, tuple(devices))


def _stamp_linear(G: np.ndarray, C: np.ndarray, lay: Layout, el, sign: float) -> None:
    """Add (sign = +1) or remove (sign = -1) the stamp of one linear element's values."""
    if isinstance(el, Resistor):
        if np.isfinite(el.R):
            _stamp_pair(G, lay, el.a, el.b, sign / el.R)
    elif isinstance(el, Capacitor):
        _stamp_pair(C, lay, el.a, el.b, sign * el.C)
    elif isinstance(el, Inductor):
        k = lay.branch[el.name]
        G[k, k] -= sign * el.R_s
        C[k, k] -= sign * el.L
    else:
        raise TypeError(f"{el.name} is not a linear two-terminal element")


def restamp(
    system: LinearSystem, old: Netlist, changes: dict[str, dict[str, float]]
) -> LinearSystem:
    """The system of ``old`` with some R, C or L values changed, without re-assembly.

    ``changes`` maps element names to new field values, e.g.
    ``{"RB1": {"R": inf}, "L": {"R_s": 0.0}}``; node connections stay the same.
    """
    G, C = system.G.copy(), system.C.copy()
    for name, fields in changes.items():
        el = old[name]
        _stamp_linear(G, C, system.layout, el, -1.0)
        _stamp_linear(G, C, system.layout, dataclasses.replace(el, **fields), +1.0)
    return LinearSystem(system.layout, G, C, system.b, system.devices)


def device_voltages(lay: Layout, dev: NPN, x: np.ndarray) -> tuple[float, float]:
    """(v_BE, v_CE) of a transistor in solution ``x``."""
    vb = float(lay.v(x, dev.b))
    ve = float(lay.v(x, dev.e))
    vc = float(lay.v(x, dev.c))
    return vb - ve, vc - ve


def device_state(lay: Layout, dev: NPN, x: np.ndarray) -> JunctionState:
    p = dev.params
    vbe, vce = device_voltages(lay, dev, x)
    return junction_state(vbe, vce, p.IS, p.beta, p.beta_R, p.VA, p.VT)


def nonlinear_residual(
    system: LinearSystem, x: np.ndarray, source_scale: float = 1.0
) -> tuple[np.ndarray, np.ndarray]:
    """F(x) = G x + i_dev(x) − b and its Jacobian, for DC and transient Newton.

    ``source_scale`` multiplies b (used by source stepping).
    """
    lay = system.layout
    F = system.G @ x - source_scale * system.b
    J = system.G.copy()
    for dev in system.devices:
        st = device_state(lay, dev, x)
        _stamp_device_currents(F, J, lay, dev, st)
    return F, J


def _stamp_device_currents(
    F: np.ndarray, J: np.ndarray, lay: Layout, dev: NPN, st: JunctionState
) -> None:
    """Add the terminal currents (leaving each node into the device) and their Jacobian."""
    # Terminal currents into the device: IC at c, IB at b, IE = -(IC + IB) at e.
    # Controls: v_BE = v_b - v_e and v_CE = v_c - v_e.
    rows = {
        dev.c: (st.IC, st.dIC_dvbe, st.dIC_dvce),
        dev.b: (st.IB, st.dIB_dvbe, st.dIB_dvce),
        dev.e: (
            -(st.IC + st.IB),
            -(st.dIC_dvbe + st.dIB_dvbe),
            -(st.dIC_dvce + st.dIB_dvce),
        ),
    }
    ib, ic, ie = lay.node.get(dev.b), lay.node.get(dev.c), lay.node.get(dev.e)
    for node, (current, d_vbe, d_vce) in rows.items():
        r = lay.node.get(node)
        if r is None:
            continue
        F[r] += current
        if ib is not None:
            J[r, ib] += d_vbe
        if ic is not None:
            J[r, ic] += d_vce
        if ie is not None:
            J[r, ie] -= d_vbe + d_vce


@dataclass(frozen=True)
class SmallSignal:
    r"""The circuit linearised at its operating point, with the loop broken.

    ``G`` and ``C`` hold every element except the transistor's controlled
    source :math:`g_m v_{be}`.  That source is the rank-one term
    :math:`g_m\,u\,w^T` with ``u`` = e_c − e_e (where its current leaves and
    enters) and ``w`` = e_b − e_e (what controls it), so the complete
    small-signal circuit is :math:`(G + g_m u w^T) + sC`.
    """

    layout: Layout
    G: np.ndarray
    C: np.ndarray
    gm: float
    u: np.ndarray
    w: np.ndarray
    hybrid: HybridPi

    @property
    def G_full(self) -> np.ndarray:
        return self.G + np.asarray(self.gm)[..., None, None] * np.outer(self.u, self.w)


@dataclass(frozen=True)
class Incidence:
    """Where the transistor's currents go and what controls them, as vectors.

    ``P_C`` = e_c − e_e carries I_C (into the collector, out of the emitter),
    ``P_B`` = e_b − e_e carries I_B; ``W_BE`` and ``W_CE`` read v_BE and v_CE
    from a solution (they equal ``P_B`` and ``P_C`` as vectors).  ``S_BE`` and
    ``S_BC`` are the unit two-terminal stamps of the junction capacitances.
    """

    P_C: np.ndarray
    P_B: np.ndarray
    S_BE: np.ndarray
    S_BC: np.ndarray

    @property
    def W_BE(self) -> np.ndarray:
        return self.P_B

    @property
    def W_CE(self) -> np.ndarray:
        return self.P_C


def incidence(lay: Layout, dev: NPN) -> Incidence:
    n = lay.size
    S_BE, S_BC = np.zeros((n, n)), np.zeros((n, n))
    _stamp_pair(S_BE, lay, dev.b, dev.e, 1.0)
    _stamp_pair(S_BC, lay, dev.b, dev.c, 1.0)
    return Incidence(
        P_C=lay.unit(dev.c) - lay.unit(dev.e),
        P_B=lay.unit(dev.b) - lay.unit(dev.e),
        S_BE=S_BE,
        S_BC=S_BC,
    )


def _rank1(k, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """k · a bᵀ, with k a scalar or an array of batch coefficients."""
    return np.asarray(k)[..., None, None] * np.outer(a, b)


def small_signal(system: LinearSystem, hp: HybridPi) -> SmallSignal:
    """Linearise around an operating point described by the hybrid-π ``hp``.

    The circuit must hold exactly one transistor: the loop studied is the
    one through its controlled source.  ``system.G``/``system.C`` and the
    fields of ``hp`` may carry a leading batch axis (one circuit per sample).
    """
    if len(system.devices) != 1:
        raise ValueError("the return ratio is defined for circuits with one transistor")
    inc = incidence(system.layout, system.devices[0])
    # i_b = g_pi v_be + g_r v_ce into the base, returning through the emitter;
    # i_c (without g_m v_be) = g_o v_ce into the collector, out of the emitter.
    G = (
        system.G
        + _rank1(hp.g_pi, inc.P_B, inc.W_BE)
        + _rank1(hp.g_r, inc.P_B, inc.W_CE)
        + _rank1(hp.g_o, inc.P_C, inc.W_CE)
    )
    C = system.C + np.asarray(hp.C_pi)[..., None, None] * inc.S_BE
    C = C + np.asarray(hp.C_mu)[..., None, None] * inc.S_BC
    return SmallSignal(system.layout, G, C, hp.gm, inc.P_C, inc.W_BE, hp)


def nonlinear_residual_batch(
    G: np.ndarray, b: np.ndarray, inc: Incidence, x: np.ndarray, params: dict[str, np.ndarray]
) -> tuple[np.ndarray, np.ndarray, tuple]:
    """F(x) = G x + i_dev(x) − b and its Jacobian for a batch of circuits.

    ``G`` (B, n, n), ``b`` (B, n), ``x`` (B, n); ``params`` holds the device
    parameters IS, beta, beta_R, VA, VT as arrays of shape (B,).  The same
    transport model as :func:`nonlinear_residual`, evaluated elementwise.
    """
    vbe = x @ inc.W_BE
    vce = x @ inc.W_CE
    q = junction_currents(
        vbe, vce, params["IS"], params["beta"], params["beta_R"], params["VA"], params["VT"],
        exp_and_slope_array,
    )  # fmt: skip
    IC, IB = q[0], q[1]
    F = np.einsum("bij,bj->bi", G, x) + IC[:, None] * inc.P_C + IB[:, None] * inc.P_B - b
    J = (
        G
        + _rank1(q[4], inc.P_C, inc.W_BE)
        + _rank1(q[5], inc.P_C, inc.W_CE)
        + _rank1(q[6], inc.P_B, inc.W_BE)
        + _rank1(q[7], inc.P_B, inc.W_CE)
    )
    return F, J, q


@dataclass(frozen=True)
class Patterns:
    """The assembly split into a constant part and one unit stamp per element value.

    ``G = G0 + Σ k·M`` over the terms ``(element, field, "G" | "C" | "b", M)``
    with k the element's value in stamp form (1/R, C, R_s, L, V).  Built from
    the same stamps as :func:`assemble`, so a batch of circuits that differ
    only in values is assembled in one matrix product.
    """

    layout: Layout
    G0: np.ndarray
    C0: np.ndarray
    b0: np.ndarray
    terms: tuple[tuple[str, str, str, np.ndarray], ...]
    devices: tuple[NPN, ...]


def linear_patterns(netlist: Netlist) -> Patterns:
    """Split ``netlist``'s assembly into its constant part and unit stamps."""
    zeroed = []
    for el in netlist:
        if isinstance(el, Resistor):
            zeroed.append(dataclasses.replace(el, R=math.inf))
        elif isinstance(el, Capacitor):
            zeroed.append(dataclasses.replace(el, C=0.0))
        elif isinstance(el, Inductor):
            zeroed.append(dataclasses.replace(el, L=0.0, R_s=0.0))
        elif isinstance(el, DCSupply):
            zeroed.append(dataclasses.replace(el, V=0.0))
        else:
            zeroed.append(el)
    base = assemble(Netlist(tuple(zeroed)))
    lay, n = base.layout, base.layout.size
    terms = []
    for el in netlist:
        if isinstance(el, Resistor):
            M = np.zeros((n, n))
            _stamp_pair(M, lay, el.a, el.b, 1.0)
            terms.append((el.name, "G_R", "G", M))
        elif isinstance(el, Capacitor):
            M = np.zeros((n, n))
            _stamp_pair(M, lay, el.a, el.b, 1.0)
            terms.append((el.name, "C", "C", M))
        elif isinstance(el, Inductor):
            k = lay.branch[el.name]
            Mr, Ml = np.zeros((n, n)), np.zeros((n, n))
            Mr[k, k], Ml[k, k] = -1.0, -1.0
            terms += [(el.name, "R_s", "G", Mr), (el.name, "L", "C", Ml)]
        elif isinstance(el, DCSupply):
            v = np.zeros(n)
            v[lay.branch[el.name]] = 1.0
            terms.append((el.name, "V", "b", v))
    return Patterns(lay, base.G, base.C, base.b, tuple(terms), base.devices)


def assemble_batch(patterns: Patterns, values: dict[tuple[str, str], np.ndarray]) -> LinearSystem:
    """G, C, b for a batch: ``values[(element, field)]`` holds one stamp value per circuit."""
    n = patterns.layout.size
    out = {}
    for target, base in (("G", patterns.G0), ("C", patterns.C0)):
        terms = [(k, M) for k, M in _terms_of(patterns, values, target)]
        if terms:
            coeffs = np.stack([k for k, _M in terms], axis=1)  # (B, terms)
            mats = np.stack([M.reshape(-1) for _k, M in terms])  # (terms, n·n)
            out[target] = base + (coeffs @ mats).reshape(-1, n, n)
        else:
            out[target] = base[None]
    b = patterns.b0 + sum(k[:, None] * M for k, M in _terms_of(patterns, values, "b"))
    return LinearSystem(patterns.layout, out["G"], out["C"], b, patterns.devices)


def _terms_of(patterns: Patterns, values, target: str):
    for name, field, kind, M in patterns.terms:
        if kind == target:
            yield np.asarray(values[(name, field)], dtype=float), M
