"""Every sample design is a buildable design that starts with a sensible margin."""

from __future__ import annotations

import json

import pytest

from ringwise.analysis.analyze import analyze
from tests.conftest import all_finite, load_sample, sample_paths


def test_there_are_samples_of_every_form() -> None:
    forms = {load_sample(p).topology.value for p in sample_paths()}
    assert forms == {"common-emitter", "common-base", "common-collector"}
    assert any(load_sample(p).tank.C3 is not None for p in sample_paths())


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.name)
def test_sample_starts_with_margin(path) -> None:
    r = analyze(load_sample(path))
    assert r.operating_point.region == "active"
    # Margin: loop gain 3-8 (target 3 is common practice, no source).
    assert 3.0 <= r.loop.gain <= 8.0
    assert r.startup.verdict == "will-start"
    assert r.poles.sigma > 0
    assert abs(r.loop.f_osc / r.tank.f_ideal - 1) < 0.02
    # Advice about the load pulling the frequency is expected where a load is
    # given; nothing else may be flagged.
    assert {w.code for w in r.warnings} <= {"load-pulling"}
    assert r.steady_state.behaviour == "settles" and r.steady_state.amp_out > 0
    assert r.verdict.code == "settles-cleanly" and r.verdict.icon == "ok"
    data = json.loads(r.model_dump_json())
    assert all_finite(data)
