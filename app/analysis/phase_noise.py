r"""Phase noise from the circuit's own noise sources, through the phase sensitivity.

Each noise source j enters the equations along ``vector`` e_j with a
one-sided density S_j(t) along the orbit (:mod:`ringwise.analysis.noise_sources`).
Through the perturbation projection vector ψ (:mod:`ringwise.analysis.ppv`)
it drives the oscillation's time shift α(t):

.. math:: \dot\alpha = \sum_j \psi(t)^T e_j\, u_j(t).

**White sources** make α a random walk, var α(t) = c·t, with the diffusion
constant (one-sided densities, hence the ½)

.. math:: c_j = \frac{1}{2T}\int_0^T \left(\psi^T e_j\right)^2 S_j(t)\,dt ,\qquad c = \sum_j c_j

(Demir, Mehrotra & Roychowdhury 2000, their c with BBᵀ = S/2).  The single-
sideband spectrum of the carrier is then a Lorentzian,

.. math:: \mathcal L(\Delta f) = \frac{f_0^2\,c}{\pi^2 f_0^4 c^2 + \Delta f^2},

flat within about π f0²c of the carrier (no infinity there) and
f0²c/Δf² (the 1/f² region) beyond.

**Flicker sources** S_j(t) = K_F·I_B(t)^A_F / f, i.e. a stationary 1/f noise
n(t) scaled by a_j(t) = √(K_F·I_B(t)^A_F): only the period average of the
sensitivity reaches the slow phase,

.. math:: \gamma_j = \frac1T\int_0^T \psi^T e_j\, a_j(t)\,dt ,

so α̇ has the one-sided density Σγ_j²/f at low frequencies and the phase
noise rises as f0²γ²/(2Δf³) (Hajimiri & Lee 1998: the DC term of the
sensitivity up-converts 1/f noise; Demir 2002 treats the spectrum near the
carrier exactly).  Ours: the Lorentzian with the diffusion constant taken
at the offset, c(Δf) = c + Σγ_j²/(2Δf) (half the one-sided density of α̇
at Δf).  It is the exact Lorentzian without flicker, f0²c/Δf² +
f0²γ²/(2Δf³) away from the carrier, and bounded near it.  The 1/f³ corner
is where the two densities of α̇ meet: Δf = Σγ_j²/(2c).

**Shares.** At an offset Δf each source adds its own part to the density
of α̇ (2c_j or γ_j²/Δf), independently of the others; its share is that part
over the sum.  Far from the Lorentzian's width the spectrum is proportional
to the sum, so the shares add to 100 % and switching a source off lowers
the spectrum by its share.

**Effective noise factor.** Leeson's 1/f² asymptote (2FkT/P_s)(f0/2QΔf)²
(Leeson 1966, in the form of Lee & Hajimiri 2000, with P_s the power the
loaded resonator dissipates, :func:`resonator_power`) equals f0²c/Δf² for

.. math:: F_{eff} = \frac{2\,c\,Q^2 P_s}{k T}.

A lossy tank held by a noiseless negative resistance gives F_eff = 1.

References
----------
A. Demir, A. Mehrotra & J. Roychowdhury, IEEE TCAS-I 47(5), 2000; A. Demir,
"Phase noise and timing jitter in oscillators with colored-noise sources",
IEEE TCAS-I 49(12), 2002; A. Hajimiri & T. H. Lee, IEEE JSSC 33(2), 1998;
T. H. Lee & A. Hajimiri, "Oscillator phase noise: a tutorial", IEEE JSSC
35(3), 2000; D. B. Leeson, Proc. IEEE 54(2), 1966; all from memory.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Final

import numpy as np
from scipy import constants

from ringwise.analysis.noise_sources import NoiseSource, circuit_sources
from ringwise.analysis.operating import Solved
from ringwise.analysis.periodic import SteadyState
from ringwise.analysis.ppv import PhaseSensitivity, phase_sensitivity
from ringwise.analysis.steady import Orbit
from ringwise.analysis.stepper import circuit_dynamics
from ringwise.analysis.transient import transient_system

#: Offsets at which each source's share is reported, Hz.
SHARE_OFFSETS: Final = (1e3, 100e3)
#: The plotted offsets: 10 Hz … 10 MHz.
PLOT_DECADES: Final = (1.0, 7.0)
PLOT_POINTS: Final = 61


@dataclass(frozen=True)
class SourceRate:
    """What one source does to the phase.

    ``c`` is its share of the diffusion constant, s (white sources);
    ``flicker`` its γ², dimensionless (α̇ has the one-sided density flicker/f).
    """

    source: NoiseSource
    c: float
    flicker: float

    def alpha_density(self, offset: float) -> float:
        """Its one-sided density of α̇ at ``offset`` Hz (dimensionless per Hz)."""
        return 2.0 * self.c + self.flicker / offset


def rates(
    sens: PhaseSensitivity, sources: Sequence[NoiseSource], phi: np.ndarray
) -> list[SourceRate]:
    """Diffusion constant and flicker coefficient of each source along the orbit.

    ``phi`` (N+1, 2) holds the device currents at the orbit's points.
    """
    h, T = sens.h, sens.T
    out = []
    for src in sources:
        g = sens.psi @ src.vector  # (N,) time shift per unit injection on each step
        density = src.density(phi)
        mid = 0.5 * (density[1:] + density[:-1])
        if src.flicker:
            amp = 0.5 * (np.sqrt(density[1:]) + np.sqrt(density[:-1]))
            gamma = float(np.dot(h, g * amp)) / T
            out.append(SourceRate(src, 0.0, gamma * gamma))
        else:
            out.append(SourceRate(src, float(np.dot(h, g * g * mid)) / (2.0 * T), 0.0))
    return out


def ssb(offset, f0: float, c: float, flicker: float = 0.0) -> np.ndarray:
    """Single-sideband phase noise, dBc/Hz, at ``offset`` (Hz) from the carrier ``f0`` (Hz).

    ``c`` is the white diffusion constant (s), ``flicker`` the summed γ² of
    the flicker sources; see the module text for the form.
    """
    df = np.asarray(offset, dtype=float)
    c_eff = c + flicker / (2.0 * df)
    return 10.0 * np.log10(f0 * f0 * c_eff / (math.pi**2 * f0**4 * c_eff**2 + df * df))


def effective_noise_factor(c: float, Q_loaded: float, P_s: float, T_kelvin: float) -> float:
    """F_eff = 2cQ²P_s/(kT): the noise factor that puts Leeson's 1/f² line on ours."""
    return 2.0 * c * Q_loaded**2 * P_s / (constants.k * T_kelvin)


@dataclass(frozen=True)
class PhaseNoise:
    """Phase noise of an orbit from its noise sources (SI units).

    ``diffusion`` c (s); ``flicker`` Σγ²; ``corner`` the 1/f³ corner (Hz,
    ``None`` without flicker); ``shares[j][i]`` the share (0…1) of source j
    at ``SHARE_OFFSETS[i]``; ``offsets``/``dBc_Hz`` the curve.
    """

    f0: float
    diffusion: float
    flicker: float
    corner: float | None
    rates: list[SourceRate]
    shares: list[list[float]]
    offsets: list[float]
    dBc_Hz: list[float]

    def at(self, offset: float) -> float:
        """L(offset), dBc/Hz."""
        return float(ssb(offset, self.f0, self.diffusion, self.flicker))


def phase_noise(
    sens: PhaseSensitivity, sources: Sequence[NoiseSource], phi: np.ndarray
) -> PhaseNoise:
    """Diffusion constant, spectrum, 1/f³ corner and each source's shares.

    ``phi`` (N+1, 2) holds the device currents at the orbit's points
    (``Orbit.phi``), which the shot and flicker densities follow.
    """
    rs = rates(sens, sources, phi)
    c = sum(r.c for r in rs)
    flicker = sum(r.flicker for r in rs)
    shares = []
    for r in rs:
        row = []
        for offset in SHARE_OFFSETS:
            total = 2.0 * c + flicker / offset
            row.append(r.alpha_density(offset) / total if total > 0 else 0.0)
        shares.append(row)
    grid = np.logspace(*PLOT_DECADES, PLOT_POINTS)
    return PhaseNoise(
        f0=sens.f0,
        diffusion=c,
        flicker=flicker,
        corner=flicker / (2.0 * c) if flicker > 0 and c > 0 else None,
        rates=rs,
        shares=shares,
        offsets=grid.tolist(),
        dBc_Hz=ssb(grid, sens.f0, c, flicker).tolist(),
    )


def resonator_power(orbit: Orbit, coil: int, L: float, Q_loaded: float) -> float:
    r"""Power the loaded resonator dissipates on the orbit, W: P_s = ω·L·I_rms²/Q_loaded.

    The tank's stored energy is L·I_rms² (its coil current's AC part, the
    energy swinging between coil and capacitors); at loaded Q it loses
    ω·W/Q_loaded per second to everything that loads it — the coil's loss,
    the load and the circuit around it.  This is the P_s that makes Leeson's
    F = 1 mean "the thermal noise of the resonator's loading and nothing
    else"; for a parallel R-L-C it is the power in R.  ``coil`` is the index
    of the coil current among the unknowns.
    """
    i = orbit.x[:, coil]
    i_rms2 = float(orbit.mean((i - orbit.mean(i)) ** 2))
    return 2.0 * math.pi * orbit.f * L * i_rms2 / Q_loaded


@dataclass(frozen=True)
class OscillatorNoise:
    """The phase noise of a design's steady state and its Leeson comparison.

    ``F_effective`` is the noise factor Leeson's formula needs for the same
    1/f² level (a ratio, ``None`` without a loaded Q or a tank power).
    """

    noise: PhaseNoise
    sensitivity: PhaseSensitivity
    F_effective: float | None
    Q_loaded: float | None
    P_s: float | None
    T_kelvin: float


def oscillator_noise(solved: Solved, steady: SteadyState) -> OscillatorNoise | None:
    """Phase noise of a solved design from its periodic steady state (``None`` without an orbit).

    The circuit is the transient's (:func:`ringwise.analysis.transient.transient_system`,
    the one the orbit was found on); the sources are all of its noise
    sources (:func:`ringwise.analysis.noise_sources.circuit_sources`) with
    the design's flicker law and supply noise.  Leeson's comparison takes
    the loaded Q from the loop's phase slope and P_s from :func:`resonator_power`.
    """
    orbit = steady.orbit
    if orbit is None:
        return None
    design = solved.design
    system, _kick = transient_system(solved)
    sens = phase_sensitivity(circuit_dynamics(system), orbit)
    T_kelvin = design.temperature_C + constants.zero_Celsius
    n = design.noise
    sources = circuit_sources(solved.netlist, system.layout, T_kelvin, n.K_F, n.A_F, n.e_supply)
    pn = phase_noise(sens, sources, orbit.phi)
    Q = float(solved.loop.Q_loaded) if solved.f_osc is not None else None
    if not Q or Q <= 0.0:
        return OscillatorNoise(pn, sens, None, None, None, T_kelvin)
    # the resonator inductance as built (the coil, or a crystal's motional arm)
    P_s = resonator_power(orbit, system.layout.branch["L"], solved.netlist["L"].L, Q)
    F = effective_noise_factor(pn.diffusion, Q, P_s, T_kelvin) if P_s > 0.0 else None
    return OscillatorNoise(pn, sens, F, Q, P_s, T_kelvin)
