"""The perturbation projection vector along an orbit (ringwise.analysis.ppv)."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from ringwise.analysis.ppv import SensitivityError, phase_sensitivity
from tests.analysis.noise_fixtures import Tank


@pytest.fixture(scope="module")
def tank_case():
    tank = Tank()
    orbit = tank.orbit()
    return tank, orbit, phase_sensitivity(tank.dynamics(), orbit)


def test_time_shift_along_the_flow_is_one_at_every_point(tank_case):
    _tank, orbit, sens = tank_case
    # p(t)ᵀ·ẋs(t) = 1 along the orbit (Demir, Mehrotra & Roychowdhury 2000, from memory);
    # ẋ by central differences, second order in the step.
    for k in range(1, orbit.N, 7):
        flow = (orbit.x[k + 1] - orbit.x[k - 1]) / (orbit.h[k] + orbit.h[k - 1])
        assert sens.p[k] @ flow == pytest.approx(1.0, abs=1e-3)
    assert sens.p[0, orbit.dynamic] @ orbit.flow == pytest.approx(1.0, rel=1e-12)


def test_backward_sweep_returns_to_its_start(tank_case):
    _tank, _orbit, sens = tank_case
    # the left eigenvector of the trivial multiplier is periodic (common practice, no source)
    assert np.max(np.abs(sens.p[0] - sens.p[-1])) < 1e-9 * np.max(np.abs(sens.p))
    assert abs(sens.trivial - 1.0) < 1e-6


def test_sensitivity_of_a_near_sinusoidal_tank(tank_case):
    tank, orbit, sens = tank_case
    # Hajimiri & Lee 1998 (from memory): for v = A·cos θ the impulse sensitivity is
    # Γ = −sin θ, i.e. a charge q shifts the time by −q·sin θ/(ω·A·C).  Here the
    # time shift per coulomb on the capacitor node, scaled by ω·A·C, should
    # have the rms of a sine, 1/√2, and be in quadrature with v.
    w = 2.0 * math.pi * orbit.f
    A = 0.5 * (orbit.x[:, 0].max() - orbit.x[:, 0].min())
    g = sens.psi[:, 0] * w * A * tank.C
    tau = np.concatenate(([0.0], np.cumsum(orbit.dtau)))
    mid = 0.5 * (tau[1:] + tau[:-1])
    assert math.sqrt(float(np.dot(orbit.dtau, g * g))) == pytest.approx(1 / math.sqrt(2), rel=0.01)
    v_mid = 0.5 * (orbit.x[1:, 0] + orbit.x[:-1, 0])
    assert abs(float(np.dot(orbit.dtau, g * v_mid))) < 0.01 * A
    # v = A·cos θ, i_L = A·sin θ/(ωL)
    theta = 2.0 * math.pi * mid + math.atan2(orbit.x[0, 1] * w * tank.L, orbit.x[0, 0])
    assert np.max(np.abs(g + np.sin(theta))) < 0.05


def test_an_orbit_without_a_trivial_multiplier_is_refused(tank_case):
    tank, orbit, _sens = tank_case
    damped = dataclasses.replace(orbit, monodromy=0.5 * orbit.monodromy)
    with pytest.raises(SensitivityError, match="no Floquet multiplier within"):
        phase_sensitivity(tank.dynamics(), damped)
