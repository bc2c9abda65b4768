"""Threshold finder and sweeps."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.optimize import brentq

from ringwise.analysis.operating import solve
from ringwise.analysis.threshold import (
    MAX_SWEEP_POINTS,
    PROBE_STEP,
    SCAN_PER_DECADE,
    SEARCH_RANGE,
    ParameterError,
    _interpolated_root,
    _probe_guess,
    _scan_side,
    _Trials,
    find_threshold,
    sweep,
)
from ringwise.circuit.topologies import gain_setter
from ringwise.design import Design, get_param, with_param
from ringwise.resources import sample_files
from tests.conftest import BASE_CE, design_from


@pytest.mark.parametrize("param", ["RC", "RB2", "RE", "Q_L", "C2"])
def test_threshold_brings_loop_gain_to_one(param: str) -> None:
    design = design_from(BASE_CE)
    th = find_threshold(design, param)
    assert th.value is not None, th.reason
    assert solve(with_param(design, param, th.value)).gain == pytest.approx(1.0, abs=2e-6)


def test_full_threshold_lies_above_the_hand_figure_when_losses_are_present() -> None:
    # Bench fact: oscillation began at a collector load some 10-15 % above what
    # the ideal gm·RC·C1/C2 = 1 predicts, because of the losses that formula
    # ignores (common practice, no source). So the full model's threshold must
    # lie above the ideal one whenever losses are present; with a coil Q of
    # about 100 and ordinary parts the excess is tens of percent, not a factor.
    design = design_from(BASE_CE, tank__Q_L=100)
    solved = solve(design)
    ideal = 1.0 / (solved.hybrid.gm * design.tank.C1 / design.tank.C2)
    th = find_threshold(design, "RC")
    assert th.value > ideal
    assert th.value < 2.0 * ideal


def test_no_threshold_is_stated_not_invented() -> None:
    # A coil so lossy that no collector resistor reaches loop gain 1.
    design = design_from(BASE_CE, tank__Q_L=0.5)
    th = find_threshold(design, "RC")
    assert th.value is None
    assert "RC" in th.reason


def test_threshold_rejects_unknown_or_absent_parameters() -> None:
    design = design_from(BASE_CE)
    with pytest.raises(ParameterError, match="unknown parameter"):
        find_threshold(design, "Rx")
    with pytest.raises(ParameterError, match="not part of this design"):
        find_threshold(design, "C3")


def test_sweep_is_monotonic_in_RC_and_marks_threshold() -> None:
    design = design_from(BASE_CE)
    result = sweep(design, "RC", 20.0, 2000.0, 40)
    gains = [g for g in result.gain if g is not None]
    assert len(gains) == 40
    assert all(b > a for a, b in itertools.pairwise(gains))
    th = result.threshold.value
    below = [g for v, g in zip(result.values, result.gain, strict=True) if v < th]
    above = [g for v, g in zip(result.values, result.gain, strict=True) if v > th]
    assert max(below) < 1.0 < min(above)


def test_sweep_reports_invalid_points_instead_of_failing() -> None:
    # A sweep of RB2 through values where the transistor saturates or cuts off
    # still returns every point.
    design = design_from(BASE_CE)
    result = sweep(design, "RB2", 100.0, 1e6, 30)
    assert len(result.values) == 30
    assert any(g is None or g < 1 for g in result.gain)


def test_sweep_point_cap() -> None:
    design = design_from(BASE_CE)
    with pytest.raises(ParameterError, match=str(MAX_SWEEP_POINTS)):
        sweep(design, "RC", 10.0, 100.0, MAX_SWEEP_POINTS + 1)


def test_temperature_sweep_is_linear() -> None:
    design = design_from(BASE_CE)
    result = sweep(design, "temperature_C", -40.0, 85.0, 6)
    assert result.values == pytest.approx([-40, -15, 10, 35, 60, 85])
    assert all(f is not None for f in result.f_osc)


#: Each sample design's gain-setter threshold as the sequential search (one
#: full solve per trial: secant steps, Brent's method) found it before the
#: search became batched (main at 20f7f10); the batched search must land on
#: the same crossing.  Values recorded from that implementation.
SEQUENTIAL_THRESHOLDS = {
    "clapp-clock-1M": 67.15288065,
    "common-base-carrier-10M": 402.5001733,
    "crystal-clock-10M": 474.1419444,
    "follower-test-source-4M": 14.37943797,
    "proximity-exciter-150k": 1542.798266,
}


@pytest.mark.parametrize("path", sample_files(), ids=lambda p: p.stem)
def test_batched_threshold_equals_the_sequential_answer(path) -> None:
    design = Design.model_validate_json(path.read_text(encoding="utf-8"))
    param = gain_setter(design)
    s = solve(design)
    th = find_threshold(design, param, start=s)
    # samples added after the search was batched have no sequential record: brentq only
    if path.stem in SEQUENTIAL_THRESHOLDS:
        assert th.value == pytest.approx(SEQUENTIAL_THRESHOLDS[path.stem], rel=1e-6)

    # The same root by scipy.optimize.brentq on full solves, bracketed ±5 %
    # around it (reference library; one solve per trial, in sequence).
    def log_gain(v: float) -> float:
        return math.log(solve(with_param(design, param, v)).gain)

    ref = brentq(log_gain, 0.95 * th.value, 1.05 * th.value, xtol=1e-12, rtol=1e-10)
    assert th.value == pytest.approx(ref, rel=1e-6)
    # Without a start the search gives the same value.
    assert find_threshold(design, param).value == pytest.approx(th.value, rel=1e-6)


@pytest.mark.parametrize(
    ("stem", "param"),
    [("follower-test-source-4M", "RE"), ("follower-test-source-4M", "L"), ("clapp-clock-1M", "C2")],
)
@pytest.mark.parametrize("down", [True, False])
def test_side_scan_in_parts_equals_the_side_in_one_batch(stem: str, param: str, down: bool) -> None:
    # The scan solves the nearest grid points first and the rest only when
    # needed: the interval it picks and the grid it hands the polish must be
    # those of the whole side solved as one batch (common practice, no source:
    # a shortcut must not change the answer).
    path = next(p for p in sample_files() if p.stem == stem)
    design = Design.model_validate_json(path.read_text(encoding="utf-8"))
    s = solve(design)
    value = get_param(design, param)
    trials = _Trials(design, param, s.op.x, s.f_osc)
    x0, step = math.log(value), math.log(10.0) / SCAN_PER_DECADE
    k, xs, gs = _scan_side(trials, x0, math.log(s.gain), step, down)
    n = math.ceil(math.log(SEARCH_RANGE) / step)
    ks = np.arange(-n, 1) if down else np.arange(0, n + 1)
    full_xs = x0 + step * ks
    full_gs = trials.log_gain(full_xs)
    full_gs[ks == 0] = math.log(s.gain)
    finite = np.isfinite(full_gs)
    change = np.flatnonzero(finite[:-1] & finite[1:] & ((full_gs[:-1] > 0) != (full_gs[1:] > 0)))
    if not change.size:
        assert k is None
        return
    full_k = int(change[-1] if down else change[0])
    assert k is not None
    offset = int(np.flatnonzero(np.isclose(full_xs, xs[0], rtol=0, atol=1e-12))[0])
    assert k + offset == full_k
    np.testing.assert_allclose(xs, full_xs[offset : offset + xs.size], rtol=0, atol=1e-12)
    np.testing.assert_allclose(gs, full_gs[offset : offset + xs.size], rtol=1e-9, atol=1e-12)


def _round(g, x: float, h: float):
    """A polishing round's five points round x (inner three, outer two) of g."""
    inner = [x - h / 8, x, x + h / 8]
    return (inner, [g(p) for p in inner]), [(x - h, g(x - h)), (x + h, g(x + h))]


def test_a_round_that_pins_the_root_ends_the_search() -> None:
    # ln gain smooth near its root (a log-like curve with its singularity well
    # away): the quartic through a round's five points gives the root to
    # far below LOG_GAIN_TOL (exact root by hand: g(r) = 0 at r = e^-1 - 0.5).
    def g(x: float) -> float:
        return 1.0 + math.log(x + 0.5)

    root = math.exp(-1.0) - 0.5
    last, outer = _round(g, root + 3e-4, 4e-3)
    found = _interpolated_root(last, outer, [], root - 0.1, root + 0.1)
    assert found is not None
    assert found[0] == pytest.approx(root, abs=1e-9)


def test_a_jump_among_a_rounds_points_asks_for_another_round() -> None:
    # ln gain jumping between two inner points (the loop losing its crossing):
    # the cubic and the quartic disagree with the parabola, no root is read off
    def g(x: float) -> float:
        return 0.8 * (x - 1e-4) + (0.04 if x > 3e-4 else 0.0)

    last, outer = _round(g, 0.0, 4e-3)
    assert _interpolated_root(last, outer, [], -0.1, 0.1) is None


def test_probe_guess_is_the_root_of_the_quadratic_through_the_probes() -> None:
    # ln gain exactly quadratic in ln value, g(x) = 0.9 + 0.8x - 0.2x^2 (x the
    # step from the current value): its root nearest the tangent's, by the
    # quadratic formula (algebra, common practice), is what the probes give.
    def g(x: float) -> float:
        return 0.9 + 0.8 * x - 0.2 * x * x

    root, spread = _probe_guess(g(0.0), [math.exp(g(-PROBE_STEP)), math.exp(g(PROBE_STEP))])
    exact = (-0.8 + math.sqrt(0.64 + 4 * 0.2 * 0.9)) / (-0.4)
    assert root == pytest.approx(exact, abs=1e-9)
    assert spread == pytest.approx(0.75 * abs(exact - (-0.9 / 0.8)), rel=1e-6)


def test_probes_of_a_flat_or_lost_loop_place_nothing() -> None:
    # a gain nearly flat in the part (its root decades away), a probe without
    # a loop, or no probes: the search keeps its power-law first batch
    assert _probe_guess(1.0, [math.exp(1.0 - 1e-4), math.exp(1.0 + 1e-4)]) is None
    assert _probe_guess(1.0, [0.0, 3.0]) is None
    assert _probe_guess(1.0, None) is None


@pytest.mark.parametrize("path", sample_files(), ids=lambda p: p.stem)
def test_the_full_analysis_threshold_is_the_searched_one(path) -> None:
    # The analysis places its first batch with the probes its own solve
    # carries; the crossing must be the one find_threshold lands on (which
    # the test above checks against brentq).
    from ringwise.analysis.analyze import _analyze

    design = Design.model_validate_json(path.read_text(encoding="utf-8"))
    r = _analyze(design, large_signal=False)
    th = find_threshold(design, gain_setter(design), start=solve(design))
    assert r.startup.threshold_value == pytest.approx(th.value, rel=1e-7)
