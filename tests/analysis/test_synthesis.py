"""Design from targets."""

from __future__ import annotations

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ringwise.analysis.analyze import analyze
from ringwise.analysis.synthesis import SynthesisError, synthesize
from ringwise.preferred import values

#: Largest step between neighbouring E24 values, as a ratio (IEC 60063 E24:
#: 1.0 → 1.1 is the widest, 10 %); a capacitor step moves f by half of it.
E24_STEP = max(b / a for a, b in zip(values("E24"), values("E24")[1:], strict=False))


@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    topology=st.sampled_from(["common-emitter", "common-base", "common-collector"]),
    f=st.floats(50e3, 30e6),
    Vcc=st.sampled_from([5.0, 9.0, 12.0, 15.0]),
    IC=st.floats(0.3e-3, 5e-3),
    gain=st.floats(2.5, 5.0),
)
def test_random_targets_are_met(topology, f, Vcc, IC, gain) -> None:
    # Issue check: the produced design meets its frequency within the E-series
    # grid step and its loop gain within 20 %.
    result = synthesize(topology, f, Vcc, IC, gain=gain)
    r = analyze(result.design)
    assert r.operating_point.region == "active"
    assert r.loop.f_osc is not None
    assert abs(math.log(r.loop.f_osc / f)) <= math.log(E24_STEP)
    assert r.loop.gain == pytest.approx(gain, rel=0.20)
    assert result.reasons and all(isinstance(s, str) and s for s in result.reasons)


def test_values_are_standard() -> None:
    d = synthesize("common-emitter", 1e6, 12, 1e-3).design
    e24 = set(values("E24"))
    for v in (d.bias.RB1, d.bias.RB2, d.bias.RC, d.bias.RE, d.tank.C1, d.tank.C2):
        mantissa = round(v / 10 ** math.floor(math.log10(v)) * 10)
        assert mantissa in e24


def test_given_inductor_is_kept() -> None:
    d = synthesize("common-emitter", 10e6, 9, 2e-3, L=1e-6).design
    assert d.tank.L == 1e-6


def test_impossible_targets_are_refused() -> None:
    with pytest.raises(SynthesisError, match="headroom"):
        synthesize("common-emitter", 1e6, 1.0, 1e-3)
    with pytest.raises(SynthesisError, match="out of range"):
        synthesize("common-emitter", 1e12, 12, 1e-3)
