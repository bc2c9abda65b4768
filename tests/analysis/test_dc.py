"""DC operating point against the closed-form Thevenin solution, and regions."""

from __future__ import annotations

import math

import pytest
from scipy.optimize import brentq

from ringwise.analysis.dc import Region, operating_point, solve_dc
from ringwise.circuit.mna import assemble
from ringwise.circuit.topologies import build, device_params
from tests.conftest import BASE_CE, design_from


@pytest.mark.parametrize("beta", [50.0, 120.0, 400.0])
def test_divider_bias_matches_thevenin(beta: float) -> None:
    # Thevenin equivalent of the divider with finite β (Sedra & Smith, bias
    # chapter, from memory): VTH − IB·RTH − VBE − (β+1)·IB·RE = 0, with the
    # junction law IC = β·IB = IS·(exp(VBE/VT) − 1); solved here with scipy's brentq.
    design = design_from(BASE_CE, device={"preset": "general-purpose", "beta": beta, "VA": 1e12})
    system = assemble(build(design))
    op = operating_point(system, solve_dc(system))
    b = design.bias
    p = device_params(design)
    VTH = design.supply.Vcc * b.RB2 / (b.RB1 + b.RB2)
    RTH = b.RB1 * b.RB2 / (b.RB1 + b.RB2)

    def residual(IB: float) -> float:
        VBE = p.VT * math.log(beta * IB / p.IS + 1.0)
        return VTH - IB * RTH - VBE - (beta + 1.0) * IB * b.RE

    IB = brentq(residual, 1e-12, VTH / RTH, xtol=1e-18, rtol=1e-13)
    assert pytest.approx(IB, rel=1e-6) == op.IB
    assert pytest.approx(beta * IB, rel=1e-6) == op.IC
    assert pytest.approx((beta + 1) * IB * b.RE, rel=1e-6) == op.VE
    assert pytest.approx(VTH - IB * RTH, rel=1e-6) == op.VB
    assert op.region is Region.ACTIVE


def test_cut_off_when_base_is_held_low() -> None:
    design = design_from(BASE_CE, bias__RB1="10M", bias__RB2="1k")
    system = assemble(build(design))
    assert operating_point(system, solve_dc(system)).region is Region.CUTOFF


def test_saturated_when_collector_resistor_is_too_large() -> None:
    design = design_from(BASE_CE, bias__RC="100k")
    system = assemble(build(design))
    op = operating_point(system, solve_dc(system))
    assert op.region is Region.SATURATION
    assert op.VCE < 0.2


@pytest.mark.parametrize("topology", ["common-base", "common-collector"])
def test_other_forms_bias_like_the_divider_says(topology: str) -> None:
    # Same divider, same RE: the DC point does not depend on which terminal is
    # at signal ground (capacitors are open at DC) except through the collector
    # voltage, so IC agrees with the common-emitter form within the Early effect.
    ce = design_from(BASE_CE)
    other = design_from(BASE_CE, topology=topology, bias__CB="100n")
    ops = []
    for d in (ce, other):
        system = assemble(build(d))
        ops.append(operating_point(system, solve_dc(system)))
    assert pytest.approx(ops[0].IC, rel=0.05) == ops[1].IC
