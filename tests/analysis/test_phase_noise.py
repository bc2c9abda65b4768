"""Phase noise from the noise sources through the phase sensitivity (analysis.phase_noise)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from ringwise.analysis.noise_sources import BASE_FLICKER, NoiseSource
from ringwise.analysis.operating import solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.phase_noise import (
    SHARE_OFFSETS,
    effective_noise_factor,
    oscillator_noise,
    phase_noise,
    ssb,
)
from ringwise.analysis.ppv import phase_sensitivity
from ringwise.design import Design
from tests.analysis.noise_fixtures import T_ROOM, Tank

SAMPLES = sorted((Path(__file__).resolve().parents[2] / "sample_designs").glob("*.json"))


def _leeson_1_over_f2(offset, f0, Q, P_s, T):
    """Leeson's 1/f² asymptote with F = 1, in the form 2kT/P_s·(f0/(2QΔf))² (Leeson,
    Proc. IEEE 54(2), 1966, as written by Lee & Hajimiri, IEEE JSSC 35(3), 2000; from memory)."""
    return 10 * np.log10(2 * 1.380649e-23 * T / P_s * (f0 / (2 * Q * offset)) ** 2)


@pytest.mark.parametrize("tank", [Tank(), Tank(R=300.0, gain=3.0), Tank(L=10e-6, C=4.7e-9, R=2e3)])
def test_tank_with_a_noiseless_limiter_is_leeson_with_F_1(tank):
    orbit = tank.orbit()
    sens = phase_sensitivity(tank.dynamics(), orbit)
    pn = phase_noise(sens, [tank.thermal()], orbit.phi)
    P_s = tank.P_s(orbit)
    for offset in (1e3, 1e5):
        expected = _leeson_1_over_f2(offset, orbit.f, tank.Q, P_s, T_ROOM)
        assert pn.at(offset) == pytest.approx(expected, abs=0.5)
    F = effective_noise_factor(pn.diffusion, tank.Q, P_s, T_ROOM)
    assert 10 * math.log10(F) == pytest.approx(0.0, abs=0.5)


def test_lorentzian_is_finite_at_the_carrier():
    f0, c = 1e6, 1e-18
    # Demir, Mehrotra & Roychowdhury 2000 (from memory): L(0) = 1/(π²f0²c), and
    # f0²c/Δf² far from the carrier; the half width is π·f0²·c.
    assert float(ssb(1e-9, f0, c)) == pytest.approx(10 * math.log10(1 / (math.pi**2 * f0**2 * c)))
    assert float(ssb(1e3, f0, c)) == pytest.approx(10 * math.log10(f0**2 * c / 1e6), abs=1e-6)
    width = math.pi * f0**2 * c
    assert float(ssb(width, f0, c)) == pytest.approx(float(ssb(1e-9, f0, c)) - 10 * math.log10(2))


def test_flicker_corner_is_where_flicker_equals_white():
    f0, c, flicker = 1e6, 1e-18, 4e-15
    corner = flicker / (2 * c)
    # at the corner the two parts are equal: 3 dB over the white part alone (common practice)
    assert float(ssb(corner, f0, c, flicker) - ssb(corner, f0, c)) == pytest.approx(
        10 * math.log10(2), abs=1e-6
    )
    # far below the corner the flicker part falls as 1/f³: 30 dB per decade
    lo = float(ssb(corner / 1000, f0, c, flicker) - ssb(corner / 100, f0, c, flicker))
    assert lo == pytest.approx(30.0, abs=0.1)


@pytest.fixture(scope="module", params=SAMPLES, ids=[p.stem for p in SAMPLES])
def sample(request):
    design = Design.model_validate(json.loads(request.param.read_text(encoding="utf-8")))
    solved = solve(design)
    steady = steady_state(solved, warm=False)
    return solved, steady, oscillator_noise(solved, steady)


def test_shares_add_to_one_and_each_is_what_switching_it_off_removes(sample):
    _solved, steady, on = sample
    pn = on.noise
    shares = np.array(pn.shares)
    # the shares add to 100 % at every reported offset (common practice, no source)
    assert shares.sum(axis=0) == pytest.approx(np.ones(len(SHARE_OFFSETS)), abs=1e-12)
    sources = [r.source for r in pn.rates]
    for j in range(len(sources)):
        rest = phase_noise(on.sensitivity, sources[:j] + sources[j + 1 :], steady.orbit.phi)
        for i, offset in enumerate(SHARE_OFFSETS):
            drop = 1.0 - 10 ** ((rest.at(offset) - pn.at(offset)) / 10)
            assert drop == pytest.approx(shares[j, i], abs=1e-6)


def test_effective_noise_factor_of_the_samples_is_plausible(sample):
    _solved, _steady, on = sample
    # issue check: between 0 and 30 dB (the range of real small-signal transistor
    # oscillators, common practice, no source)
    assert 0.0 < 10 * math.log10(on.F_effective) < 30.0


def test_flicker_makes_a_corner_and_dominates_below_it(sample):
    _solved, _steady, on = sample
    pn = on.noise
    assert pn.corner is not None and pn.corner > 0
    flick = [r for r in pn.rates if r.source.kind == BASE_FLICKER]
    assert len(flick) == 1
    below = pn.corner / 10
    white = 2 * pn.diffusion
    assert flick[0].flicker / below > 9.9 * white * (flick[0].flicker / pn.flicker)


def test_no_flicker_no_corner(sample):
    _solved, steady, on = sample
    white = [r.source for r in on.noise.rates if not r.source.flicker]
    pn = phase_noise(on.sensitivity, white, steady.orbit.phi)
    assert pn.corner is None
    assert pn.diffusion == pytest.approx(on.noise.diffusion, rel=1e-12)


def test_supply_noise_adds_a_source_when_given():
    design = Design.model_validate(json.loads(SAMPLES[0].read_text(encoding="utf-8")))
    noisy = design.model_copy(
        update={"noise": design.noise.model_copy(update={"e_supply": 1e-6})}, deep=True
    )
    solved = solve(noisy)
    steady = steady_state(solved, warm=False)
    on = oscillator_noise(solved, steady)
    names = [r.source.name for r in on.noise.rates]
    assert "Vcc supply" in names
    quiet = oscillator_noise(solve(design), steady_state(solve(design), warm=False))
    assert on.noise.diffusion > quiet.noise.diffusion


def test_source_density_follows_the_current():
    src = NoiseSource("Q1", "collector shot", np.zeros(3), 2.0, current=0)
    phi = np.array([[1e-3, 1e-5], [-2e-3, 2e-5]])
    assert src.density(phi) == pytest.approx([2e-3, 4e-3])
