"""The varactor element: its junction law, its stamps and the stepper's charge.

External checks:

- The depletion capacitance of an abrupt one-sided junction,
  C = A·√(q·ε_s·N/(2(V_bi + V_R))), and of a linearly graded one,
  C = A·(q·a·ε_s²/(12(V_bi + V_R)))^(1/3) (Sze, *Physics of Semiconductor
  Devices*, 2nd ed., ch. 2, from memory; the 2kT/q correction left out):
  C_j0/(1 + V/φ)^m with m = 1/2 and 1/3.
- The resonance of a lossless L with C_fixed and the varactor branch across
  it: f = 1/(2π√(L·(C_fixed + C_b))) (circuit theory, common practice).
- The charge law against scipy.integrate.quad of C(V).
- Charge on a node joined only through capacitors (and the varactor) is
  conserved (Kirchhoff's current law); the trapezoidal rule on the charge
  keeps it to round-off (Hairer, Nørsett & Wanner, from memory: linear
  invariants are kept by every Runge–Kutta method).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.integrate
import scipy.linalg
from scipy import constants

from ringwise.analysis.operating import solve
from ringwise.analysis.pipeline import f_ideal_of, part_values
from ringwise.analysis.stepper import _Stepper, circuit_dynamics
from ringwise.analysis.transient import transient_system
from ringwise.circuit.mna import G_MIN, assemble
from ringwise.circuit.netlist import (
    NPN,
    Capacitor,
    DCSupply,
    Inductor,
    Netlist,
    NPNParams,
    Resistor,
    Varactor,
)
from ringwise.circuit.topologies import (
    TUNE_SUPPLY,
    VARACTOR,
    VD,
    VTUNE,
    build,
    tank_capacitance,
    varactor_branch,
)
from ringwise.circuit.varactor import (
    FC,
    capacitance,
    capacitance_at,
    charge,
    inverse_law,
    voltage,
)
from tests.conftest import BASE_CE, design_from

ABRUPT = {"preset": "abrupt", "C_v": "1n", "V_tune": "4"}


def tuned(**varactor):
    return design_from(BASE_CE, varactor={**ABRUPT, **varactor})


# Silicon, from memory: relative permittivity 11.9.
EPS_SI = 11.9 * constants.epsilon_0
AREA = 1e-7  # m², a 0.1 mm² junction
V_BI = 0.75


def test_abrupt_junction_capacitance_follows_sze() -> None:
    N = 1e22  # m⁻³ (1e16 cm⁻³) on the lightly doped side

    def sze(V):
        return AREA * np.sqrt(constants.e * EPS_SI * N / (2.0 * (V_BI + V)))

    V = np.linspace(0.0, 30.0, 61)
    got = capacitance(V, sze(0.0), V_BI, 0.5)
    np.testing.assert_allclose(got, sze(V), rtol=1e-12)


def test_linearly_graded_junction_capacitance_follows_sze() -> None:
    a = 1e26  # m⁻⁴, the impurity gradient

    def sze(V):
        return AREA * (constants.e * a * EPS_SI**2 / (12.0 * (V_BI + V))) ** (1.0 / 3.0)

    V = np.linspace(0.0, 30.0, 61)
    np.testing.assert_allclose(capacitance(V, sze(0.0), V_BI, 1.0 / 3.0), sze(V), rtol=1e-12)


@pytest.mark.parametrize("m", [1.0 / 3.0, 0.5, 1.0, 1.5])
def test_charge_is_the_integral_of_capacitance_and_voltage_its_inverse(m: float) -> None:
    C_j0, phi = 50e-12, 0.7
    V = np.linspace(-2.0, 20.0, 2001)  # forward bias past FC·φ too
    q = charge(V, C_j0, phi, m)
    # q(V) = ∫₀^V C dV (scipy.integrate.quad as the reference)
    for Vk in (-2.0, -0.5, -0.2, 1.0, 7.0, 20.0):
        ref = scipy.integrate.quad(lambda u: capacitance_at(u, C_j0, phi, m), 0.0, Vk)[0]
        assert charge(Vk, C_j0, phi, m) == pytest.approx(ref, rel=1e-9)
    assert charge(0.0, C_j0, phi, m) == 0.0
    back = np.array([voltage(float(x), C_j0, phi, m) for x in q])
    np.testing.assert_allclose(back, V, atol=1e-9)
    # the steppers' form gives the capacitance there too
    law = inverse_law(C_j0, phi, m)
    C_back = np.array([law(float(x))[1] for x in q])
    np.testing.assert_allclose(C_back, capacitance(V, C_j0, phi, m), rtol=1e-8)
    # the capacitance is continuous where the linear continuation starts
    v_fc = -FC * phi
    assert capacitance_at(v_fc - 1e-12, C_j0, phi, m) == pytest.approx(
        capacitance_at(v_fc + 1e-12, C_j0, phi, m), rel=1e-9
    )
    assert [capacitance_at(float(v), C_j0, phi, m) for v in V[::50]] == pytest.approx(
        capacitance(V[::50], C_j0, phi, m), rel=1e-12
    )


def test_the_branch_admittance_is_r_s_in_series_with_c_at_the_bias() -> None:
    el = Varactor("D", "a", "0", 40e-12, 0.7, 0.5, 3.0, 2.0)
    net = Netlist((el, Resistor("Ra", "a", "0", 1e3)))
    sys = assemble(net)
    C_b = capacitance(3.0, 40e-12, 0.7, 0.5)
    assert el.C_bias == pytest.approx(C_b, rel=1e-14)
    w = 2 * math.pi * 7e6
    A = sys.G + 1j * w * sys.C
    # drive node a with 1 A: v_a = 1/(1/Ra + Y)
    rhs = np.zeros(sys.layout.size, complex)
    rhs[sys.layout.node["a"]] = 1.0
    v_a = np.linalg.solve(A, rhs)[sys.layout.node["a"]]
    Y = 1.0 / (2.0 + 1.0 / (1j * w * C_b))
    assert v_a == pytest.approx(1.0 / (1e-3 + Y), rel=1e-9)
    # DC: open, and the branch unknown is the true charge (in volts, q/C_b)
    x_dc = np.linalg.solve(sys.G, sys.b + 0.0)
    assert x_dc[sys.layout.node["a"]] == pytest.approx(0.0, abs=1e-15)


def test_dc_point_puts_the_tuning_voltage_across_the_diode_with_its_true_charge() -> None:
    d = tuned(V_tune="2.5")
    s = solve(d)
    lay = s.system.layout
    el = s.netlist[VARACTOR]
    v_rev = s.op.x[lay.node[VD]] - (0.0 if el.b == "0" else s.op.x[lay.node[el.b]])
    assert v_rev == pytest.approx(2.5, rel=1e-6)
    q = s.op.x[lay.branch[VARACTOR]] * el.C_bias
    assert q == pytest.approx(charge(v_rev, el.C_j0, el.phi, el.m), rel=1e-6)
    assert s.netlist[TUNE_SUPPLY].V == 2.5


@pytest.mark.parametrize("place", ["across-L", "clapp"])
def test_tuning_range_of_an_ideal_tank_follows_the_closed_form(place: str) -> None:
    """A lossless L with C_fixed and the varactor branch: the pencil's pole against
    1/(2π√(L·(C_fixed + C_b(V)))), and the pipeline's ideal resonance the same."""
    L, C_fixed, C_v = 4.7e-6, 150e-12, 1e-9
    C_j0, phi, m = 50e-12, 0.7, 0.5
    for V in (1.0, 4.0, 8.0):
        C_b = float(varactor_branch(C_v, C_j0, phi, m, V))
        if place == "across-L":
            net = Netlist((
                Inductor("L", "t", "0", L), Capacitor("Cf", "t", "0", C_fixed),
                Capacitor("C_v", "t", "vd", C_v), Varactor("D", "vd", "0", C_j0, phi, m, V),
                Resistor("R_tune", "vd", "vt", 1e12), DCSupply("Vt", "vt", V),
            ))  # fmt: skip
            closed = 1 / (2 * math.pi * math.sqrt(L * (C_fixed + C_b)))
        else:  # the branch in series with L, a C_fixed across the pair
            net = Netlist((
                Inductor("L", "t", "tl", L), Capacitor("Cf", "t", "0", C_fixed),
                Capacitor("C_v", "tl", "vd", C_v), Varactor("D", "vd", "0", C_j0, phi, m, V),
                Resistor("R_tune", "vd", "vt", 1e12), DCSupply("Vt", "vt", V),
            ))  # fmt: skip
            closed = 1 / (2 * math.pi * math.sqrt(L * C_fixed * C_b / (C_fixed + C_b)))
        sys = assemble(net)
        lam = scipy.linalg.eigvals(-sys.G, sys.C)
        lam = lam[np.isfinite(lam) & (np.abs(lam.imag) > 1e3)]
        f = float(np.max(np.abs(lam.imag))) / (2 * math.pi)
        assert f == pytest.approx(closed, rel=1e-6)
    # the design's ideal resonance uses the same capacitance
    d = tuned(place=place, V_tune="3")
    t = d.tank
    C_b = float(varactor_branch(1e-9, 50e-12, 0.7, 0.5, 3.0))
    C = tank_capacitance(t.C1, t.C2, t.C3, C_b, place)
    f0 = float(f_ideal_of(part_values(d), 1)[0])
    assert f0 == pytest.approx(1 / (2 * math.pi * math.sqrt(t.L * C)), rel=1e-12)


def test_the_netlist_places_the_branch_and_its_feed() -> None:
    net = build(tuned())
    D = net[VARACTOR]
    assert (D.a, D.b) == (VD, "t2")  # across the coil t1–t2, anode on the tank
    assert net["C_v"].a == "t1" and net["R_tune"].b == VD
    clapp = build(tuned(place="clapp"))
    assert clapp[VARACTOR].b == "t2" and clapp["C_v"].a == "tl" and clapp["L"].b == "tl"


def test_the_stepper_conserves_the_charge_of_a_node_between_capacitors() -> None:
    """The diode's cathode node, fed through 1 TΩ: its charge C_v·(v_vd − v_t1) + q
    changes over hundreds of steps of a large swing only by what G_MIN and R_tune
    let through (their current, summed by the same trapezoidal rule)."""
    d = tuned(R_tune="1T", V_tune="2")
    s = solve(d)
    system, x = transient_system(s)
    lay = system.layout
    el = system.varactors[0]
    x[lay.branch["L"]] += 3e-3  # a large kick: volts on the tank
    stepper = _Stepper(circuit_dynamics(system))

    def node_charge(x):
        return -1e-9 * (x[lay.node["t1"]] - x[lay.node[VD]]) + el.C_bias * x[lay.branch[VARACTOR]]

    q0 = node_charge(x)
    v = stepper.controls(x)
    ph, v_prev = stepper.phi(*v), v
    h = 1.0 / (s.f_osc * 128)
    swing, leaked = 0.0, 0.0

    def leak(x):
        v_vd = x[lay.node[VD]]
        return G_MIN * v_vd + (v_vd - x[lay.node[VTUNE]]) / 1e12

    for _ in range(600):
        x_new, v_new, ph = stepper.step(h, x, v, v_prev, ph)
        leaked += 0.5 * h * (leak(x) + leak(x_new))
        x, v_prev, v = x_new, v, v_new
        swing = max(swing, abs(x[lay.node["t1"]]))
    assert swing > 0.5
    assert leaked != 0.0
    # round-off of 600 solves; a C(v)·dv/dt form drifts by the step's O(h³) each step
    assert abs(node_charge(x) - q0 + leaked) < 1e-10 * abs(q0)


def test_design_fields_presets_and_messages() -> None:
    d = tuned(preset="hyperabrupt", C_j0="80p")
    v = d.varactor
    assert v is not None and v.C_j0 == pytest.approx(80e-12) and v.m_j == 1.0  # given wins
    assert design_from(BASE_CE).varactor is None  # absent: a fixed tank, old files load
    with pytest.raises(ValueError, match="unknown varactor preset"):
        tuned(preset="steep")
    with pytest.raises(ValueError, match="tuning range is empty"):
        tuned(V_min="5", V_max="2")


def test_npn_params_are_untouched_by_the_varactor() -> None:
    # the varactor adds a branch; the transistor stays the circuit's one device
    sys = assemble(build(tuned()))
    assert len(sys.devices) == 1 and isinstance(sys.devices[0], NPN)
    assert isinstance(sys.devices[0].params, NPNParams) and len(sys.varactors) == 1
