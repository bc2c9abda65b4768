"""The computed diffusion constant against a stochastic transient of the whole circuit.

Reference: brute force, no published value — an ensemble of noisy runs of the
circuit (drift-implicit Euler–Maruyama on the transient's own trapezoidal
stepper; Kloeden & Platen 1992, from memory) with every white noise density
scaled up by FACTOR so that the phase wander is measurable in a bounded run,
then scaled back.  The issue's tolerance: within 25 %.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from ringwise.analysis.noise_sources import circuit_sources
from ringwise.analysis.operating import solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.phase_noise import oscillator_noise, phase_noise
from ringwise.analysis.stepper import circuit_dynamics
from ringwise.analysis.stochastic import circuit_phi_batch, measure_diffusion
from ringwise.analysis.transient import transient_system
from ringwise.design import Design

SAMPLES = Path(__file__).resolve().parents[2] / "sample_designs"
#: The stated scale-up of every noise density (and the scale-down of the result):
#: large enough that the wander is far above round-off, small enough that the
#: junction voltages' own noise stays well below V_T (linear regime).
FACTOR = 1e4


def _follower_with_a_stiff_bias() -> Design:
    """The follower sample with a low-impedance divider and a smaller input coupling
    capacitor: its bias settles in about 30 periods (an invented variant)."""
    doc = json.loads((SAMPLES / "follower-test-source-4M.json").read_text(encoding="utf-8"))
    doc["bias"].update(RB1="3k3", RB2="1k")
    doc["coupling"]["Cc2"] = "2n2"
    return Design.model_validate(doc)


def _clapp() -> Design:
    doc = json.loads((SAMPLES / "clapp-clock-1M.json").read_text(encoding="utf-8"))
    return Design.model_validate(doc)


@pytest.mark.parametrize(
    ("make", "runs", "periods", "skip"),
    [(_clapp, 256, 140, 40), (_follower_with_a_stiff_bias, 64, 100, 30)],
    ids=["common-emitter-clapp", "common-collector"],
)
def test_ensemble_wander_matches_the_computed_diffusion(make, runs, periods, skip):
    design = make()
    solved = solve(design)
    steady = steady_state(solved, warm=False)
    assert steady.behaviour == "settles"
    on = oscillator_noise(solved, steady)
    system, _kick = transient_system(solved)
    # white sources only: the ensemble measures the white diffusion constant
    sources = circuit_sources(solved.netlist, system.layout, on.T_kelvin, 0.0, 1.0)
    computed = phase_noise(on.sensitivity, sources, steady.orbit.phi).diffusion
    # the phase is read from the coil current's fundamental, period by period; the
    # linear prediction of the same draws narrows the estimate without biasing it
    coil = np.eye(system.layout.size)[system.layout.branch["L"]]
    measured = measure_diffusion(
        circuit_dynamics(system), circuit_phi_batch(system), steady.orbit, sources, coil,
        FACTOR, periods, runs, seed=20261202, skip=skip, psi=on.sensitivity.psi,
    )  # fmt: skip
    assert measured.stderr < 0.15 * computed
    assert measured.c == pytest.approx(computed, rel=0.25)
