"""Monte Carlo spread: batched equals single, first-order propagation, yield bookkeeping."""

from __future__ import annotations

import math

import numpy as np
import pytest

from ringwise.analysis.operating import solve
from ringwise.analysis.poles import natural_frequencies
from ringwise.analysis.spread import (
    SpreadError,
    analyse_batch,
    draw,
    monte_carlo,
    sample_design,
    values_at,
)
from ringwise.design import Design
from tests.conftest import BASE_CE, design_from, load_sample, sample_paths


def _only(design: Design, **tol) -> Design:
    """``design`` with every tolerance zero except those given."""
    zero = {
        "R": 0.0, "C": 0.0, "L": 0.0, "Q_L": 0.0, "beta_ratio": 1.0, "IS_ratio": 1.0,
        "L_tempco_ppm": 0.0, "dielectric": {p: "C0G" for p in ("C1", "C2", "C3")},
    }  # fmt: skip
    zero.update(tol)
    return design.model_copy(update={"tolerances": type(design.tolerances).model_validate(zero)})


@pytest.mark.parametrize("T_C", [-40.0, 25.0, 85.0])
def test_batched_results_equal_the_single_design_analysis(T_C: float) -> None:
    design = load_sample(next(p for p in sample_paths() if "clapp" in p.name))
    draws = draw(design, 12, seed=7)
    batch = analyse_batch(design, values_at(design, draws, T_C), T_C)
    for i in range(12):
        single = solve(sample_design(design, draws, i, T_C))
        assert batch.f_osc[i] == pytest.approx(single.f_osc, rel=1e-9)
        assert batch.gain[i] == pytest.approx(single.gain, rel=1e-9)
        assert batch.IC[i] == pytest.approx(single.op.IC, rel=1e-9)


def test_sigma_estimate_matches_the_poles_near_threshold() -> None:
    # The first Newton step of 1 − T(s) from jω_osc is exact at the threshold;
    # near it (loop gain ≈ 1.1) it agrees with the dominant pole within 10 %.
    from tests.conftest import at_gain

    design = _only(at_gain(design_from(BASE_CE), 1.1))
    draws = draw(design, 1, seed=1)
    batch = analyse_batch(design, values_at(design, draws, 25.0), 25.0)
    s = solve(design)
    sigma = natural_frequencies(s.ss, s.tank.f_ideal, s.f_osc).dominant.sigma
    assert batch.sigma[0] == pytest.approx(sigma, rel=0.1)


def test_inductor_alone_propagates_as_half_its_spread() -> None:
    # First-order propagation from f = 1/(2π√(L·Cs)): σ_f/f = ½·σ_L/L. A uniform
    # ±t tolerance has σ = t/√3. Sampling error of a standard deviation from
    # N samples is about σ/√(2N): with N = 4000 about 1.1 %, so allow 5 %.
    design = _only(design_from(BASE_CE), L=0.10)
    r = monte_carlo(design, samples=4000, seed=11)
    f = r.batches[[b.T_C for b in r.batches].index(25.0)].f_osc
    expected = 0.5 * 0.10 / math.sqrt(3.0)
    assert np.std(f) / np.mean(f) == pytest.approx(expected, rel=0.05)


def test_capacitor_alone_propagates_through_Cs() -> None:
    # ∂ln f/∂ln C1 = −½·Cs/C1 (from the resonance formula): σ_f/f = ½·(Cs/C1)·σ_C1/C1.
    base = design_from(BASE_CE)
    design = _only(base, per_part={"C1": 0.05})
    r = monte_carlo(design, samples=4000, seed=12)
    f = r.batches[[b.T_C for b in r.batches].index(25.0)].f_osc
    t = base.tank
    Cs = 1 / (1 / t.C1 + 1 / t.C2)
    expected = 0.5 * (Cs / t.C1) * 0.05 / math.sqrt(3.0)
    assert np.std(f) / np.mean(f) == pytest.approx(expected, rel=0.08)


def test_seeded_and_reproducible() -> None:
    design = design_from(BASE_CE)
    a = monte_carlo(design, samples=300, seed=5)
    b = monte_carlo(design, samples=300, seed=5)
    c = monte_carlo(design, samples=300, seed=6)
    assert a.f_percentiles == b.f_percentiles and a.seed == 5
    assert a.f_percentiles != c.f_percentiles


def test_yield_counts_starts_at_every_temperature() -> None:
    # A design right at the threshold at 25 °C: there about half the units start;
    # the yield counts only units that start at every temperature.
    from tests.conftest import at_gain

    marginal = at_gain(design_from(BASE_CE), 1.0)
    r = monte_carlo(marginal, samples=1000, seed=2)
    assert 0.3 < r.yield_by_temperature[25.0] < 0.7
    assert r.yield_margin <= r.yield_start <= min(r.yield_by_temperature.values())
    assert r.worst_cases[0]["gain"] <= r.worst_cases[-1]["gain"]
    healthy = monte_carlo(load_sample(sample_paths()[0]), samples=500, seed=2)
    assert healthy.yield_start == 1.0


def test_frequency_window() -> None:
    design = design_from(BASE_CE)
    f0 = solve(design).f_osc
    wide = monte_carlo(design, samples=400, seed=3, window=(0.5 * f0, 2 * f0))
    narrow = monte_carlo(design, samples=400, seed=3, window=(0.999 * f0, 1.001 * f0))
    assert wide.in_window == 1.0
    assert narrow.in_window < 0.2


def test_caps_and_bad_windows() -> None:
    design = design_from(BASE_CE)
    with pytest.raises(SpreadError, match="samples must be between 1 and 100000"):
        monte_carlo(design, samples=200_001)
    with pytest.raises(SpreadError, match="window"):
        monte_carlo(design, samples=10, window=(2e6, 1e6))


def test_frequency_against_temperature_band() -> None:
    design = load_sample(sample_paths()[0])
    r = monte_carlo(design, samples=200, seed=1)
    temps = [t for t, *_ in r.f_vs_temperature]
    assert temps[0] == design.tolerances.T_min and temps[-1] == design.tolerances.T_max
    assert all(a <= b <= c for _t, a, b, c in r.f_vs_temperature)


def test_chunked_run_equals_one_batch(monkeypatch) -> None:
    # chunking bounds memory and lets a run stop; it must not change a figure
    # (every sample is its own Newton and loop search inside a batch)
    design = load_sample(next(p for p in sample_paths() if "clapp" in p.name))
    whole = monte_carlo(design, samples=60, seed=4)
    monkeypatch.setattr("ringwise.analysis.spread.CHUNK_SAMPLES", 25)
    chunked = monte_carlo(design, samples=60, seed=4)
    assert chunked.yield_start == whole.yield_start
    assert chunked.f_percentiles == pytest.approx(whole.f_percentiles, rel=1e-12)
    for a, b in zip(chunked.batches, whole.batches, strict=True):
        np.testing.assert_allclose(a.gain, b.gain, rtol=1e-12)
    assert not chunked.stopped and chunked.requested == chunked.samples == 60


def test_stopped_run_keeps_the_whole_chunks_done(monkeypatch) -> None:
    design = load_sample(next(p for p in sample_paths() if "clapp" in p.name))
    monkeypatch.setattr("ringwise.analysis.spread.CHUNK_SAMPLES", 20)
    seen: list[float] = []

    def progress(fraction: float) -> bool:
        seen.append(fraction)
        return len(seen) < 7  # stop at the third chunk's first corner (three corners a chunk)

    r = monte_carlo(design, samples=100, seed=4, progress=progress)
    # the chunk under way is finished (its samples need every corner), then no more
    assert r.stopped and r.requested == 100 and r.samples == 60
    assert seen == sorted(seen) and 0 < seen[-1] < 1
    # the yield is the yield of the first 40 samples, as a run of 40 finds it
    # (the draws of a seed depend on the count, so compare with those samples' own verdicts)
    assert r.starts.shape == (len(r.temperatures), 60)
    assert r.yield_start == float(np.mean(np.all(r.starts, axis=0)))
    first = monte_carlo(design, samples=100, seed=4)
    np.testing.assert_array_equal(r.starts, first.starts[:, :60])
    assert r.f_vs_temperature == []  # the temperature band is not begun after a stop
