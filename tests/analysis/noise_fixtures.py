"""A small orbit for the phase-noise tests: a lossy LC tank held by a cubic negative conductance.

Node row: C·v' + v/R + i_L + i_nl(v) = 0 with i_nl = −g1·v + g3·v³ (noiseless);
coil row: v − L·i_L' = 0.  The orbit is found by the same shooting-Newton
on the same trapezoidal stepper as a circuit's.  With g1 = 2/R the describing
function puts the amplitude at A² = 4(g1 − 1/R)/(3·g3) (Strogatz, *Nonlinear
Dynamics and Chaos*, §7.6, averaging, from memory); g3 is chosen for A = 1 V.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import constants

from ringwise.analysis.noise_sources import THERMAL, NoiseSource
from ringwise.analysis.phase_noise import resonator_power
from ringwise.analysis.steady import Orbit, shoot, warped_period
from ringwise.analysis.stepper import Dynamics

T_ROOM = 300.0


@dataclass(frozen=True)
class Tank:
    L: float = 1e-6
    C: float = 1e-9
    R: float = 1e3
    gain: float = 2.0  # g1·R, the small-signal loop gain
    A: float = 1.0

    @property
    def g1(self) -> float:
        return self.gain / self.R

    @property
    def g3(self) -> float:
        return 4.0 * (self.g1 - 1.0 / self.R) / (3.0 * self.A**2)

    @property
    def f0(self) -> float:
        return 1.0 / (2.0 * math.pi * math.sqrt(self.L * self.C))

    @property
    def Q(self) -> float:
        return 2.0 * math.pi * self.f0 * self.R * self.C

    def dynamics(self) -> Dynamics:
        g1, g3 = self.g1, self.g3

        def phi(v0, _v1):
            z = 0.0 * v0
            return (-g1 * v0 + g3 * v0**3, z, z, z, -g1 + 3.0 * g3 * v0 * v0, z, z, z)

        C = np.array([[self.C, 0.0], [0.0, -self.L]])
        G = np.array([[1.0 / self.R, 1.0], [1.0, 0.0]])
        P = np.array([[1.0, 0.0], [0.0, 0.0]])
        W = np.array([[1.0, 0.0], [0.0, 0.0]])
        return Dynamics(C, G, np.zeros(2), P, W, phi)

    def orbit(self) -> Orbit:
        scale = np.array([1.0, 2.0 * math.pi * self.f0 * self.L])
        return shoot(self.dynamics(), np.array([self.A, 0.0]), warped_period(self.f0), scale)

    def thermal(self) -> NoiseSource:
        """The tank resistor's Johnson–Nyquist current, 4kT/R across the node."""
        return NoiseSource("R", THERMAL, np.array([1.0, 0.0]), 4.0 * constants.k * T_ROOM / self.R)

    def P_s(self, orbit: Orbit) -> float:
        return resonator_power(orbit, 1, self.L, self.Q)
