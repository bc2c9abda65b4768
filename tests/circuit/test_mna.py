"""The one assembly: linear stamps, the one device-current function and its Jacobian."""

from __future__ import annotations

import math

import numpy as np
import pytest

from ringwise.analysis.criteria import Region, region_of
from ringwise.circuit.mna import (
    SPARSE_STAMP_BATCH,
    LinearSystem,
    assemble,
    assemble_batch,
    device_currents,
    incidence,
    incidence_of,
    layout_of,
    linear_patterns,
    nonlinear_residual,
    restamp,
    small_signal,
)
from ringwise.circuit.netlist import GROUND, NPN, DCSupply, Netlist, NPNParams, Resistor
from ringwise.circuit.npn import HybridPi, junction_currents
from ringwise.circuit.topologies import build
from tests.conftest import BASE_CE, design_from

PARAMS = NPNParams(IS=1e-14, beta=120.0, beta_R=1.0, VA=80.0, VT=0.025852, fT=300e6, C_mu=2e-12)
#: (v_BE, v_CE) in each region the transport model has.
REGIONS = {
    "active": (0.65, 5.0),
    "saturation": (0.70, 0.05),
    "cut-off": (0.10, 5.0),
    "reverse": (-0.2, -0.9),
}
#: Relative step of the central differences (common practice, no source).
FD_STEP = 1e-6


def _fd(fun, v: float) -> float:
    h = FD_STEP * max(abs(v), 1.0)
    return (fun(v + h) - fun(v - h)) / (2.0 * h)


@pytest.mark.parametrize("region", list(REGIONS))
def test_junction_derivatives_match_central_differences(region: str) -> None:
    # Every partial derivative of the transport model (g_m, g_o, g_π and g_r,
    # saturation and reverse included) against central finite differences of
    # the currents themselves (common practice, no source).
    vbe, vce = REGIONS[region]
    args = (PARAMS.IS, PARAMS.beta, PARAMS.beta_R, PARAMS.VA, PARAMS.VT)
    q = junction_currents(vbe, vce, *args)
    for name, d_vbe, d_vce in (
        ("IC", q.dIC_dvbe, q.dIC_dvce),
        ("IB", q.dIB_dvbe, q.dIB_dvce),
    ):
        fd_vbe = _fd(lambda v, n=name: getattr(junction_currents(v, vce, *args), n), vbe)
        fd_vce = _fd(lambda v, n=name: getattr(junction_currents(vbe, v, *args), n), vce)
        scale = abs(d_vbe) + abs(d_vce) + 1e-18
        assert abs(fd_vbe - d_vbe) <= 1e-5 * scale, (name, "vbe")
        assert abs(fd_vce - d_vce) <= 1e-5 * scale, (name, "vce")


def test_regions_as_the_criteria_name_them() -> None:
    args = (PARAMS.IS, PARAMS.beta, PARAMS.beta_R, PARAMS.VA, PARAMS.VT)
    named = {}
    for region, (vbe, vce) in REGIONS.items():
        q = junction_currents(vbe, vce, *args)
        named[region] = region_of(q.I_F, q.I_R)
    assert named["active"] is Region.ACTIVE
    assert named["saturation"] is Region.SATURATION
    assert named["cut-off"] is Region.CUTOFF
    assert named["reverse"] is Region.CUTOFF
    # g_r is zero in the forward-active region to within the reverse junction's leakage.
    active = junction_currents(*REGIONS["active"], *args)
    saturated = junction_currents(*REGIONS["saturation"], *args)
    assert abs(active.dIB_dvce) < 1e-9 * active.dIB_dvbe
    assert abs(saturated.dIB_dvce) > 0.1 * saturated.dIB_dvbe


@pytest.mark.parametrize("region", list(REGIONS))
def test_residual_jacobian_matches_central_differences(region: str) -> None:
    # The nodal Jacobian G + P·Jφ·Wᵀ against central differences of F(x) over
    # every unknown (common practice, no source).
    system = assemble(build(design_from(BASE_CE)))
    lay = system.layout
    x = np.zeros(lay.size)
    vbe, vce = REGIONS[region]
    x[lay.node["e"]] = 1.0
    x[lay.node["b"]] = 1.0 + vbe
    x[lay.node["c"]] = 1.0 + vce
    x[lay.node["vcc"]] = 10.0
    F, J = nonlinear_residual(system, x)
    for k in range(lay.size):
        h = FD_STEP * max(abs(x[k]), 1.0)
        xp, xm = x.copy(), x.copy()
        xp[k] += h
        xm[k] -= h
        col = (nonlinear_residual(system, xp)[0] - nonlinear_residual(system, xm)[0]) / (2 * h)
        np.testing.assert_allclose(col, J[:, k], rtol=1e-5, atol=1e-9 * np.abs(J).max())
    assert F.shape == (lay.size,)


def test_device_currents_batch_equals_singles() -> None:
    system = assemble(build(design_from(BASE_CE)))
    inc = incidence_of(system)
    rng = np.random.default_rng(3)
    xs = rng.uniform(0.0, 2.0, (6, system.layout.size))
    batch = device_currents(inc, xs, PARAMS)
    for i, x in enumerate(xs):
        one = device_currents(inc, x, PARAMS)
        np.testing.assert_array_equal(one.current, batch.current[i])
        np.testing.assert_array_equal(one.jacobian, batch.jacobian[i])


def test_grounded_terminal_has_no_row() -> None:
    # A transistor with its emitter at ground: the device stamps only c and b.
    net = Netlist(
        (
            DCSupply("V", "vcc", 5.0),
            Resistor("RC", "vcc", "c", 1e3),
            Resistor("RB", "vcc", "b", 470e3),
            NPN("Q", "c", "b", GROUND, PARAMS),
        )
    )
    system = assemble(net)
    lay = system.layout
    x = np.zeros(lay.size)
    x[lay.node["b"]], x[lay.node["c"]], x[lay.node["vcc"]] = 0.65, 2.0, 5.0
    d = device_currents(incidence(lay, system.devices[0]), x, PARAMS)
    q = junction_currents(0.65, 2.0, PARAMS.IS, PARAMS.beta, PARAMS.beta_R, PARAMS.VA, PARAMS.VT)
    assert d.current[lay.node["c"]] == pytest.approx(q.IC, rel=1e-12)
    assert d.current[lay.node["b"]] == pytest.approx(q.IB, rel=1e-12)


def test_kirchhoff_device_currents_sum_to_zero() -> None:
    # Whatever enters the collector and base leaves the emitter (KCL).
    system = assemble(build(design_from(BASE_CE)))
    x = np.linspace(0.1, 1.5, system.layout.size)
    d = device_currents(incidence_of(system), x, PARAMS)
    assert abs(d.current.sum()) <= 1e-15 * np.abs(d.current).max()


def test_batch_assembly_equals_assembly() -> None:
    netlist = build(design_from(BASE_CE))
    pat = linear_patterns(netlist)
    values = {}
    for name, field, _target, _M in pat.terms:
        el = netlist[name]
        values[(name, field)] = np.array([1.0 / el.R if field == "G_R" else getattr(el, field)])
    batch = assemble_batch(pat, values)
    single = assemble(netlist)
    np.testing.assert_allclose(batch.G[0], single.G, rtol=1e-14, atol=1e-18)
    np.testing.assert_allclose(batch.C[0], single.C, rtol=1e-14, atol=1e-30)
    np.testing.assert_allclose(batch.b[0], single.b)


def test_restamp_equals_fresh_assembly() -> None:
    netlist = build(design_from(BASE_CE))
    system = assemble(netlist)
    changed = restamp(system, netlist, {"RC": {"R": 2.2e3}, "L": {"R_s": 0.0}})
    fresh = assemble(netlist.replace("RC", R=2.2e3).replace("L", R_s=0.0))
    np.testing.assert_allclose(changed.G, fresh.G, rtol=1e-13, atol=1e-18)
    opened = restamp(system, netlist, {"RC": {"R": math.inf}})
    assert opened.G[layout_of(netlist).node["c"], layout_of(netlist).node["vcc"]] == 0.0


def test_small_signal_full_matrix_is_the_linearised_jacobian() -> None:
    # With C_π, C_μ aside, G + g_m·u·wᵀ of the small signal is the DC Jacobian
    # at the same point: the two stamps describe the same device.
    system = assemble(build(design_from(BASE_CE)))
    lay = system.layout
    x = np.zeros(lay.size)
    x[lay.node["e"]], x[lay.node["b"]], x[lay.node["c"]] = 1.0, 1.65, 6.0
    x[lay.node["vcc"]] = 10.0
    _F, J = nonlinear_residual(system, x)
    d = device_currents(incidence_of(system), x, system.devices[0].params)
    q = d.junction
    hp = HybridPi(
        gm=float(q.dIC_dvbe),
        g_pi=float(q.dIB_dvbe),
        g_o=float(q.dIC_dvce),
        g_r=float(q.dIB_dvce),
        C_pi=0.0,
        C_mu=0.0,
    )
    np.testing.assert_allclose(small_signal(system, hp).G_full, J, rtol=1e-12, atol=1e-15)


def test_large_batch_small_signal_equals_each_member() -> None:
    # From SPARSE_STAMP_BATCH circuits on, the hybrid-π and the junction
    # capacitances go into their few entries one by one; every member must get
    # exactly the matrices it gets alone.
    system = assemble(build(design_from(BASE_CE)))
    n = SPARSE_STAMP_BATCH
    rng = np.random.default_rng(5)
    g = rng.uniform(0.5, 2.0, (6, n))
    hp = HybridPi(gm=g[0] * 0.04, g_pi=g[1] * 3e-4, g_o=g[2] * 1e-5, g_r=g[3] * -1e-9,
                  C_pi=g[4] * 20e-12, C_mu=g[5] * 2e-12)  # fmt: skip
    G = np.broadcast_to(system.G, (n, *system.G.shape))
    C = np.broadcast_to(system.C, (n, *system.C.shape))
    batch = small_signal(LinearSystem(system.layout, G, C, system.b, system.devices), hp)
    for i in (0, n // 2, n - 1):
        one = small_signal(
            system, HybridPi(*(float(getattr(hp, f)[i]) for f in HybridPi.__slots__))
        )
        np.testing.assert_array_equal(batch.G[i], one.G)
        np.testing.assert_array_equal(batch.C[i], one.C)
