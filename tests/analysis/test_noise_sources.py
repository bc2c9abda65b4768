"""The circuit's noise sources (ringwise.analysis.noise_sources)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from scipy import constants

from ringwise.analysis.noise_sources import (
    BASE_FLICKER,
    BASE_SHOT,
    COLLECTOR_SHOT,
    SUPPLY,
    THERMAL,
    circuit_sources,
)
from ringwise.analysis.operating import solve
from ringwise.circuit.mna import incidence
from ringwise.circuit.netlist import Inductor, Resistor
from ringwise.design import Design

SAMPLE = Path(__file__).resolve().parents[2] / "sample_designs" / "proximity-exciter-150k.json"
T = 300.0


@pytest.fixture(scope="module")
def solved():
    return solve(Design.model_validate(json.loads(SAMPLE.read_text(encoding="utf-8"))))


def _by_name(sources):
    return {s.name: s for s in sources}


def test_every_resistor_the_coil_loss_and_the_load_are_thermal_sources(solved):
    lay = solved.system.layout
    sources = _by_name(circuit_sources(solved.netlist, lay, T, 1e-15, 1.0))
    phi = np.zeros((1, 2))
    resistors = [el for el in solved.netlist if isinstance(el, Resistor)]
    assert "R_load" in {r.name for r in resistors}
    for r in resistors:
        src = sources[f"{r.name} {THERMAL}"]
        # Johnson–Nyquist: 4kT/R, one-sided (Nyquist, Phys. Rev. 32, 1928)
        assert src.density(phi)[0] == pytest.approx(4 * constants.k * T / r.R, rel=1e-12)
        assert np.array_equal(src.vector, lay.unit(r.a) - lay.unit(r.b))
    coil = next(el for el in solved.netlist if isinstance(el, Inductor))
    src = sources[f"{coil.name} {THERMAL}"]
    assert src.density(phi)[0] == pytest.approx(4 * constants.k * T * coil.R_s, rel=1e-12)
    assert src.vector[lay.branch[coil.name]] == 1.0 and np.count_nonzero(src.vector) == 1


def test_shot_and_flicker_follow_the_device_currents(solved):
    lay = solved.system.layout
    dev = solved.system.devices[0]
    inc = incidence(lay, dev)
    sources = _by_name(circuit_sources(solved.netlist, lay, T, 2e-15, 1.5))
    phi = np.array([[1e-3, 1e-5], [4e-3, -4e-5]])
    q = constants.e
    # shot noise 2qI (Gray, Hurst, Lewis & Meyer, ch. 11, from memory)
    collector = sources[f"{dev.name} {COLLECTOR_SHOT}"]
    assert collector.density(phi) == pytest.approx(2 * q * np.array([1e-3, 4e-3]))
    assert np.array_equal(collector.vector, inc.P_C)
    base = sources[f"{dev.name} {BASE_SHOT}"]
    assert base.density(phi) == pytest.approx(2 * q * np.array([1e-5, 4e-5]))
    assert np.array_equal(base.vector, inc.P_B)
    flicker = sources[f"{dev.name} {BASE_FLICKER}"]
    assert flicker.flicker
    # K_F·I_B^A_F at 1 Hz (the SPICE flicker law, from memory)
    assert flicker.density(phi) == pytest.approx(2e-15 * np.array([1e-5, 4e-5]) ** 1.5)


def test_flicker_off_and_supply_on_as_entered(solved):
    lay = solved.system.layout
    names = _by_name(circuit_sources(solved.netlist, lay, T, 0.0, 1.0))
    assert not any(s.flicker for s in names.values())
    assert not any(s.kind == SUPPLY for s in names.values())
    with_supply = _by_name(circuit_sources(solved.netlist, lay, T, 0.0, 1.0, 3e-9))
    src = with_supply[f"Vcc {SUPPLY}"]
    assert src.density(np.zeros((1, 2)))[0] == pytest.approx(9e-18)
    assert src.vector[lay.branch["Vcc"]] == 1.0
