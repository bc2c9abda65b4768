"""The RF-choke collector feed: netlist, hand figure, threshold, budget, warnings, spread.

External checks: a parallel L-C at its resonance is an open circuit (circuit
theory, any textbook, from memory), so a choke whose self-resonance sits
exactly at f_osc, with its loss resistance equal to RC, leaves the loop of
the RC-fed circuit unchanged — provided the bias does not see the difference
(V_A huge, so the collector voltage does not move I_C).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from pydantic import ValidationError

from ringwise.analysis.analyze import analyze
from ringwise.analysis.budget import loop_budget
from ringwise.analysis.operating import solve
from ringwise.analysis.spread import analyse_batch, draw, values_at
from ringwise.analysis.threshold import find_threshold
from ringwise.circuit.netlist import Capacitor, Inductor, Resistor
from ringwise.circuit.topologies import (
    CHOKE,
    CHOKE_LOSS,
    CHOKE_SELF_C,
    build,
    choke_figures,
    gain_setter,
    hand_formula,
    tank_figures,
)
from ringwise.design import get_param, with_param
from tests.conftest import BASE_CE, design_from

CHOKE_FEED = {"feed": "choke", "L_ch": "100u", "Q_ch": 30}


def choke_design(topology: str = "common-emitter", **bias):
    extra = {"CB": "100n"} if topology == "common-base" else {}
    return design_from(
        BASE_CE, topology=topology, bias={**BASE_CE["bias"], **extra, **CHOKE_FEED, **bias}
    )


def test_the_choke_replaces_rc_in_the_netlist() -> None:
    design = choke_design(f_ch="20M")
    net = build(design)
    assert "RC" not in net
    L, R, C = net[CHOKE], net[CHOKE_LOSS], net[CHOKE_SELF_C]
    assert isinstance(L, Inductor) and isinstance(R, Resistor) and isinstance(C, Capacitor)
    assert (L.a, L.b) == ("vcc", "c") and pytest.approx(100e-6) == L.L and L.R_s == 0.0
    w0 = 2 * math.pi * tank_figures(design).f_ideal
    assert pytest.approx(30 * w0 * 100e-6, rel=1e-12) == R.R
    # self-resonance: 1/(2π√(L·C)) = f_ch
    assert 1 / (2 * math.pi * math.sqrt(L.L * C.C)) == pytest.approx(20e6, rel=1e-12)
    assert CHOKE_SELF_C not in build(choke_design())


def test_the_collector_sits_at_the_supply_with_a_choke() -> None:
    s = solve(choke_design())
    assert pytest.approx(s.design.supply.Vcc, abs=1e-6) == s.op.VC


def test_design_requires_the_choke_values_and_reports_rc_unused() -> None:
    with pytest.raises(ValidationError, match=r"bias\.L_ch is required by the common-emitter form"):
        design_from(BASE_CE, bias={**BASE_CE["bias"], "feed": "choke", "Q_ch": 50})
    design = choke_design()
    assert design.unused_parts() == ["RC"]
    assert gain_setter(design) == "Q_ch"
    # the common-collector form has no collector load: the choke is ignored there
    cc = design_from(BASE_CE, topology="common-collector", bias={**BASE_CE["bias"], **CHOKE_FEED})
    assert not cc.choke_fed and gain_setter(cc) == "RE"
    assert set(cc.unused_parts()) == {"RC", "CE", "L_ch", "Q_ch"}
    # with the resistor feed the choke values typed are kept but unused
    kept = design_from(BASE_CE, bias={**BASE_CE["bias"], "L_ch": "1m", "Q_ch": 40})
    assert kept.unused_parts() == ["L_ch", "Q_ch"]


@pytest.mark.parametrize("topology", ["common-emitter", "common-base"])
def test_a_choke_resonant_at_f_osc_loads_like_its_loss_resistor(topology: str) -> None:
    # Parallel L-C at resonance is an open (textbook, from memory): the loop
    # then sees only Rch, as the RC-fed circuit sees RC.
    ideal_device = {"beta": 200, "IS": 1e-14, "VA": 1e12, "fT": 300e6, "C_mu": 0.0}
    extra = {"CB": "100n"} if topology == "common-base" else {}
    rc = design_from(
        BASE_CE, topology=topology, bias={**BASE_CE["bias"], **extra}, device=ideal_device
    )
    ref = solve(rc)
    w0 = 2 * math.pi * ref.tank.f_ideal
    L_ch = 470e-6
    ch = design_from(
        BASE_CE,
        topology=topology,
        device=ideal_device,
        bias={
            **BASE_CE["bias"], **extra, "feed": "choke", "L_ch": L_ch,
            "Q_ch": rc.bias.RC / (w0 * L_ch), "f_ch": ref.f_osc,
        },
    )  # fmt: skip
    s = solve(ch)
    assert s.hybrid.gm == pytest.approx(ref.hybrid.gm, rel=1e-9)
    assert s.f_osc == pytest.approx(ref.f_osc, rel=1e-6)
    assert s.gain == pytest.approx(ref.gain, rel=1e-6)


def test_hand_formula_uses_the_chokes_loss_resistance() -> None:
    design = choke_design()
    s = solve(design)
    R_p = choke_figures(design).R_p
    h = hand_formula(design, s.hybrid.gm)
    assert h.value == pytest.approx(s.hybrid.gm * R_p * 1e-9 / 2.2e-9, rel=1e-12)
    assert h.symbols == "g_m·R_p·C1/C2"


def test_the_chokes_q_threshold_brings_the_loop_gain_to_one() -> None:
    design = choke_design()
    th = find_threshold(design, "Q_ch")
    assert th.value is not None and th.value < 30
    assert solve(with_param(design, "Q_ch", th.value)).gain == pytest.approx(1.0, abs=2e-6)
    r = analyze(design)
    assert r.startup.threshold_param == "Q_ch"
    assert r.startup.threshold_value == pytest.approx(th.value, rel=1e-6)


def test_the_budget_lists_the_choke_as_the_gain_setter() -> None:
    s = solve(choke_design())
    lines = {b.element: b for b in loop_budget(s, "Q_ch")}
    assert "RC" not in lines
    assert lines[CHOKE_LOSS].in_hand and lines[CHOKE_LOSS].share is None
    assert lines[CHOKE_LOSS].gain_without > s.gain


@pytest.mark.parametrize(
    ("ratio", "code"),
    [(1.2, "choke-resonance"), (0.8, "choke-resonance"), (0.4, "choke-capacitive"), (5, None)],
)
def test_a_warning_when_the_choke_resonates_near_or_below_f_osc(ratio: float, code) -> None:
    f_osc = solve(choke_design()).f_osc
    r = analyze(choke_design(f_ch=ratio * f_osc))
    codes = {w.code for w in r.warnings}
    found = codes & {"choke-resonance", "choke-capacitive"}
    assert found == ({code} if code else set())


def test_spread_batch_reproduces_the_single_solve_with_a_choke() -> None:
    design = choke_design(f_ch="25M")
    draws = draw(design, 3, seed=3)
    nominal = {part: np.full(3, get_param(design, part)) for part in draws.values}
    batch = analyse_batch(design, nominal, design.temperature_C)
    s = solve(design)
    assert batch.f_osc == pytest.approx(np.full(3, s.f_osc), rel=1e-7)
    assert batch.gain == pytest.approx(np.full(3, s.gain), rel=1e-6)
    # and the choke's values are drawn within their tolerance
    vals = values_at(design, draws, 25.0)
    assert np.all(np.abs(vals["Q_ch"] / 30 - 1) <= design.tolerances.Q_L)
