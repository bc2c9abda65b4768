"""The forms' hand formulas against an independent derivation in SymPy.

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

import pytest
import sympy as sp

from ringwise.circuit.topologies import hand_formula
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
