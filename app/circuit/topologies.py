r"""Topologies are netlist builders: a design in, one netlist out.

All three Colpitts forms share one resonator, a triangle of three reactances
whose corners face the transistor's terminals: C1 across collector-emitter,
C2 across base-emitter, and L (with the Clapp capacitor C3 in series, when
present) across collector-base.  The forms differ only in which terminal sits
at signal ground, and so in which tank corner is tied to ground:

================  =====================  ==========================
form              grounded corner        gain-setting resistor
================  =====================  ==========================
common-emitter    emitter (C1, C2 down)  RC (across C1)
common-base       base    (L, C2 down)   RC (across L)
common-collector  collector (L, C1 down) RE (across C1)
================  =====================  ==========================

The tank is DC-isolated from the transistor by Cc1 (at the output terminal:
the collector, or the emitter in the common-collector form) and Cc2 (at the
input terminal: the base, or the emitter in the common-base form).  The tank
node nearest the output terminal is ``t1``; the optional load sits there.

The collector of the common-emitter and common-base forms is fed from the
supply through the resistor RC or, with ``bias.feed = "choke"``, through an
RF choke: inductance ``Lch`` with its loss as a parallel resistance
``Rch`` = Q_ch·ω0·L_ch (Q_ch taken at the tank's ideal resonance ω0; a
choke's loss is mostly its core's, which acts across it) and, when its
self-resonant frequency ``f_ch`` is given, its self-capacitance ``Cch`` =
:math:`1/((2\pi f_{ch})^2 L_{ch})` across it.  At DC the choke is a short, so
the collector sits at the supply; at resonance Rch takes RC's place in the
hand formula.

Inductor loss convention: the coil's unloaded Q, ``Q_L``, is taken at the
tank's ideal resonance :math:`\omega_0 = 1/\sqrt{L C_s}` and represented by a
series resistance :math:`R_s = \omega_0 L / Q_L`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

import numpy as np
from scipy import constants

from ringwise.circuit.netlist import (
    GROUND,
    NPN,
    Capacitor,
    DCSupply,
    Element,
    Inductor,
    Netlist,
    NPNParams,
    Resistor,
    Varactor,
)
from ringwise.circuit.npn import BETA_REVERSE, saturation_current, thermal_voltage
from ringwise.circuit.varactor import capacitance as junction_capacitance
from ringwise.design import Design, Topology
from ringwise.units import format_si

#: Node names shared by all forms.
VCC, COLLECTOR, BASE, EMITTER = "vcc", "c", "b", "e"
#: Tank corners: t1 faces the output terminal, t2 the other; tl sits between L and C3.
T1, T2, TL = "t1", "t2", "tl"
#: The crystal's inner node (between its motional inductance and capacitance),
#: and the netlist names of its motional and shunt capacitances.
TX, CRYSTAL_C1, CRYSTAL_C0 = "tx", "C_x1", "C_x0"
#: The varactor: its netlist name, its cathode node (fed the tuning voltage), the
#: tuning supply and its node, the feed resistor and the coupling capacitor.
VARACTOR, VD, TUNE_SUPPLY, VTUNE = "D_v", "vd", "Vtune", "vtune"
VARACTOR_FEED, VARACTOR_COUPLING = "R_tune", "C_v"
#: The anode's DC return to ground (of R_tune's value) when the anode sits on a tank
#: node that the coupling capacitors isolate: it holds the diode's bias at V_tune.
VARACTOR_RETURN = "R_ret"
#: Capacitances of the netlist that are no capacitor part with a voltage rating:
#: the crystal's model, the choke's self-capacitance, a buffer's input.
UNRATED_CAPACITANCES: Final = (CRYSTAL_C1, CRYSTAL_C0, "Cch", "C_load")

#: Which resistor sets the loop gain in each form (the threshold finder's default).
GAIN_SETTER: Final = {Topology.CE: "RC", Topology.CB: "RC", Topology.CC: "RE"}
#: With the choke feed the choke's loss sets the gain: its threshold is the
#: choke's Q at which the oscillator stops starting.
CHOKE_SETTER: Final = "Q_ch"
#: Netlist names of the choke, its loss resistance and its self-capacitance.
CHOKE, CHOKE_LOSS, CHOKE_SELF_C = "Lch", "Rch", "Cch"


def gain_setter(design: Design) -> str:
    """The parameter that sets the loop gain of ``design`` (the threshold's default)."""
    return CHOKE_SETTER if design.choke_fed else GAIN_SETTER[design.topology]


#: Which node each form's output is taken at, in words.
OUTPUT_NODE_LABEL: Final = {
    Topology.CE: "collector-side tank end (t1)",
    Topology.CB: "collector-side tank end (t1)",
    Topology.CC: "emitter-side tank end (t1)",
}


def series(*capacitors: float | None) -> float:
    """Series combination of the capacitors given (``None`` entries are absent)."""
    return 1.0 / sum(1.0 / c for c in capacitors if c is not None)


@dataclass(frozen=True)
class TankFigures:
    """The resonator's hand figures: C_s (F), f_ideal (Hz), R_s (Ω), feedback ratio C1/C2."""

    C_series: float
    f_ideal: float
    R_s: float
    feedback_ratio: float


def coil_loss(L, C_series, Q_L):
    r"""Series loss of the coil, Ω: :math:`R_s = \omega_0 L/Q_L` with
    :math:`\omega_0 = 1/\sqrt{L C_s}` (floats or arrays; L in H, C_s in F)."""
    return L / (np.sqrt(L * C_series) * Q_L)


def crystal_frequency(L1, C1, C0, C_L):
    r"""Resonance of the crystal with the load capacitance C_L across it, Hz:
    :math:`1/(2\pi\sqrt{L_1\,C_1 (C_0 + C_L)/(C_1 + C_0 + C_L)})`, the motional
    arm in series with C₀ + C_L (lossless; floats or arrays).  For C₁ ≪ C₀ + C_L
    this is :math:`f_s (1 + C_1/(2(C_0 + C_L)))` (IEC 60444, from memory)."""
    return 1.0 / (2.0 * np.pi * np.sqrt(L1 * C1 * (C0 + C_L) / (C1 + C0 + C_L)))


def varactor_branch(C_v, C_j0, phi, m, V):
    """The varactor branch's capacitance at the reverse bias V, F: C_v in series
    with C(V) (floats or arrays)."""
    C_d = junction_capacitance(V, C_j0, phi, m)
    return C_v * C_d / (C_v + C_d)


def tank_capacitance(C1, C2, C3, C_branch=None, place: str = "across-L"):
    r"""The capacitance the coil resonates with, F (floats or arrays; C3, C_branch may be None).

    Without a varactor the series combination of C1, C2 and C3.  A varactor
    branch C_b across the coil adds to it (the coil's ideal resonance is
    :math:`1/\sqrt{L(C_s + C_b)}`); across the Clapp position it adds to C3.
    """
    if C_branch is None:
        return series(C1, C2, C3)
    if place == "clapp":
        return series(C1, C2, C_branch if C3 is None else C3 + C_branch)
    return series(C1, C2, C3) + C_branch


def design_tank_capacitance(design: Design) -> float:
    """:func:`tank_capacitance` of ``design`` at its tuning voltage, F."""
    t, v = design.tank, design.varactor
    if v is None:
        return series(t.C1, t.C2, t.C3)
    C_b = float(varactor_branch(v.C_v, v.C_j0, v.phi_j, v.m_j, v.V_tune))
    return float(tank_capacitance(t.C1, t.C2, t.C3, C_b, v.place))


def tank_figures(design: Design) -> TankFigures:
    t = design.tank
    C_s = design_tank_capacitance(design)
    x = design.crystal
    if x is not None:
        # the crystal's load capacitance is the capacitors' series combination
        f = float(crystal_frequency(x.L1, x.C_x1, x.C_x0, C_s))
        return TankFigures(C_series=C_s, f_ideal=f, R_s=x.R_x1, feedback_ratio=t.C1 / t.C2)
    assert t.L is not None and t.Q_L is not None  # required without a crystal
    w0 = 1.0 / math.sqrt(t.L * C_s)
    return TankFigures(
        C_series=C_s,
        f_ideal=w0 / (2.0 * math.pi),
        R_s=float(coil_loss(t.L, C_s, t.Q_L)),
        feedback_ratio=t.C1 / t.C2,
    )


@dataclass(frozen=True)
class ChokeFigures:
    r"""The RF choke's figures at the tank's ideal resonance ω0.

    ``R_p`` = Q_ch·ω0·L_ch, its parallel loss resistance (Ω); ``C_self`` =
    1/((2π f_ch)²·L_ch), its self-capacitance (F, 0 without f_ch).
    """

    R_p: float
    C_self: float


def choke_figures(design: Design) -> ChokeFigures | None:
    """The choke's figures, or ``None`` when the collector is not fed through it."""
    if not design.choke_fed:
        return None
    b = design.bias
    assert b.L_ch is not None and b.Q_ch is not None
    t = design.tank
    if design.crystal is not None:  # at the crystal's resonance with the circuit's load
        R_p = b.Q_ch * 2.0 * math.pi * tank_figures(design).f_ideal * b.L_ch
    else:
        R_p = choke_loss(b.L_ch, b.Q_ch, t.L, design_tank_capacitance(design))
    C_self = 0.0 if b.f_ch is None else choke_self_capacitance(b.L_ch, b.f_ch)
    return ChokeFigures(R_p=float(R_p), C_self=float(C_self))


def choke_loss(L_ch, Q_ch, L, C_series):
    r"""The choke's parallel loss resistance, Ω: :math:`R_p = Q_{ch}\,\omega_0 L_{ch}`
    at the tank's ideal resonance :math:`\omega_0 = 1/\sqrt{L C_s}` (floats or arrays)."""
    return Q_ch * L_ch / np.sqrt(L * C_series)


def choke_self_capacitance(L_ch, f_ch):
    r"""The choke's self-capacitance, F: :math:`C = 1/((2\pi f_{ch})^2 L_{ch})`
    (floats or arrays)."""
    return 1.0 / ((2.0 * math.pi * f_ch) ** 2 * L_ch)


def device_params_at(IS, beta, VA, fT, C_mu, temperature_C) -> NPNParams:
    """Transistor parameters at ``temperature_C`` (°C) from their 25 °C values
    (I_S in A, V_A in V, f_T in Hz, C_μ in F); floats or arrays alike."""
    T = np.asarray(temperature_C, dtype=float) + constants.zero_Celsius
    VT = thermal_voltage(T)
    IS_T = saturation_current(IS, T)
    if np.ndim(IS_T) == 0:
        IS_T, VT = float(IS_T), float(VT)
    return NPNParams(IS=IS_T, beta=beta, beta_R=BETA_REVERSE, VA=VA, VT=VT, fT=fT, C_mu=C_mu)


def device_params(design: Design) -> NPNParams:
    """Transistor parameters at the design's temperature."""
    d = design.device
    return device_params_at(d.IS, d.beta, d.VA, d.fT, d.C_mu, design.temperature_C)


@dataclass(frozen=True)
class HandFormula:
    """The hand-method loop gain of a form, as a formula, with its numbers and value.

    ``symbols`` is the formula in symbols, ``numbers`` the same with the
    design's values put in (engineering notation), ``value`` the result.
    """

    symbols: str
    numbers: str
    value: float


def tank_factor(topology: Topology, C1: float, C2: float) -> float:
    """The tank's part of the hand formula: C1/C2 (common-emitter, common-collector)
    or C1·C2/(C1+C2)² (common-base); the hand loop gain is g_m·R·(this)."""
    if topology is Topology.CB:
        return C1 * C2 / (C1 + C2) ** 2
    return C1 / C2


def hand_formula(design: Design, gm: float) -> HandFormula:
    r"""Return ratio of the lossless circuit with only the gain-setting resistor.

    Common-emitter :math:`g_m R_C C_1/C_2`; common-base
    :math:`g_m R_C C_1 C_2/(C_1+C_2)^2`; common-collector
    :math:`g_m R_E C_1/C_2`.  The Clapp capacitor C3 sets the frequency but
    leaves these figures unchanged: at resonance the gain resistor sees an
    open tank whichever branch carries C3.

    The common-base figure is the limit R_C ≫ ω·L of the lossless return
    ratio (R_C across L, whose voltage is :math:`(C_1+C_2)/C_1` times the
    emitter's); the exact zero-phase value is that figure divided by
    :math:`1 + (\omega L/R_C)^2` (derived in SymPy,
    ``tests/circuit/test_topologies.py``).  Razavi, *Design of Analog CMOS
    Integrated Circuits*, LC-oscillator chapter, states the same start-up
    condition :math:`g_m R_p \ge (C_1+C_2)^2/(C_1 C_2)` (from memory).

    With the choke feed the choke's loss resistance R_p = Q_ch·ω0·L_ch takes
    R_C's place (its reactance is left to the full model, as the tank's
    loading by every other part is).

    These are the hand-method figures the full model is compared with.
    """
    t, b = design.tank, design.bias
    notes = "" if t.C3 is None else f"  (C3 = {format_si(t.C3, 'F')} sets f, not the gain)"
    gm_t, C1_t, C2_t = format_si(gm, "S"), format_si(t.C1, "F"), format_si(t.C2, "F")
    choke = choke_figures(design)
    if design.topology is Topology.CC:
        name, R = "RE", b.RE
    elif choke is not None:
        name, R = "R_p", choke.R_p
        notes += f"  (R_p = Q_ch·ω0·L_ch = {format_si(R, 'Ω')}, the choke's loss)"
    else:
        name, R = "RC", b.RC
    assert R is not None
    if design.topology is Topology.CB:
        value = gm * R * tank_factor(design.topology, t.C1, t.C2)
        symbols = f"g_m·{name}·C1·C2/(C1+C2)²"
        numbers = f"{gm_t} × {format_si(R, 'Ω')} × {C1_t} × {C2_t} / ({C1_t} + {C2_t})²"
    else:
        value = gm * R * tank_factor(design.topology, t.C1, t.C2)
        symbols = f"g_m·{name}·C1/C2"
        numbers = f"{gm_t} × {format_si(R, 'Ω')} × {C1_t} / {C2_t}"
    return HandFormula(symbols=symbols, numbers=f"{numbers} = {value:.4g}{notes}", value=value)


def ideal_gain(design: Design, gm: float) -> float:
    """The hand-method loop gain (the value of :func:`hand_formula`)."""
    return hand_formula(design, gm).value


def build(design: Design) -> Netlist:
    """The netlist of a design in its chosen form."""
    b, t, k = design.bias, design.tank, design.coupling
    R_s = tank_figures(design).R_s
    # In the common-collector form the collector goes straight to the supply.
    collector = VCC if design.topology is Topology.CC else COLLECTOR
    q1 = NPN("Q1", collector, BASE, EMITTER, device_params(design))
    common: list[Element] = [
        DCSupply("Vcc", VCC, design.supply.Vcc),
        Resistor("RB1", VCC, BASE, b.RB1),
        Resistor("RB2", BASE, GROUND, b.RB2),
        Resistor("RE", EMITTER, GROUND, b.RE),
        q1,
    ]
    # Corners of the triangle: (C1 ends), (C2 ends), (L ends), coupling ends.
    if design.topology is Topology.CE:
        c1, c2, lc = (T1, GROUND), (T2, GROUND), (T1, T2)
        cc1, cc2 = (COLLECTOR, T1), (T2, BASE)
        assert b.CE is not None
        form: list[Element] = [*_collector_feed(design), Capacitor("CE", EMITTER, GROUND, b.CE)]
    elif design.topology is Topology.CB:
        c1, c2, lc = (T1, T2), (T2, GROUND), (T1, GROUND)
        cc1, cc2 = (COLLECTOR, T1), (T2, EMITTER)
        assert b.CB is not None
        form = [*_collector_feed(design), Capacitor("CB", BASE, GROUND, b.CB)]
    else:
        c1, c2, lc = (T1, GROUND), (T2, T1), (T2, GROUND)
        cc1, cc2 = (EMITTER, T1), (T2, BASE)
        form = []
    tank: list[Element] = [
        Capacitor("C1", *c1, t.C1),
        Capacitor("C2", *c2, t.C2),
        Capacitor("Cc1", *cc1, k.Cc1),
        Capacitor("Cc2", *cc2, k.Cc2),
    ]
    v = design.varactor
    clapp_varactor = v is not None and v.place == "clapp"
    end = lc[1] if t.C3 is None and not clapp_varactor else TL
    if design.crystal is None:
        assert t.L is not None
        tank.append(Inductor("L", lc[0], end, t.L, R_s))
    else:
        # the motional arm keeps the coil's name "L": its current is the resonator's
        x = design.crystal
        tank += [
            Inductor("L", lc[0], TX, x.L1, x.R_x1),
            Capacitor(CRYSTAL_C1, TX, end, x.C_x1),
            Capacitor(CRYSTAL_C0, lc[0], end, x.C_x0),
        ]
    if t.C3 is not None:
        tank.append(Capacitor("C3", TL, lc[1], t.C3))
    if v is not None:
        # cathode fed from the tuning supply through R_tune, anode on the tank, returned
        # to ground through a resistor of the same value (0 V DC)
        hot, anode = (TL, lc[1]) if clapp_varactor else (lc[0], end)
        tank += [
            DCSupply(TUNE_SUPPLY, VTUNE, v.V_tune),
            Resistor(VARACTOR_FEED, VTUNE, VD, v.R_tune),
            Capacitor(VARACTOR_COUPLING, hot, VD, v.C_v),
            Varactor(VARACTOR, VD, anode, v.C_j0, v.phi_j, v.m_j, v.V_tune, v.R_v),
        ]
        if anode != GROUND:
            tank.append(Resistor(VARACTOR_RETURN, anode, GROUND, v.R_tune))
    if design.load.R_load is not None:
        tank.append(Resistor("R_load", T1, GROUND, design.load.R_load))
    if design.load.C_load is not None:
        tank.append(Capacitor("C_load", T1, GROUND, design.load.C_load))
    return Netlist(tuple(common + form + tank))


def _collector_feed(design: Design) -> list[Element]:
    """RC from the supply to the collector, or the RF choke (with its self-capacitance)."""
    choke = choke_figures(design)
    if choke is None:
        assert design.bias.RC is not None
        return [Resistor("RC", VCC, COLLECTOR, design.bias.RC)]
    assert design.bias.L_ch is not None
    out: list[Element] = [
        Inductor(CHOKE, VCC, COLLECTOR, design.bias.L_ch),
        Resistor(CHOKE_LOSS, VCC, COLLECTOR, choke.R_p),
    ]
    if choke.C_self > 0:
        out.append(Capacitor(CHOKE_SELF_C, VCC, COLLECTOR, choke.C_self))
    return out
