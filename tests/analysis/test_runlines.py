"""Lines, envelope modulation and the plotted envelope of a run, on signals built by hand."""

from __future__ import annotations

import math

import numpy as np
import pytest

from ringwise.analysis import runlines

F = 1e6


def _crossings(t, v):
    k = np.nonzero((v[:-1] < 0) & (v[1:] >= 0))[0]
    return t[k] - v[k] / (v[k + 1] - v[k]) * (t[k + 1] - t[k])


def test_a_line_at_f_over_2_is_named_with_its_level():
    # carrier 1 V plus 0.1 V at f/2: −20 dBc (DFT of a sum of sines, exact)
    t = np.linspace(0, 40 / F, 40 * 256, endpoint=False)
    v = np.sin(2 * math.pi * F * t) + 0.1 * np.sin(math.pi * F * t)
    found = runlines.lines(t, v, _crossings(t, np.sin(2 * math.pi * F * t)))
    assert found[0].kind == "subharmonic f/2"
    assert found[0].f == pytest.approx(F / 2, rel=1e-3)
    assert found[0].dBc == pytest.approx(-20.0, abs=0.2)


def test_a_clean_carrier_has_no_lines():
    t = np.linspace(0, 40 / F, 40 * 256, endpoint=False)
    v = np.sin(2 * math.pi * F * t) + 0.05 * np.sin(6 * math.pi * F * t)  # a harmonic only
    assert runlines.lines(t, v, _crossings(t, v)) == []


def test_envelope_modulation_depth_and_period():
    env_t = np.arange(400) / F
    env = 1.0 + 0.3 * np.sin(2 * math.pi * env_t * F / 50)  # ±30 % every 50 periods
    mod = runlines.modulation(env_t, env)
    assert mod.depth == pytest.approx(0.3, rel=0.02)
    assert mod.period * F == pytest.approx(50, rel=0.02)


def test_alternating_amplitudes_plot_as_one_line():
    env = [4.1, 1.7] * 20
    env_t = list(np.arange(40) / F)
    assert runlines.alternates(np.array(env))
    t, v = runlines.upper_envelope(env_t, env)
    assert v == [4.1] * 20 and len(t) == 20


def test_a_smoothly_collapsing_envelope_is_not_period_doubled():
    # squegging: the amplitude falls 12 % a period for many periods, then rebuilds
    env = np.concatenate((4.0 * 0.88 ** np.arange(30), 4.0 * 0.88 ** np.arange(30)[::-1]))
    assert not runlines.alternates(env)


def test_running_mean_removes_the_carrier_and_keeps_the_drift():
    # one-period mean of sin(2πft) is zero exactly, of a ramp its centre value
    # (calculus), also at the ends, where the window stays a whole period inside the run
    t = np.sort(np.random.default_rng(1).uniform(0, 30 / F, 20000))
    drift = 2.0 + 0.05 * t * F
    v = drift + np.sin(2 * math.pi * F * t)
    m = runlines.running_mean(t, v, 1 / F)
    inside = (t > t[0] + 0.5 / F) & (t < t[-1] - 0.5 / F)
    assert m[inside] == pytest.approx(drift[inside], abs=2e-3)
    assert np.max(np.abs(m - drift)) < 0.05
