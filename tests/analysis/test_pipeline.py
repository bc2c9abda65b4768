"""The one pipeline: a batch of N equals N single solves, in every batched analysis,
and the Monte Carlo yield agrees with the single-design verdict sample by sample."""

from __future__ import annotations

import numpy as np
import pytest

from ringwise.analysis import spread as spread_module
from ringwise.analysis.budget import _solve_variants, _variants, budget_items, loop_budget
from ringwise.analysis.criteria import START_GAIN, Region
from ringwise.analysis.loop import BATCH_ELIMINATION, CONDENSE_BATCH
from ringwise.analysis.operating import solve
from ringwise.analysis.pipeline import solve_designs
from ringwise.analysis.sensitivity import STEP, sensitivities
from ringwise.analysis.spread import analyse_batch, draw, monte_carlo, sample_design, values_at
from ringwise.analysis.stability import PUSH_STEP, load_change, neighbours, push_pull
from ringwise.analysis.startup import verdict
from ringwise.analysis.threshold import _Trials, sweep
from ringwise.circuit.mna import EINSUM_ROWS, SPARSE_STAMP_BATCH
from ringwise.design import with_param
from tests.conftest import BASE_CE, at_gain, design_from

#: Batched and single solves run the same arithmetic per member; they agree to
#: round-off (a converged Newton's last step is below 1e-10 V).
RTOL = 1e-9

#: Designs across the regions: active, saturated, cut off, no crossing.
VARIANTS = [
    {},
    {"bias__RC": "2k2"},
    {"bias__RC": "100k"},
    {"bias__RB1": "10M", "bias__RB2": "1k"},
    {"tank__Q_L": 0.2},
    {"tank__C2": "4n7", "supply": {"Vcc": 5.0}},
]


def _designs():
    return [design_from(BASE_CE, **v) for v in VARIANTS]


def test_batch_of_n_equals_n_single_solves() -> None:
    designs = _designs()
    batch = solve_designs(designs)
    for i, d in enumerate(designs):
        one = solve(d)
        np.testing.assert_allclose(batch.x[i], one.op.x, rtol=RTOL, atol=1e-12)
        assert batch.region[i] == [Region.ACTIVE, Region.SATURATION, Region.CUTOFF].index(
            one.op.region
        )
        f = batch.loop.f_osc[i]
        if one.f_osc is None:
            assert np.isnan(f)
        else:
            assert f == pytest.approx(one.f_osc, rel=RTOL)
            assert batch.loop.gain[i] == pytest.approx(one.gain, rel=RTOL)
            assert batch.loop.Q_loaded[i] == pytest.approx(float(one.loop.Q_loaded), rel=1e-7)
        assert batch.hybrid.gm[i] == pytest.approx(one.hybrid.gm, rel=RTOL)


def test_a_batch_of_some_dozens_equals_single_solves() -> None:
    # A threshold's first batch with its riders (some dozens of members): the
    # compiled DC Newton runs member by member, so each member's operating
    # point is its single solve's, bit for bit.
    designs = _designs() * (30 // len(VARIANTS) + 1)
    assert len(designs) > 30
    batch = solve_designs(designs)
    for i, d in enumerate(designs):
        one = solve(d)
        np.testing.assert_array_equal(batch.x[i], one.op.x)
        if one.f_osc is None:
            assert np.isnan(batch.loop.f_osc[i])
        else:
            assert batch.loop.f_osc[i] == pytest.approx(one.f_osc, rel=RTOL)
            assert batch.loop.gain[i] == pytest.approx(one.gain, rel=RTOL)


def test_large_batch_equals_single_solves() -> None:
    # A batch as large as a Monte Carlo chunk's takes the large-batch paths: stamps
    # added entry by entry, the supply's unknowns dropped, the loop eliminated
    # across the batch.  Every member is still its own single solve.
    size = max(CONDENSE_BATCH, BATCH_ELIMINATION, EINSUM_ROWS, SPARSE_STAMP_BATCH)
    designs = (_designs() * (size // len(VARIANTS) + 1))[: size + 1]
    batch = solve_designs(designs)
    for i, d in enumerate(designs[: len(VARIANTS)]):
        one = solve(d)
        np.testing.assert_allclose(batch.x[i], one.op.x, rtol=RTOL, atol=1e-12)
        if one.f_osc is None:
            assert np.isnan(batch.loop.f_osc[i])
            continue
        assert batch.loop.f_osc[i] == pytest.approx(one.f_osc, rel=RTOL)
        assert batch.loop.gain[i] == pytest.approx(one.gain, rel=RTOL)
        assert batch.loop.Q_loaded[i] == pytest.approx(float(one.loop.Q_loaded), rel=1e-7)
        assert batch.loop.Z_out[i] == pytest.approx(float(one.loop.Z_out), rel=RTOL)
        assert batch.loop.dT_ds[i] == pytest.approx(complex(one.loop.dT_ds), rel=1e-7)
    same = slice(len(VARIANTS), None, len(VARIANTS))  # repeats of the first design
    np.testing.assert_array_equal(batch.loop.f_osc[same], batch.loop.f_osc[0])


def test_budget_batch_equals_each_variant_alone() -> None:
    # Every loss made ideal in one batch, against each variant solved on its own.
    design = design_from(BASE_CE, load={"R_load": "10k"})
    s = solve(design)
    lines = loop_budget(s, "RC")
    for item, line in zip(budget_items(s.netlist, "RC"), lines, strict=True):
        alone = _solve_variants(s, _variants(s, [[item]]))
        assert line.gain_without == pytest.approx(float(alone.gain[0]), rel=RTOL)
        assert line.f_without == pytest.approx(float(alone.f_osc[0]), rel=RTOL)


def test_threshold_trials_equal_single_solves() -> None:
    # One batch of the threshold's trial values, against a single solve of each.
    design = design_from(BASE_CE)
    s = solve(design)
    trials = _Trials(design, "RC", s.op.x, s.f_osc)
    values = np.array([300.0, 1e3, 4.7e3])
    log_gain = trials.log_gain(np.log(values))
    for value, g in zip(values, log_gain, strict=True):
        assert g == pytest.approx(np.log(solve(with_param(design, "RC", value)).gain), abs=1e-9)


def test_source_stepped_members_equal_their_single_solves() -> None:
    # A start the plain Newton cannot use (NaN) sends a member through source
    # stepping; it must land on the same operating point as a plain solve.
    designs = _designs()[:3]
    n = solve(designs[0]).op.x.size
    x0 = np.zeros((3, n))
    x0[1] = np.nan
    batch = solve_designs(designs, x0=x0)
    assert batch.stepped.tolist() == [False, True, False]
    assert batch.converged.all()
    np.testing.assert_allclose(batch.x[1], solve(designs[1]).op.x, rtol=1e-8, atol=1e-11)


def test_sweep_points_equal_single_solves() -> None:
    design = design_from(BASE_CE)
    s = sweep(design, "RC", 200.0, 20e3, 7)
    for value, f, g in zip(s.values, s.f_osc, s.gain, strict=True):
        one = solve(with_param(design, "RC", value))
        if one.f_osc is None:
            assert f is None
        else:
            assert f == pytest.approx(one.f_osc, rel=RTOL)
            assert g == pytest.approx(one.gain, rel=RTOL)


def test_sensitivities_equal_differences_of_single_solves() -> None:
    design = design_from(BASE_CE)
    found = {s.part: s for s in sensitivities(design)}
    hi = solve(with_param(design, "C2", 2.2e-9 * (1 + STEP)))
    lo = solve(with_param(design, "C2", 2.2e-9 * (1 - STEP)))
    span = np.log1p(STEP) - np.log1p(-STEP)
    assert found["C2"].S_f == pytest.approx(np.log(hi.f_osc / lo.f_osc) / span, rel=1e-6)
    assert found["C2"].S_gain == pytest.approx(np.log(hi.gain / lo.gain) / span, rel=1e-6)


def test_pushing_equals_difference_of_single_solves() -> None:
    design = design_from(BASE_CE, load={"R_load": "10k"})
    s = solve(design)
    push, shift, _slope = push_pull(s)
    up = solve(with_param(design, "Vcc", 10.0 * (1 + PUSH_STEP))).f_osc
    down = solve(with_param(design, "Vcc", 10.0 * (1 - PUSH_STEP))).f_osc
    assert push == pytest.approx((up - down) / (2 * PUSH_STEP * 10.0), rel=1e-6)
    open_load = design.model_copy(update={"load": design.load.model_copy(update={"R_load": None})})
    assert shift == pytest.approx(s.f_osc - solve(open_load).f_osc, rel=1e-6)
    # the stated load change rides in the same batch
    changed_design = design
    for name, value in load_change(design).items():
        changed_design = with_param(changed_design, name, value)
    changed = solve(changed_design).f_osc
    assert neighbours(s).load_change_ppm == pytest.approx((changed / s.f_osc - 1) * 1e6, rel=1e-6)


def _near_threshold(tolerances: dict):
    """The check design at a loop gain of 1.2, with wide tolerances."""
    nominal = at_gain(design_from(BASE_CE), 1.2)
    return design_from(
        {**BASE_CE, "bias": {**BASE_CE["bias"], "RC": nominal.bias.RC}}, tolerances=tolerances
    )


def _verdict_starts(design) -> bool:
    s = solve(design)
    return verdict(s.gain if s.f_osc is not None else None, s.op).verdict != "will-not-start"


@pytest.mark.parametrize("T_C", [-40.0, 25.0, 85.0])
def test_yield_agrees_with_the_single_verdict_sample_by_sample(T_C: float) -> None:
    # Wide tolerances put samples on both sides of the threshold and some into
    # saturation; every sample's "starts" must be its single design's verdict.
    design = _near_threshold({"R": 0.3, "C": 0.2, "L": 0.2, "beta_ratio": 6.0, "IS_ratio": 10.0})
    draws = draw(design, 40, seed=11)
    batch = analyse_batch(design, values_at(design, draws, T_C), T_C)
    expected = [_verdict_starts(sample_design(design, draws, i, T_C)) for i in range(40)]
    assert batch.starts.tolist() == expected
    assert 0 < sum(expected) < 40  # both outcomes are represented


def test_yield_agrees_when_every_sample_needs_source_stepping(monkeypatch) -> None:
    # Start the batch's Newton where it cannot go (NaN): every sample is then
    # solved by source stepping, and the yield must still match the verdicts.
    design = _near_threshold({"R": 0.3, "beta_ratio": 6.0})
    real = spread_module._Prepared.start_at

    def nan_starts(prepared, keys):
        real(prepared, keys)
        for key, (x, ln_r) in prepared.starts.items():
            prepared.starts[key] = (np.full_like(x, np.nan), ln_r)

    monkeypatch.setattr(spread_module._Prepared, "start_at", nan_starts)
    draws = draw(design, 24, seed=5)
    batch = analyse_batch(design, values_at(design, draws, 25.0), 25.0)
    assert batch.solution.stepped.all() and batch.converged.all()
    expected = [_verdict_starts(sample_design(design, draws, i, 25.0)) for i in range(24)]
    assert batch.starts.tolist() == expected
    r = monte_carlo(design, samples=24, seed=5)
    assert 0.0 < r.yield_start < 1.0
    assert START_GAIN == 1.0
