"""Power, voltage, harmonics and pulling at the load (app/analysis/output.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import trapezoid

from ringwise.analysis.analyze import analyze
from ringwise.analysis.operating import solve
from ringwise.analysis.output import load_output
from ringwise.analysis.periodic import steady_state
from ringwise.circuit.topologies import series
from ringwise.design import Design
from tests.conftest import BASE_CE, design_from, ideal_data


@pytest.mark.parametrize("R_load", ["2k2", "10k"])
def test_power_is_the_rms_voltage_squared_over_the_load(R_load: str) -> None:
    design = design_from(BASE_CE, load={"R_load": R_load})
    s = solve(design)
    ss = steady_state(s)
    out = load_output(s, ss)
    assert out is not None and out.P is not None
    # V_rms from the orbit's waveform, integrated by scipy.integrate.trapezoid
    # (reference library) over one period.
    t, v = np.asarray(ss.waveforms["t"]), np.asarray(ss.waveforms["t1"])
    V_rms = math.sqrt(trapezoid(v**2, t) / (t[-1] - t[0]))
    assert pytest.approx(V_rms**2 / design.load.R_load, rel=1e-3) == out.P
    assert out.P_dBm == pytest.approx(10 * math.log10(out.P / 1e-3), abs=1e-9)
    # the resistor's own dissipation from the steady state's part table agrees
    P_part = next(p.P for p in ss.parts if p.part == "R_load")
    assert pytest.approx(P_part, rel=1e-3) == out.P
    assert out.harmonics_dBc == pytest.approx(ss.harmonics_dBc, abs=1e-9)
    assert out.V_peak >= math.sqrt(2) * out.V_rms * 0.9


def test_a_heavier_load_pulls_the_frequency_and_the_figure_says_by_how_much() -> None:
    design = design_from(BASE_CE, load={"R_load": "3k3", "change": 0.2})
    s = solve(design)
    out = load_output(s, None)
    heavier = solve(design_from(BASE_CE, load={"R_load": 3300 * 0.8}))
    assert out.pull_ppm == pytest.approx((heavier.f_osc / s.f_osc - 1) * 1e6, rel=1e-6)
    assert out.P is None  # no steady state given: no power is invented


def test_a_buffer_capacitance_adds_to_c1_in_the_ideal_tank() -> None:
    # Ideal common-emitter circuit: C_load sits across C1 (t1 to ground), so the
    # frequency is 1/(2π√(L·series(C1 + C_load, C2))) (closed form of the LC tank).
    data = ideal_data("common-emitter")
    data["load"] = {"R_load": 1e9, "C_load": 220e-12}
    s = solve(Design.model_validate(data))
    C_s = series(1e-9 + 220e-12, 2.2e-9)
    assert s.f_osc == pytest.approx(1 / (2 * math.pi * math.sqrt(10e-6 * C_s)), rel=1e-4)


def test_the_result_carries_the_output_only_with_a_load() -> None:
    assert analyze(design_from(BASE_CE)).output is None
    r = analyze(design_from(BASE_CE, load={"R_load": "4k7", "C_load": "10p"}))
    assert r.output is not None and r.output.P_dBm is not None
    assert r.output.C_load == pytest.approx(10e-12)
    assert r.output.change == pytest.approx(0.1)
