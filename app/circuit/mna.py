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
import functools
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
    NPNParams,
    Resistor,
    Varactor,
)
from ringwise.circuit.npn import (
    HybridPi,
    JunctionState,
    exp_and_slope_array,
    junction_currents,
)
from ringwise.circuit.smalllu import solve_many

#: Conductance from every node to ground, S (SPICE's default GMIN).
G_MIN = 1e-12
#: From this many rows on, products with a batch of states go through
#: ``numpy.einsum`` instead of BLAS: a threaded BLAS splits a product this
#: size over its threads, which then spin idle between calls and cost more
#: CPU time than the product itself.
EINSUM_ROWS = 64
#: Batches of at least this many circuits get the device's stamps entry by
#: entry (a few strided additions); smaller ones as whole matrices (fewer calls).
SPARSE_STAMP_BATCH = 64


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


def dot_last(x: np.ndarray, v: np.ndarray) -> np.ndarray:
    """x·v over the last axis of ``x`` (one state (n,) or a batch (…, n)); ``v`` (n,)."""
    if np.ndim(x) < 2 or np.size(x) < EINSUM_ROWS * np.shape(x)[-1]:
        return x @ v
    return np.einsum("...i,i->...", x, v)


def layout_of(netlist: Netlist) -> Layout:
    node = {name: i for i, name in enumerate(netlist.nodes)}
    branch: dict[str, int] = {}
    for element in netlist:
        if isinstance(element, Inductor | DCSupply | Varactor):
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
    #: the varactors, whose charge law the transient and the steady state add
    varactors: tuple[Varactor, ...] = ()


def _stamp_varactor(G: np.ndarray, C: np.ndarray, b: np.ndarray, lay: Layout, el: Varactor) -> None:
    """Row k: v_a − v_b − u − R_s·C_b·u̇ = offset (:class:`Varactor`, u = q/C_b in volts);
    the current C_b·u̇ leaves a and enters b."""
    k = lay.branch[el.name]
    for node, sign in ((el.a, 1.0), (el.b, -1.0)):
        i = lay.node.get(node)
        if i is not None:
            C[i, k] += sign * el.C_bias
            G[k, i] += sign
    G[k, k] -= 1.0
    C[k, k] -= el.R_s * el.C_bias
    b[k] += el.offset


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
    varactors: list[Varactor] = []
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
        elif isinstance(el, Varactor):
            _stamp_varactor(G, C, b, lay, el)
            varactors.append(el)
        else:  # pragma: no cover - the Element union is closed
            raise TypeError(f"unknown element {el!r}")
    return LinearSystem(lay, G, C, b, tuple(devices), tuple(varactors))


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
    elif isinstance(el, Varactor):
        k = lay.branch[el.name]
        for node, pin in ((el.a, 1.0), (el.b, -1.0)):
            i = lay.node.get(node)
            if i is not None:
                C[i, k] += sign * pin * el.C_bias
        C[k, k] -= sign * el.R_s * el.C_bias
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
    return LinearSystem(system.layout, G, C, system.b, system.devices, system.varactors)


def restamp_batch(
    system: LinearSystem, old: Netlist, change_sets: list[dict[str, dict[str, float]]]
) -> LinearSystem:
    """:func:`restamp` for several sets of changes at once: G, C of shape (V, n, n).

    Each element's change of stamp is worked out once and the variants are
    the sums of theirs (one matrix product), so the budget's many variants of
    one circuit cost one assembly.
    """
    names = list(dict.fromkeys(name for changes in change_sets for name in changes))
    n = system.layout.size
    if not names:
        V = len(change_sets)
        G = np.broadcast_to(system.G, (V, n, n)).copy()
        return LinearSystem(system.layout, G, np.broadcast_to(system.C, (V, n, n)).copy(),
                            system.b, system.devices)  # fmt: skip
    deltas = np.zeros((len(names), 2, n, n))
    member = np.zeros((len(change_sets), len(names)))
    for j, changes in enumerate(change_sets):
        for name in changes:
            member[j, names.index(name)] = 1.0
    done: dict[str, dict[str, float]] = {}
    for changes in change_sets:
        for name, fields in changes.items():
            if name in done:
                if done[name] != fields:
                    raise ValueError(f"{name} is changed two ways in one batch")
                continue
            done[name] = fields
            k = names.index(name)
            el = old[name]
            dG, dC = deltas[k, 0], deltas[k, 1]
            _stamp_linear(dG, dC, system.layout, el, -1.0)
            _stamp_linear(dG, dC, system.layout, dataclasses.replace(el, **fields), +1.0)
    summed = (member @ deltas.reshape(len(names), -1)).reshape(len(change_sets), 2, n, n)
    return LinearSystem(
        system.layout, system.G + summed[:, 0], system.C + summed[:, 1], system.b, system.devices
    )


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
    from a solution (they equal ``P_B`` and ``P_C`` as vectors).  ``P`` and
    ``W`` are the same as (n, 2) matrices, columns (C, B) and (BE, CE): the
    device adds P·φ(Wᵀx) to the nodal equations.  ``S_BE`` and ``S_BC`` are
    the unit two-terminal stamps of the junction capacitances.  A terminal at
    ground simply has no entry.
    """

    P_C: np.ndarray
    P_B: np.ndarray
    S_BE: np.ndarray
    S_BC: np.ndarray
    #: The four rank-one patterns P_k·W_jᵀ of the device Jacobian (k = C, B; j = BE, CE).
    C_BE: np.ndarray
    C_CE: np.ndarray
    B_BE: np.ndarray
    B_CE: np.ndarray

    @property
    def W_BE(self) -> np.ndarray:
        return self.P_B

    @property
    def W_CE(self) -> np.ndarray:
        return self.P_C

    @functools.cached_property
    def P(self) -> np.ndarray:
        return np.column_stack((self.P_C, self.P_B))

    @functools.cached_property
    def W(self) -> np.ndarray:
        return np.column_stack((self.W_BE, self.W_CE))


def incidence(lay: Layout, dev: NPN) -> Incidence:
    """The transistor's incidence in layout ``lay`` (remembered per layout and terminals)."""
    return _incidence(tuple(lay.node.items()), lay.size, dev.c, dev.b, dev.e)


@functools.lru_cache(maxsize=64)
def _incidence(nodes: tuple, size: int, c: str, b: str, e: str) -> Incidence:
    lay = Layout(dict(nodes), {}, size)
    S_BE, S_BC = np.zeros((size, size)), np.zeros((size, size))
    _stamp_pair(S_BE, lay, b, e, 1.0)
    _stamp_pair(S_BC, lay, b, c, 1.0)
    P_C = lay.unit(c) - lay.unit(e)
    P_B = lay.unit(b) - lay.unit(e)
    return Incidence(
        P_C=P_C,
        P_B=P_B,
        S_BE=S_BE,
        S_BC=S_BC,
        C_BE=np.outer(P_C, P_B),
        C_CE=np.outer(P_C, P_C),
        B_BE=np.outer(P_B, P_B),
        B_CE=np.outer(P_B, P_C),
    )


@dataclass(frozen=True)
class DeviceCurrents:
    """The transistor's contribution to the nodal equations at a state.

    ``current`` (…, n): i_dev = P_C·I_C + P_B·I_B, A; ``jacobian`` (…, n, n):
    ∂i_dev/∂x, S; ``junction``: the transport model's currents and
    derivatives (arrays with the batch shape); ``vbe``, ``vce``: the
    controlling voltages, V.  ``current`` and ``jacobian`` are formed when
    first read (the small-signal pipeline needs only the junction's figures).
    """

    inc: Incidence
    junction: JunctionState
    vbe: np.ndarray
    vce: np.ndarray

    @functools.cached_property
    def current(self) -> np.ndarray:
        q, inc = self.junction, self.inc
        return q.IC[..., None] * inc.P_C + q.IB[..., None] * inc.P_B

    @functools.cached_property
    def jacobian(self) -> np.ndarray:
        q, inc = self.junction, self.inc
        return (
            _scaled(q.dIC_dvbe, inc.C_BE)
            + _scaled(q.dIC_dvce, inc.C_CE)
            + _scaled(q.dIB_dvbe, inc.B_BE)
            + _scaled(q.dIB_dvce, inc.B_CE)
        )


def device_currents(inc: Incidence, x: np.ndarray, params: NPNParams) -> DeviceCurrents:
    r"""The transistor's terminal currents and Jacobian in the nodal equations.

    .. math:: i_{dev}(x) = P\,\varphi(W^T x), \qquad
              \partial i_{dev}/\partial x = P\,J_\varphi\,W^T

    with :math:`\varphi = (I_C, I_B)` from
    :func:`ringwise.circuit.npn.junction_currents` and :math:`J_\varphi` its
    derivatives with respect to (v_BE, v_CE).  The one device-current
    function: the DC Newton, the transient's reference equations and the
    periodic steady state call it (the transient's 2×2 Newton uses the same
    P, W and transport model in reduced form).  ``x`` is one state (n,) or a
    batch (B, n); ``params`` fields are floats or arrays of shape (B,).
    """
    vbe = dot_last(x, inc.W_BE)
    vce = dot_last(x, inc.W_CE)
    with np.errstate(over="ignore", invalid="ignore"):  # a runaway trial is inf, not an error
        q = junction_currents(
            vbe, vce, params.IS, params.beta, params.beta_R, params.VA, params.VT,
            exp_and_slope_array,
        )  # fmt: skip
    return DeviceCurrents(inc, q, vbe, vce)


def nonlinear_residual(
    system: LinearSystem,
    x: np.ndarray,
    source_scale: float | np.ndarray = 1.0,
    params: NPNParams | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """F(x) = G x + i_dev(x) − s·b and its Jacobian, for one circuit or a batch.

    ``source_scale`` s multiplies b (source stepping; an array of shape (B,)
    scales each member).  ``params`` overrides the transistor's parameters
    (arrays of shape (B,) for a batch whose members differ).
    """
    F, J, _dev = residual_and_device(system, incidence_of(system), x, source_scale, params)
    return F, J


def incidence_of(system: LinearSystem) -> Incidence:
    """The incidence of the system's one transistor."""
    (dev,) = system.devices
    return incidence(system.layout, dev)


def residual_and_device(
    system: LinearSystem,
    inc: Incidence,
    x: np.ndarray,
    source_scale: float | np.ndarray = 1.0,
    params: NPNParams | None = None,
) -> tuple[np.ndarray, np.ndarray, DeviceCurrents]:
    """:func:`nonlinear_residual` and the :class:`DeviceCurrents` it used."""
    d = device_currents(inc, x, params or system.devices[0].params)
    scale = np.asarray(source_scale, dtype=float)[..., None]
    F = (system.G @ x[..., None])[..., 0] + d.current - scale * system.b
    return F, system.G + d.jacobian, d


@dataclass(frozen=True)
class Reduced:
    r"""A x + P·φ(Wᵀx) = r reduced to the transistor's two controls v = Wᵀx.

    With :math:`y = A^{-1} r`, :math:`K = A^{-1} P` and :math:`M = W^T K`,

    .. math:: v + M\,arphi(v) = W^T y, \qquad x = y - K\,arphi(v),

    exactly (the Woodbury identity in effect): Newton on the nodal equations
    becomes Newton on two unknowns, with the same iterates.  Arrays carry the
    batch axes of A: ``y`` (…, n), ``K`` (…, n, 2) with columns (C, B),
    ``M`` (…, 2, 2) with rows (BE, CE), ``a`` = Wᵀy (…, 2).
    """

    y: np.ndarray
    K: np.ndarray
    M: np.ndarray
    a: np.ndarray


def reduce_to_controls(A: np.ndarray, r: np.ndarray, inc: Incidence) -> Reduced:
    """Factor A once for the source vector ``r`` and the device columns P (see :class:`Reduced`).

    The DC solve (A = G) uses it; each member's A is factorised by
    :func:`ringwise.circuit.smalllu.solve_many` (NaN where A is singular).
    """
    n = A.shape[-1]
    batch = np.broadcast_shapes(A.shape[:-2], np.shape(r)[:-1])
    rhs = np.empty((*batch, n, 3))
    rhs[..., 0] = r
    rhs[..., 1:] = inc.P
    A_b = np.ascontiguousarray(np.broadcast_to(A, (*batch, n, n)), dtype=float)
    Y = solve_many(A_b.reshape(-1, n, n), rhs.reshape(-1, n, 3)).reshape(rhs.shape)
    y, K = Y[..., 0], Y[..., 1:]
    W = inc.W
    return Reduced(y=y, K=K, M=np.swapaxes(W, 0, 1) @ K, a=y @ W)


def _scaled(k, M: np.ndarray) -> np.ndarray:
    """k · M, with k a scalar or an array of batch coefficients."""
    return np.asarray(k)[..., None, None] * M


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
    G = _plus_scaled(system.G, ((hp.g_pi, inc.B_BE), (hp.g_r, inc.B_CE), (hp.g_o, inc.C_CE)))
    C = with_junction_capacitances(system.C, inc, hp.C_pi, hp.C_mu)
    return SmallSignal(system.layout, G, C, hp.gm, inc.P_C, inc.W_BE, hp)


def with_junction_capacitances(C: np.ndarray, inc: Incidence, C_pi, C_mu) -> np.ndarray:
    """C with the junction capacitances C_π (base-emitter) and C_μ (base-collector), F,
    stamped in: the one stamp of them, for the small signal and the transient alike."""
    return _plus_scaled(C, ((C_pi, inc.S_BE), (C_mu, inc.S_BC)))


def _plus_scaled(base: np.ndarray, terms) -> np.ndarray:
    """base + Σ k·M over ``terms`` (k a float or batch array, M a stamp pattern),
    touching only the patterns' few entries: the same sums, in the same order,
    as the dense expression, without its full-size temporaries."""
    ks = [np.asarray(k, dtype=float) for k, _M in terms]
    if base.ndim <= 3 and all(k.ndim <= 1 for k in ks):
        # one batch axis at most: its size is the largest of the sizes
        size = max(math.prod(base.shape[:-2]), *(k.size for k in ks))
    else:
        size = math.prod(np.broadcast_shapes(base.shape[:-2], *(k.shape for k in ks)))
    if size < SPARSE_STAMP_BATCH:
        out = base
        for k, (_k, M) in zip(ks, terms, strict=True):
            out = out + k[..., None, None] * M
        return out
    shape = np.broadcast_shapes(base.shape[:-2], *(k.shape for k in ks)) + base.shape[-2:]
    out = np.array(np.broadcast_to(base, shape), dtype=np.result_type(base, float))
    for k, (_k, M) in zip(ks, terms, strict=True):
        for i, j in zip(*np.nonzero(M), strict=True):
            out[..., i, j] += k * M[i, j]
    return out


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
        elif isinstance(el, Varactor):
            zeroed.append(dataclasses.replace(el, C_j0=0.0, R_s=0.0))
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
        elif isinstance(el, Varactor):
            k = lay.branch[el.name]
            Mc, Mr = np.zeros((n, n)), np.zeros((n, n))
            for node, pin in ((el.a, 1.0), (el.b, -1.0)):
                if node in lay.node:
                    Mc[lay.node[node], k] = pin
            Mr[k, k] = -1.0
            v = np.zeros(n)
            v[k] = 1.0
            terms += [(el.name, "C_b", "C", Mc), (el.name, "RC", "C", Mr), (el.name, "V0", "b", v)]
        elif isinstance(el, DCSupply):
            v = np.zeros(n)
            v[lay.branch[el.name]] = 1.0
            terms.append((el.name, "V", "b", v))
    return Patterns(lay, base.G, base.C, base.b, tuple(terms), base.devices)


def assemble_batch(
    patterns: Patterns, values: dict[tuple[str, str], np.ndarray | float]
) -> LinearSystem:
    """G (B, n, n), C (B, n, n), b (B, n) for a batch: ``values[(element, field)]`` holds
    each circuit's stamp value (an array (B,), or a float shared by all)."""
    out = {}
    for target, base in (("G", patterns.G0), ("C", patterns.C0), ("b", patterns.b0)):
        keys, mats = _stacked(patterns, target)
        if not keys:
            out[target] = base[None]
            continue
        coeffs = _coefficients([values[k] for k in keys])  # (B, terms)
        if len(coeffs) < EINSUM_ROWS:
            out[target] = base + (coeffs @ mats).reshape(-1, *base.shape)
            continue
        # A large batch: each unit stamp's few entries added in place (no BLAS threads).
        flat = np.empty((len(coeffs), base.size))
        flat[...] = base.reshape(-1)
        for t, (where, unit) in enumerate(_entries(patterns, target)):
            flat[:, where] += coeffs[:, t, None] * unit
        out[target] = flat.reshape(-1, *base.shape)
    return LinearSystem(patterns.layout, out["G"], out["C"], out["b"], patterns.devices)


def _entries(patterns: Patterns, target: str) -> list[tuple[np.ndarray, np.ndarray]]:
    """Each unit stamp of one target as (flat positions, values) of its nonzero entries."""
    cache = patterns.__dict__.setdefault("_entries", {})
    if target not in cache:
        _keys, mats = _stacked(patterns, target)
        cache[target] = [(np.flatnonzero(m), m[np.flatnonzero(m)]) for m in mats]
    return cache[target]


def _coefficients(column: list) -> np.ndarray:
    """Stamp values as a (B, terms) matrix; plain floats make a batch of one."""
    sizes = {k.shape for k in column if isinstance(k, np.ndarray) and k.ndim}
    if not sizes:
        return np.array(column, dtype=float)[None, :]
    if len(sizes) > 1 or len(next(iter(sizes))) > 1:
        return np.stack(np.broadcast_arrays(*(np.asarray(k, dtype=float) for k in column)), axis=1)
    ((B,),) = sizes
    out = np.empty((B, len(column)))
    for t, k in enumerate(column):  # one column per term (floats shared by every member)
        out[:, t] = k
    return out


def _stacked(patterns: Patterns, target: str) -> tuple[list, np.ndarray]:
    """The keys and flattened unit stamps of one target, (terms, n·n or n), remembered."""
    cache = patterns.__dict__.setdefault("_stacked", {})
    if target not in cache:
        picked = [(name, field, M) for name, field, kind, M in patterns.terms if kind == target]
        keys = [(name, field) for name, field, _M in picked]
        mats = np.stack([M.reshape(-1) for *_k, M in picked]) if picked else np.zeros((0, 0))
        cache[target] = (keys, mats)
    return cache[target]
