"""Startup verdict bands and the describing-function drive."""

from __future__ import annotations

import math

import pytest
from scipy.special import iv

from ringwise.analysis.analyze import analyze
from ringwise.analysis.startup import fixed_bias_drive, gm_ratio
from tests.conftest import BASE_CE, at_gain, design_from


@pytest.mark.parametrize("x", [1e-3, 0.5, 1.0, 3.0, 10.0, 40.0])
def test_gm_ratio_is_the_bessel_expression(x: float) -> None:
    # G_m(x)/g_m = 2·I1(x)/(x·I0(x)) (Clarke & Hess; Gray & Meyer, from memory),
    # checked against scipy.special.iv.
    assert gm_ratio(x) == pytest.approx(2 * iv(1, x) / (x * iv(0, x)), rel=1e-9)


def test_drive_solves_the_amplitude_condition() -> None:
    for gain in (1.2, 3.0, 5.5, 20.0):
        x = fixed_bias_drive(gain)
        assert gain * gm_ratio(x) == pytest.approx(1.0, rel=1e-9)
    assert fixed_bias_drive(0.9) is None


def _at_gain(target: float):
    return at_gain(design_from(BASE_CE), target)


@pytest.mark.parametrize(
    ("gain", "verdict"),
    [(0.7, "will-not-start"), (1.5, "marginal"), (3.0, "will-start"), (14.0, "overdriven")],
)
def test_verdict_bands(gain: float, verdict: str) -> None:
    # Bands: below 1 no start; 1-2 marginal; far above ~10 heavy distortion
    # (common practice, no source).
    r = analyze(_at_gain(gain))
    assert r.loop.gain == pytest.approx(gain, rel=1e-6)
    assert r.startup.verdict == verdict
    assert r.startup.margin_dB == pytest.approx(20 * math.log10(gain), rel=1e-6)


def test_gain_five_to_six_starts_but_is_driven_hard() -> None:
    # Bench fact: designs at a loop gain of about 5-6 run with a stable frequency
    # but a visibly distorted waveform (common practice, no source). The verdict
    # is "will start" and the drive is many V_T, far outside the small-signal
    # range, so the collector current is a train of pulses.
    r = analyze(_at_gain(5.5))
    assert r.startup.verdict == "will-start"
    x = fixed_bias_drive(r.loop.gain)
    assert x > 5.0
    # the steady state's drive is larger still: the bias shifts and the
    # junction conducts in pulses
    assert r.steady_state.amp_be > x * 0.0257


def test_loop_gain_of_at_least_one_is_needed() -> None:
    # Barkhausen: loop gain below 1 does not start (common practice, no source).
    assert analyze(_at_gain(0.98)).startup.verdict == "will-not-start"
    assert analyze(_at_gain(1.02)).startup.verdict == "marginal"
