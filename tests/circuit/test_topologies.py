"""Topologies: the forms' hand formulas against SymPy, and the netlists they build.

Reference library: SymPy (``sympy.solve``, ``sympy.limit``).  The lossless
common-base circuit is written here as two Kirchhoff current equations (the
collector node with R_C and L — and the Clapp C3 — to signal ground, C1 from
collector to emitter, C2 from emitter to ground; base grounded), with the
controlled source replaced by a test current injected into the collector and
drawn from the emitter, the core's return-ratio convention.  Textbook
cross-check: Razavi, *Design of Analog CMOS Integrated Circuits*, LC-oscillator
chapter, start-up condition g_m·R_p ≥ (C1+C2)²/(C1·C2) (from memory).
"""

from __future__ import annotations

import functools
import math

import pytest
import sympy as sp

from ringwise.circuit.netlist import GROUND, Capacitor, Inductor, Resistor
from ringwise.circuit.topologies import (
    GAIN_SETTER,
    OUTPUT_NODE_LABEL,
    T1,
    T2,
    TL,
    build,
    hand_formula,
    ideal_gain,
    series,
    tank_figures,
)
from ringwise.design import Topology
from tests.conftest import BASE_CE, design_from

gm, RC, L, C1, C2, C3, w = sp.symbols("g_m R_C L C_1 C_2 C_3 omega", positive=True)


@functools.cache
def _common_base_T(clapp: bool) -> sp.Expr:
    s, i_t = sp.symbols("s i_t")
    v_c, v_e = sp.symbols("v_c v_e")
    Z_branch = s * L + (1 / (s * C3) if clapp else 0)
    kcl = [
        v_c / RC + v_c / Z_branch + s * C1 * (v_c - v_e) - i_t,
        s * C2 * v_e + s * C1 * (v_e - v_c) + i_t,
    ]
    sol = sp.solve(kcl, [v_c, v_e], dict=True)[0]
    # T = −g_m·v_be/i_t with the base at ground: v_be = −v_e.
    return sp.simplify((gm * sol[v_e] / i_t).subs(s, sp.I * w))


def test_common_base_formula_is_the_lossless_return_ratio_at_zero_phase() -> None:
    T = _common_base_T(clapp=False)
    hand = gm * RC * C1 * C2 / (C1 + C2) ** 2
    w0 = 1 / sp.sqrt(L * C1 * C2 / (C1 + C2))
    # zero phase where ω² = ω0²·(1 + (ωL/R_C)²); there T = hand/(1 + (ωL/R_C)²)
    w_x = sp.symbols("w_x", positive=True)
    values = {gm: 0.04, RC: 2200.0, L: 10e-6, C1: 1e-9, C2: 2.2e-9}
    # solve ω² = ω0²(1 + (ωL/R_C)²) numerically for these values
    w_num = sp.sqrt((w0**2 / (1 - w0**2 * L**2 / RC**2)).subs(values))
    T_num = complex(T.subs(values).subs(w, w_num).evalf(30))
    expected = float((hand / (1 + (w_x * L / RC) ** 2)).subs(values).subs(w_x, w_num))
    assert T_num.imag == pytest.approx(0.0, abs=1e-9 * abs(T_num))
    assert T_num.real == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("clapp", [False, True])
def test_common_base_formula_is_the_high_resistance_limit(clapp: bool) -> None:
    # With R_C ≫ ωL the zero-phase frequency is the tank's; there T/R_C → the hand figure.
    T = _common_base_T(clapp)
    C_s = 1 / (1 / C1 + 1 / C2 + (1 / C3 if clapp else 0))
    g = sp.symbols("g", positive=True)
    per_ohm = sp.limit((T / RC).subs(RC, 1 / g).subs(w, 1 / sp.sqrt(L * C_s)), g, 0)
    assert sp.simplify(per_ohm - gm * C1 * C2 / (C1 + C2) ** 2) == 0


def test_core_hand_formula_has_the_same_value() -> None:
    design = design_from(
        BASE_CE, topology="common-base", bias__RC="2k2", bias__CE=None, bias__CB="100n"
    )
    h = hand_formula(design, 0.04)
    t = design.tank
    expected = (gm * RC * C1 * C2 / (C1 + C2) ** 2).subs({gm: 0.04, RC: 2200.0, C1: t.C1, C2: t.C2})
    assert h.value == pytest.approx(float(expected), rel=1e-14)
    assert h.symbols == "g_m·RC·C1·C2/(C1+C2)²"


def _ends(el) -> set[str]:
    return {el.a, el.b}


@pytest.mark.parametrize(
    ("topology", "c1", "c2", "coil"),
    [
        ("common-emitter", {T1, GROUND}, {T2, GROUND}, {T1, T2}),
        ("common-base", {T1, T2}, {T2, GROUND}, {T1, GROUND}),
        ("common-collector", {T1, GROUND}, {T2, T1}, {T2, GROUND}),
    ],
)
def test_triangle_corners_per_form(topology: str, c1, c2, coil) -> None:
    # The grounded corner of each form (the module's table; Clarke & Hess,
    # Colpitts forms, from memory).
    net = build(design_from(BASE_CE, topology=topology, bias__CB="100n"))
    assert _ends(net["C1"]) == c1
    assert _ends(net["C2"]) == c2
    assert _ends(net["L"]) == coil
    assert GAIN_SETTER[Topology(topology)] in net
    assert Topology(topology) in OUTPUT_NODE_LABEL


def test_clapp_capacitor_in_series_with_the_coil() -> None:
    net = build(design_from(BASE_CE, tank__C3="220p"))
    assert _ends(net["L"]) == {T1, TL}
    assert _ends(net["C3"]) == {TL, T2}
    assert isinstance(net["C3"], Capacitor)


def test_coil_loss_from_q_at_the_ideal_resonance() -> None:
    # R_s = ω0·L/Q_L with ω0 = 1/√(L·C_s) (the module's convention).
    d = design_from(BASE_CE)
    C_s = series(1e-9, 2.2e-9)
    w0 = 1.0 / math.sqrt(10e-6 * C_s)
    figs = tank_figures(d)
    assert figs.C_series == pytest.approx(C_s, rel=1e-12)
    assert figs.R_s == pytest.approx(w0 * 10e-6 / 90.0, rel=1e-12)
    coil = build(d)["L"]
    assert isinstance(coil, Inductor) and coil.R_s == pytest.approx(figs.R_s, rel=1e-12)


def test_load_sits_at_t1_and_is_optional() -> None:
    assert "R_load" not in build(design_from(BASE_CE))
    loaded = build(design_from(BASE_CE, load={"R_load": "10k"}))
    assert isinstance(loaded["R_load"], Resistor) and _ends(loaded["R_load"]) == {T1, GROUND}


def test_hand_gain_formulas() -> None:
    # g_m·R_C·C1/C2 (common emitter), g_m·R_C·C1·C2/(C1+C2)² (common base),
    # g_m·R_E·C1/C2 (common collector): the module's docstring (hand method).
    gm = 0.04
    ce = design_from(BASE_CE)
    cb = design_from(BASE_CE, topology="common-base", bias__CB="100n")
    cc = design_from(BASE_CE, topology="common-collector")
    assert ideal_gain(ce, gm) == pytest.approx(gm * 1e3 * 1e-9 / 2.2e-9)
    assert ideal_gain(cb, gm) == pytest.approx(gm * 1e3 * 1e-9 * 2.2e-9 / (3.2e-9) ** 2)
    assert ideal_gain(cc, gm) == pytest.approx(gm * 1e3 * 1e-9 / 2.2e-9)
