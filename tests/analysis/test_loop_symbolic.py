"""The MNA return ratio against an independent nodal derivation in SymPy.

The common-emitter small-signal circuit is written here by hand as Kirchhoff
current equations (node by node, admittances between nodes), solved
into a matrix by SymPy, and solved for the test-current response in 30-digit
arithmetic. It must equal the core's T(jω) to 1e-9 relative.
Reference libraries: SymPy (``sympy.linear_eq_to_matrix``, ``sympy.lambdify``)
and its arbitrary-precision backend mpmath (``mpmath.lu_solve``).
"""

from __future__ import annotations

import functools
import math

import mpmath
import numpy as np
import pytest
import sympy as sp

from ringwise.analysis.loop import return_ratio
from ringwise.analysis.operating import solve
from ringwise.circuit.mna import G_MIN
from tests.conftest import BASE_CE, design_from


@functools.cache
def _symbolic_T():
    s = sp.Symbol("s")
    names = "gm g_pi g_o g_r C_pi C_mu RC RB1 RB2 RE CE C1 C2 Cc1 Cc2 L R_s R_load gmin"
    sym = dict(zip(names.split(), sp.symbols(names), strict=True))
    g = sym
    # Unknowns: v_c, v_b, v_e, v_t1, v_t2 (the supply node is at signal ground).
    vc, vb, ve, v1, v2 = sp.symbols("v_c v_b v_e v_t1 v_t2")
    Y_L = 1 / (g["R_s"] + s * g["L"])
    # Currents leaving each node through the passive elements and the transistor
    # (without its g_m source), equal to the injected test current i_t = 1.
    vbe, vce = vb - ve, vc - ve
    i_base = g["g_pi"] * vbe + g["g_r"] * vce + s * g["C_pi"] * vbe
    i_mu = s * g["C_mu"] * (vb - vc)
    i_col = g["g_o"] * vce
    kcl = [
        # collector: RC to ground, Cc1 to t1, C_mu from base, g_o to emitter, test current in
        vc / g["RC"] + s * g["Cc1"] * (vc - v1) - i_mu + i_col + g["gmin"] * vc - 1,
        # base: divider, Cc2 from t2, base current and C_mu
        vb / g["RB1"] + vb / g["RB2"] + s * g["Cc2"] * (vb - v2) + i_base + i_mu + g["gmin"] * vb,
        # emitter: RE || CE, returns base and collector currents, test current out
        ve / g["RE"] + s * g["CE"] * ve - i_base - i_col + g["gmin"] * ve + 1,
        # tank end t1: C1, load, L to t2, Cc1 from collector
        s * g["C1"] * v1
        + v1 / g["R_load"]
        + Y_L * (v1 - v2)
        + s * g["Cc1"] * (v1 - vc)
        + g["gmin"] * v1,
        # tank end t2: C2, L from t1, Cc2 to base
        s * g["C2"] * v2 + Y_L * (v2 - v1) + s * g["Cc2"] * (v2 - vb) + g["gmin"] * v2,
    ]
    unknowns = [vc, vb, ve, v1, v2]
    A, rhs = sp.linear_eq_to_matrix(kcl, unknowns)
    order = [s, *sym.values()]
    return sym, sp.lambdify(order, A, modules="mpmath"), sp.lambdify(order, rhs, modules="mpmath")


@pytest.mark.parametrize("f_factor", [0.5, 0.97, 1.0, 1.03, 2.0])
def test_return_ratio_matches_sympy(f_factor: float) -> None:
    design = design_from(BASE_CE, load={"R_load": 4700.0})
    solved = solve(design)
    hp, t, b, k = solved.hybrid, design.tank, design.bias, design.coupling
    sym, A, rhs = _symbolic_T()
    values = {
        "gm": hp.gm, "g_pi": hp.g_pi, "g_o": hp.g_o, "g_r": hp.g_r,
        "C_pi": hp.C_pi, "C_mu": hp.C_mu, "RC": b.RC, "RB1": b.RB1, "RB2": b.RB2,
        "RE": b.RE, "CE": b.CE, "C1": t.C1, "C2": t.C2, "Cc1": k.Cc1, "Cc2": k.Cc2,
        "L": t.L, "R_s": solved.tank.R_s, "R_load": 4700.0, "gmin": G_MIN,
    }  # fmt: skip
    f = f_factor * solved.tank.f_ideal
    mpmath.mp.dps = 30
    args = [mpmath.mpc(0, repr(2 * math.pi * f))] + [mpmath.mpf(repr(values[n])) for n in sym]
    x = mpmath.lu_solve(mpmath.matrix(A(*args)), mpmath.matrix(rhs(*args)))
    expected = complex(-args[1 + list(sym).index("gm")] * (x[1] - x[2]))
    got = complex(return_ratio(solved.ss, 2j * math.pi * np.array([f]))[0])
    assert abs(got - expected) <= 1e-9 * abs(expected)
