"""Varactor tuning across its range, and the spread over the tuning range.

External checks:

- f_osc across the range against the ideal tank's closed form
  f = 1/(2π√(L·(C_fixed + C_b(V)))) (circuit theory, common practice): the
  pipeline's ideal resonance equals it, and the full circuit's f_osc stays
  within a few per cent of it (the transistor's capacitances pull it).
- The tuning gain K against central differences of single full solves
  (common practice, no source).
- The diode's reverse voltage along the orbit against V(q) of the charge law
  (ringwise.circuit.varactor, checked against Sze there).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from ringwise.analysis.analyze import analyze
from ringwise.analysis.operating import solve
from ringwise.analysis.spread import monte_carlo
from ringwise.analysis.tuning import TUNING_POINTS, tuning, tuning_checks
from ringwise.circuit.topologies import tank_capacitance, varactor_branch
from ringwise.design import Design, with_param
from tests.conftest import SAMPLES

SAMPLE = SAMPLES / "varactor-lo-5M.json"


def lo() -> Design:
    return Design.model_validate_json(SAMPLE.read_text(encoding="utf-8"))


def lossy() -> Design:
    """A lossy diode (its Q = 1/(ωC·R_s) lowest where C is largest, at low bias) and a
    lower gain: it starts at the top of the range, not at the bottom."""
    return with_param(with_param(lo(), "R_v", 300.0), "RC", 120.0)


def test_frequency_across_the_range_follows_the_ideal_tank() -> None:
    d = lo()
    v, t = d.varactor, d.tank
    r = tuning(d, large_signal=False)
    assert r is not None and len(r.V) == TUNING_POINTS
    assert r.V[0] == v.V_min and r.V[-1] == v.V_max
    for V, f in zip(r.V, r.f_osc, strict=True):
        C_b = float(varactor_branch(v.C_v, v.C_j0, v.phi_j, v.m_j, V))
        closed = 1.0 / (2 * math.pi * math.sqrt(t.L * tank_capacitance(t.C1, t.C2, t.C3, C_b)))
        assert solve(with_param(d, "V_tune", V)).tank.f_ideal == pytest.approx(closed, rel=1e-12)
        assert f == pytest.approx(closed, rel=0.05)
    # the frequency rises with the reverse bias, the gain falls off towards the top
    assert all(np.diff(r.f_osc) > 0)
    assert r.tuning_ratio == pytest.approx(r.f_high / r.f_low)
    assert r.f_low == r.f_osc[0] and r.f_high == r.f_osc[-1]


def test_batch_equals_single_solves_and_K_equals_their_differences() -> None:
    d = lo()
    r = tuning(d, large_signal=False)
    for i in (0, TUNING_POINTS // 2, TUNING_POINTS - 1):
        s = solve(with_param(d, "V_tune", r.V[i]))
        assert r.f_osc[i] == pytest.approx(s.f_osc, rel=1e-9)
        assert r.gain[i] == pytest.approx(s.gain, rel=1e-6)
    mid = r.V[TUNING_POINTS // 2]
    dV = 1e-3
    f_hi, f_lo = (solve(with_param(d, "V_tune", mid + s)).f_osc for s in (dV, -dV))
    assert r.K[TUNING_POINTS // 2] == pytest.approx((f_hi - f_lo) / (2 * dV), rel=2e-3)
    assert r.K_ratio == pytest.approx(r.K[0] / r.K[-1])
    assert r.K_ratio > 1  # a hyperabrupt diode tunes faster at low bias


def test_the_analysis_carries_the_same_tuning_range() -> None:
    # The full analysis solves the tuning range in its threshold search's
    # first batch: the figures are those of the range solved on its own
    # (the same converged solves; common practice, no source).
    d = lo()
    alone = tuning(d, large_signal=False)
    carried = analyze(d, large_signal=False).tuning
    assert carried is not None and alone is not None
    np.testing.assert_allclose(carried.f_osc, alone.f_osc, rtol=1e-10)
    np.testing.assert_allclose(carried.gain, alone.gain, rtol=1e-7)
    assert carried.starts == alone.starts


def test_steady_state_at_the_ends_and_middle_reads_the_diode_swing() -> None:
    d = lo()
    r = analyze(d).tuning
    assert r is not None and [p.V_tune for p in r.points] == pytest.approx([2.5, 5.25, 8.0])
    for p in r.points:
        assert p.behaviour == "settles" and p.starts
        assert p.V_diode_min < p.V_tune < p.V_diode_max
        assert p.V_rf_peak == pytest.approx(
            max(p.V_tune - p.V_diode_min, p.V_diode_max - p.V_tune), rel=1e-12
        )
        assert p.forward_biased is False
    # the sheet's first (small-signal) answer leaves the steady states out
    assert analyze(d, large_signal=False).tuning.points == []


def test_a_large_swing_at_low_bias_forward_biases_the_diode_and_warns() -> None:
    d = with_param(with_param(lo(), "RC", 470.0), "V_tune", 1.0)
    d = d.model_copy(update={"varactor": d.varactor.model_copy(update={"V_min": 1.0})})
    r = analyze(d)
    low = r.tuning.points[0]
    assert low.V_tune == 1.0 and low.forward_biased and low.V_diode_min < 0
    assert "varactor-forward-biased" in [w.code for w in r.warnings]


def test_a_range_where_it_stops_is_named() -> None:
    d = lossy()
    t = tuning(d, large_signal=False)
    assert t.starts[-1] and not t.starts[0] and not t.starts_everywhere
    codes = [f.code for f in tuning_checks(t)]
    assert codes == ["tuning-no-start"]


def test_spread_asks_for_a_start_at_every_tuning_voltage() -> None:
    d = lossy()
    r = monte_carlo(d, samples=40, seed=3)
    v = d.varactor
    assert r.tuning_voltages == sorted({v.V_min, 0.5 * (v.V_min + v.V_max), v.V_max, v.V_tune})
    per_T = len(r.tuning_voltages)
    assert r.starts.shape == (len(r.temperatures) * per_T, 40)
    assert r.yield_start == pytest.approx(float(np.mean(np.all(r.starts, axis=0))))
    # it stops at V_min in most samples: the yield over the whole range is far below
    # the yield at the design's own tuning voltage alone
    own = [i for i in range(r.starts.shape[0]) if r.tuning_voltages[i % per_T] == v.V_tune]
    top = [i for i in range(r.starts.shape[0]) if i % per_T == per_T - 1]
    assert r.starts[top].all()
    assert float(np.mean(np.all(r.starts[own], axis=0))) > 0.9
    assert r.yield_start < 0.5
    assert r.worst_cases[0]["V_tune"] == v.V_min


def test_the_time_domain_run_reaches_the_steady_state_with_the_varactor() -> None:
    """The transient (the same stepper, the varactor's charge law as a further
    nonlinearity) against the periodic steady state: frequency and amplitude."""
    from ringwise.analysis.periodic import steady_state
    from ringwise.analysis.transient import run

    d = lo()
    ss = steady_state(solve(d))
    r = run(d, cycles=300)
    assert r.f_meas == pytest.approx(ss.f, rel=1e-3)
    assert r.amp_out_fund == pytest.approx(ss.amp_out, rel=1e-2)
