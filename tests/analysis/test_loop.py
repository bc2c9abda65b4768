"""The loop search: batch against singles, the phase slope, crossings and none."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from ringwise.analysis.loop import (
    BATCH_ELIMINATION,
    CONDENSE_BATCH,
    TWO_PI,
    find_oscillation,
    loop_solve,
    return_ratio,
    return_ratio_slope,
    without_pinned,
)
from ringwise.analysis.operating import solve
from ringwise.circuit import batchlu
from tests.conftest import BASE_CE, design_from


def _stack(sss):
    first = sss[0]
    return dataclasses.replace(
        first,
        G=np.stack([s.G for s in sss]),
        C=np.stack([s.C for s in sss]),
        gm=np.array([s.gm for s in sss]),
    )


def test_batch_of_n_equals_n_singles() -> None:
    solved = [solve(design_from(BASE_CE, tank__C2=c)) for c in ("1n5", "2n2", "3n3", "4n7")]
    batch = find_oscillation(
        _stack([s.ss for s in solved]), np.array([s.tank.f_ideal for s in solved])
    )
    for i, s in enumerate(solved):
        one = find_oscillation(_stack([s.ss]), np.array([s.tank.f_ideal]))
        assert batch.f_osc[i] == pytest.approx(float(one.f_osc[0]), rel=1e-10)
        assert batch.gain[i] == pytest.approx(float(one.gain[0]), rel=1e-9)


def test_small_batch_equals_singles_exactly() -> None:
    # Every member takes the same compiled iteration, alone or in a batch:
    # the figures are the same numbers, not merely close ones.
    solved = [solve(design_from(BASE_CE, tank__C2=c)) for c in ("1n5", "2n2", "3n3", "4n7")]
    f_ref = np.array([s.tank.f_ideal for s in solved])
    batch = find_oscillation(_stack([s.ss for s in solved]), f_ref, 1.05 * f_ref)
    for i, s in enumerate(solved):
        one = find_oscillation(s.ss, s.tank.f_ideal, 1.05 * s.tank.f_ideal)
        for name in ("f_osc", "T", "gain", "phase_slope", "Q_loaded", "Z_out", "dT_ds"):
            assert getattr(batch, name)[i] == getattr(one, name), name


def test_compiled_newton_gives_the_numbers_of_return_ratio_slope() -> None:
    # The compiled iteration (its own LU with partial pivoting) against the
    # general solve (LAPACK) at the crossing it found: T to round-off and the
    # last step's square, dT/ds to the last step (common practice, no source).
    solved = [solve(design_from(BASE_CE, tank__C2=c)) for c in ("1n5", "3n3", "4n7")]
    ss = _stack([s.ss for s in solved])
    f = np.array([s.f_osc for s in solved])
    figs = find_oscillation(ss, f, f * np.array([0.97, 1.0, 1.02]))
    T0, dT0, x0 = return_ratio_slope(ss, (TWO_PI * 1j) * figs.f_osc)
    np.testing.assert_allclose(figs.T, T0, rtol=1e-11)
    np.testing.assert_allclose(figs.dT_ds, dT0, rtol=1e-6)
    np.testing.assert_allclose(figs.Z_out, np.abs(x0 @ ss.u), rtol=1e-6)


def test_phase_is_zero_at_f_osc_and_q_matches_the_phase_slope() -> None:
    # Q_loaded = (ω/2)|dφ/dω| (Razavi, oscillator chapter, from memory), here
    # against a central difference of the phase of T itself (common practice).
    s = solve(design_from(BASE_CE))
    f = s.f_osc
    T = return_ratio(s.ss, 2j * math.pi * np.array([f]))[0]
    assert abs(np.angle(T)) < 1e-8
    h = 1e-6 * f
    phases = np.angle(return_ratio(s.ss, 2j * math.pi * np.array([f - h, f + h])))
    slope = (phases[1] - phases[0]) / (2 * 2 * math.pi * h)
    assert float(s.loop.phase_slope) == pytest.approx(slope, rel=1e-5)
    assert float(s.loop.Q_loaded) == pytest.approx(math.pi * f * abs(slope), rel=1e-5)


def test_far_start_falls_back_to_the_grid() -> None:
    s = solve(design_from(BASE_CE))
    far = find_oscillation(_stack([s.ss]), np.array([s.tank.f_ideal]), np.array([2.5 * s.f_osc]))
    assert float(far.f_osc[0]) == pytest.approx(s.f_osc, rel=1e-9)


def test_no_crossing_is_nan() -> None:
    # A coil with Q_L = 0.2 is no resonator: the return ratio's phase never
    # falls through zero near the tank, and every figure is NaN, not a guess.
    s = solve(design_from(BASE_CE, tank__Q_L=0.2))
    assert s.f_osc is None
    assert np.isnan(s.loop.gain) and np.isnan(s.loop.Q_loaded)


def test_large_batch_without_the_pinned_unknowns_equals_single_solves() -> None:
    # A batch of CONDENSE_BATCH members drops the supply's pinned unknowns
    # before its search; each member must keep the figures of its own solve.
    s = solve(design_from(BASE_CE))
    assert without_pinned(s.ss).G.shape[-1] == s.ss.G.shape[-1] - 2  # v_cc and the supply's current
    scale = np.linspace(0.8, 1.25, CONDENSE_BATCH)
    batch = dataclasses.replace(
        s.ss,
        G=np.broadcast_to(s.ss.G, (CONDENSE_BATCH, *s.ss.G.shape)),
        C=s.ss.C * scale[:, None, None],
        gm=s.ss.gm * scale,
    )
    assert without_pinned(batch).G.shape[-1] == s.ss.G.shape[-1] - 2
    figs = find_oscillation(batch, s.tank.f_ideal / np.sqrt(scale))
    for i in (0, CONDENSE_BATCH // 2, CONDENSE_BATCH - 1):
        one = dataclasses.replace(s.ss, G=s.ss.G, C=batch.C[i], gm=batch.gm[i])
        alone = find_oscillation(one, s.tank.f_ideal / np.sqrt(scale[i]))
        for a, b in ((figs.f_osc[i], alone.f_osc), (figs.gain[i], alone.gain)):
            assert a == pytest.approx(float(b), rel=1e-9)
        assert figs.Q_loaded[i] == pytest.approx(float(alone.Q_loaded), rel=1e-7)
        assert figs.Z_out[i] == pytest.approx(float(alone.Z_out), rel=1e-9)


@pytest.mark.parametrize("limit", [batchlu.BACKWARD_LIMIT, 0.0])
def test_a_large_batch_equals_lapack_member_by_member(monkeypatch, limit) -> None:
    # A batch large enough for the elimination across it, against LAPACK
    # (numpy.linalg, the reference library) on each member; with a backward
    # error limit of 0 every member goes through the pivoted fallback instead.
    monkeypatch.setattr(batchlu, "BACKWARD_LIMIT", limit)
    values = ("1n", "1n5", "2n2", "3n3", "4n7", "100n")
    solved = [solve(design_from(BASE_CE, tank__C2=c)) for c in values]
    size = max(BATCH_ELIMINATION, CONDENSE_BATCH)
    picks = [solved[i % len(solved)] for i in range(size)]
    ss = without_pinned(_stack([s.ss for s in picks]))
    f = np.array([s.tank.f_ideal for s in picks])
    grid = f[:, None] * np.array([0.9, 1.0, 1.1])
    for s_arr in (TWO_PI * 1j * f, TWO_PI * 1j * grid):
        x, dx = loop_solve(ss, s_arr, slope=s_arr.ndim == 1)
        Y = ss.G.reshape(size, *(1,) * (s_arr.ndim - 1), *ss.G.shape[1:]) + s_arr[
            ..., None, None
        ] * ss.C.reshape(size, *(1,) * (s_arr.ndim - 1), *ss.C.shape[1:])
        ref = np.linalg.solve(Y, np.broadcast_to(ss.u, Y.shape[:-1])[..., None])[..., 0]
        np.testing.assert_allclose(x, ref, rtol=1e-9, atol=1e-12 * np.abs(ref).max())
        if dx is not None:
            Cx = (ss.C @ ref[..., None])[..., 0]
            dref = -np.linalg.solve(Y, Cx[..., None])[..., 0]
            np.testing.assert_allclose(dx, dref, rtol=1e-9, atol=1e-12 * np.abs(dref).max())
