"""The netlist: the one description of a circuit that every analysis reads.

Six element kinds are enough for a discrete Colpitts-family oscillator:
resistor, capacitor, inductor with series loss, an ideal DC supply, an NPN
transistor and a varactor (a junction capacitance with its series loss).
Nodes are named by strings; ``GROUND`` is the reference node.
Elements are immutable; :meth:`Netlist.replace` makes a modified copy, which
is how analyses ask "what if this part were ideal".
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Final

GROUND: Final = "0"


@dataclass(frozen=True, slots=True)
class Resistor:
    """Resistance ``R`` (Ω) between nodes ``a`` and ``b``; ``R = inf`` is an open."""

    name: str
    a: str
    b: str
    R: float


@dataclass(frozen=True, slots=True)
class Capacitor:
    """Capacitance ``C`` (F) between nodes ``a`` and ``b``."""

    name: str
    a: str
    b: str
    C: float


@dataclass(frozen=True, slots=True)
class Inductor:
    """Inductance ``L`` (H) in series with its loss resistance ``R_s`` (Ω), ``a`` to ``b``.

    The branch current (from ``a`` to ``b``) is an unknown of the nodal
    equations, so the inductor is a short (through ``R_s``) at DC.
    """

    name: str
    a: str
    b: str
    L: float
    R_s: float = 0.0


@dataclass(frozen=True, slots=True)
class DCSupply:
    """Ideal voltage source of ``V`` (V) from ``GROUND`` to ``pos``; a short for signals."""

    name: str
    pos: str
    V: float


@dataclass(frozen=True, slots=True)
class NPNParams:
    """Parameters of the NPN transport model at the operating temperature.

    Attributes
    ----------
    IS : saturation current at the operating temperature, A
    beta : forward current gain β_F
    beta_R : reverse current gain β_R
    VA : forward Early voltage, V
    VT : thermal voltage k·T/q, V
    fT : transition frequency, Hz
    C_mu : base-collector capacitance, F
    """

    IS: float
    beta: float
    beta_R: float
    VA: float
    VT: float
    fT: float
    C_mu: float


@dataclass(frozen=True, slots=True)
class NPN:
    """NPN transistor with collector ``c``, base ``b`` and emitter ``e``."""

    name: str
    c: str
    b: str
    e: str
    params: NPNParams


@dataclass(frozen=True, slots=True)
class Varactor:
    r"""A reverse-biased junction capacitance from cathode ``a`` to anode ``b`` with
    its series resistance ``R_s`` (Ω): C(V) = C_j0/(1 + V/φ)^m
    (:mod:`ringwise.circuit.varactor`), V = v_a − v_b the reverse voltage.

    Its charge is an unknown of the nodal equations, in volts: u = q/C_b with
    C_b = C(V_bias) the capacitance at the operating point's reverse voltage
    ``V_bias`` (V).  The branch row reads

    .. math:: v_a - v_b - u - R_s C_b\,\dot u = V_{bias} - q(V_{bias})/C_b

    and the current C_b·u̇ = dq/dt leaves ``a``: open at DC (with the true
    charge at the bias), the capacitance C_b in series with R_s for small
    signals; the transient and the steady state add V(q) − V_bias −
    (q − q(V_bias))/C_b to the row as a nonlinearity, so the trapezoidal
    stepper carries the charge itself and conserves it.
    """

    name: str
    a: str
    b: str
    C_j0: float
    phi: float
    m: float
    V_bias: float
    R_s: float = 0.0

    @property
    def C_bias(self) -> float:
        """C(V_bias), F (0 for an element stamped as zero, C_j0 = 0)."""
        return self.C_j0 / (1.0 + self.V_bias / self.phi) ** self.m

    @property
    def offset(self) -> float:
        """V_bias − q(V_bias)/C(V_bias), V: the branch row's source term.

        ``V_bias`` may be an array (B,) of a batch's members (the pipeline's
        stamp values): the offsets are then an array too.
        """
        from ringwise.circuit.varactor import charge

        if self.C_j0 == 0.0:
            return 0.0 * self.V_bias  # 0, or zeros of the batch's shape
        return self.V_bias - charge(self.V_bias, self.C_j0, self.phi, self.m) / self.C_bias


Element = Resistor | Capacitor | Inductor | DCSupply | NPN | Varactor


@dataclass(frozen=True)
class Netlist:
    """An ordered, immutable collection of uniquely named elements."""

    elements: tuple[Element, ...]
    _by_name: dict[str, Element] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        by_name: dict[str, Element] = {}
        for element in self.elements:
            if element.name in by_name:
                raise ValueError(f"two elements are named {element.name!r}")
            by_name[element.name] = element
        object.__setattr__(self, "_by_name", by_name)

    def __iter__(self) -> Iterator[Element]:
        return iter(self.elements)

    def __getitem__(self, name: str) -> Element:
        return self._by_name[name]

    def __contains__(self, name: object) -> bool:
        return name in self._by_name

    @property
    def nodes(self) -> list[str]:
        """Non-ground node names in order of first appearance."""
        seen: dict[str, None] = {}
        for element in self.elements:
            for node in terminals(element):
                if node != GROUND:
                    seen.setdefault(node)
        return list(seen)

    def replace(self, name: str, **changes: float) -> Netlist:
        """A copy with element ``name`` given new field values."""
        return Netlist(
            tuple(
                dataclasses.replace(el, **changes) if el.name == name else el
                for el in self.elements
            )
        )

    def of_kind(self, kind: type) -> list:
        return [el for el in self.elements if isinstance(el, kind)]


def terminals(element: Element) -> tuple[str, ...]:
    """The nodes an element touches."""
    if isinstance(element, NPN):
        return (element.c, element.b, element.e)
    if isinstance(element, DCSupply):
        return (element.pos, GROUND)
    return (element.a, element.b)
