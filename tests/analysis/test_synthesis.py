"""Design from targets."""

from __future__ import annotations

import math
import re

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
    try:
        result = synthesize(topology, f, Vcc, IC, gain=gain)
    except SynthesisError as err:
        # refused only as unbuildable, with the part and its limit named
        assert re.search(r"(coil|C\d) would be .* below ", str(err)), str(err)
        return
    r = analyze(result.design)
    assert r.operating_point.region == "active"
    assert r.loop.f_osc is not None
    assert abs(math.log(r.loop.f_osc / f)) <= math.log(E24_STEP)
    assert r.loop.gain == pytest.approx(gain, rel=0.20)
    assert result.reasons and all(isinstance(s, str) and s for s in result.reasons)


def test_values_are_standard() -> None:
    r = synthesize("common-emitter", 1e6, 12, 1e-3)
    d = r.design
    e24 = set(values("E24"))

    def standard(v: float) -> bool:
        return round(v / 10 ** math.floor(math.log10(v)) * 10) in e24

    # the trimmed capacitor is one or two E24 values in parallel (IEC 60063 E24)
    trimmed = {} if r.trim is None else {r.trim.part: r.trim.parts}
    for part in ("RB1", "RB2", "RC", "RE", "C1", "C2"):
        v = getattr(d.bias, part, None) or getattr(d.tank, part)
        if part in trimmed:
            assert v == pytest.approx(sum(trimmed[part]))
            assert all(standard(x) for x in trimmed[part])
        else:
            assert standard(v)


def test_given_inductor_is_kept() -> None:
    d = synthesize("common-emitter", 10e6, 9, 2e-3, L=1e-6).design
    assert d.tank.L == 1e-6


def test_impossible_targets_are_refused() -> None:
    with pytest.raises(SynthesisError, match="headroom"):
        synthesize("common-emitter", 1e6, 1.0, 1e-3)
    with pytest.raises(SynthesisError, match="out of range"):
        synthesize("common-emitter", 1e12, 12, 1e-3)


def test_what_the_user_set_is_kept() -> None:
    device = {"preset": None, "beta": 150.0, "IS": 2e-14, "VA": 80.0, "fT": 250e6, "C_mu": 4e-12}
    r = synthesize("common-emitter", 455e3, 12, 1e-3, Q_L=100, R_load=4.7e3, device=device)
    d = r.design
    assert d.tank.Q_L == 100 and d.load.R_load == 4.7e3
    assert d.device.preset is None
    assert (d.device.beta, d.device.IS, d.device.fT, d.device.C_mu) == (150.0, 2e-14, 250e6, 4e-12)
    assert any(x.startswith("Kept as set: Q_L = 100, the load R_load = 4.7 kΩ") for x in r.reasons)
    # the loop gain is met with the load and the coil in place
    assert analyze(d).loop.gain == pytest.approx(3.0, rel=0.2)


def test_frequency_miss_is_stated_and_trimmed_out() -> None:
    r = synthesize("common-emitter", 7e6, 12, 2e-3)
    stated = [x for x in r.reasons if x.startswith("In standard values f_osc = ")]
    assert len(stated) == 1 and "from the target 7 MHz" in stated[0]
    assert any("trimmed from" in x for x in r.reasons)
    assert abs(r.miss) < 2e-3
    assert r.f_osc == pytest.approx(analyze(r.design).loop.f_osc, rel=1e-9)


def test_clapp_form_on_request() -> None:
    r = synthesize("common-emitter", 7e6, 12, 2e-3, clapp=True)
    t = r.design.tank
    assert t.C3 is not None
    series_12 = t.C1 * t.C2 / (t.C1 + t.C2)
    assert 3 < series_12 / t.C3 < 8  # C1, C2 in series some 5× C3
    assert any(x.startswith("C3 = ") and "Clapp" in x for x in r.reasons)
    assert abs(r.miss) < 2e-3
    plain = synthesize("common-emitter", 7e6, 12, 2e-3)
    assert t.L > 2 * plain.design.tank.L  # the Clapp form's coil is larger for the same f


def test_unbuildable_parts_are_refused_with_a_reason() -> None:
    # a 30 MHz follower at 5 mA wants a coil of some 18 nH
    with pytest.raises(SynthesisError, match=r"coil would be 18 nH, below 50 nH.*Clapp form"):
        synthesize("common-collector", 30e6, 12, 5e-3)
    clapp = synthesize("common-collector", 30e6, 12, 5e-3, clapp=True).design
    assert clapp.tank.L >= 50e-9
    # a given 10 µH coil at 30 MHz leaves C2 of a few pF against C_π of some 24 pF
    with pytest.raises(SynthesisError, match=r"C\d would be .*transistor's .* across it"):
        synthesize("common-emitter", 30e6, 12, 5e-3, L=10e-6)


def test_progress_is_reported_and_can_stop_the_search() -> None:
    seen: list[float] = []
    synthesize("common-emitter", 1e6, 12, 1e-3, progress=seen.append)
    assert seen and seen[-1] == 1.0
    # a target gain out of reach makes it try several tank impedances; stop after one
    r = synthesize("common-collector", 30e6, 12, 5e-3, clapp=True, progress=lambda x: x >= 1.0)
    assert r.stopped
    assert any(x.startswith("stopped after 1 of") for x in r.reasons)
