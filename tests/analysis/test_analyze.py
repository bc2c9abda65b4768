"""The full analysis: designs that cannot oscillate get a normal result that says why."""

from __future__ import annotations

import json

import pytest

from ringwise.analysis.analyze import analyze
from tests.conftest import BASE_CE, all_finite, design_from

# (changes, region, expected warning codes, f_osc exists)
DEAD = [
    ({"tank__Q_L": 0.2}, "active", {"no-crossing", "no-threshold"}, False),
    ({"bias__RB1": "10M", "bias__RB2": "1k"}, "cut-off", {"cut-off"}, True),
    ({"bias__RC": "100k"}, "saturation", {"saturated", "no-crossing"}, False),
    ({"coupling__Cc2": "1p"}, "active", {"coupling-reactance"}, True),
    ({"coupling__Cc1": "1p"}, "active", {"no-crossing"}, False),
]


@pytest.mark.parametrize(("changes", "region", "codes", "has_f"), DEAD)
def test_dead_designs_are_explained(changes, region, codes, has_f) -> None:
    r = analyze(design_from(BASE_CE, **changes))
    assert r.startup.verdict == "will-not-start"
    assert r.operating_point.region == region
    assert codes <= {w.code for w in r.warnings}
    assert (r.loop.f_osc is not None) == has_f
    if not has_f:
        assert r.loop.gain is None and r.loop.budget == []
    text = r.model_dump_json()
    assert "NaN" not in text and "Infinity" not in text
    assert all_finite(json.loads(text))


def test_saturated_design_still_reports_the_starting_value() -> None:
    # Too large a collector resistor saturates the transistor; the threshold is
    # the lowest RC at which it starts, well below the value given.
    r = analyze(design_from(BASE_CE, bias__RC="100k"))
    assert r.startup.threshold_RC is not None and r.startup.threshold_RC < 1e3


def test_unused_part_warning() -> None:
    r = analyze(design_from(BASE_CE, bias__CB="10n"))
    assert "unused-part" in {w.code for w in r.warnings}


def test_ideal_gain_exceeds_full_gain_with_losses(base_ce) -> None:
    r = analyze(base_ce)
    assert r.loop.gain < r.loop.gain_ideal
    assert r.loop.Q_loaded > 0 and r.loop.phase_slope < 0


def test_remembered_results_are_equal_and_independent(base_ce) -> None:
    a = analyze(base_ce)
    b = analyze(base_ce)
    assert a == b and a is not b
    a.loop.budget.clear()  # a caller changing its copy changes nothing remembered
    assert analyze(base_ce) == b


def test_steady_state_section_of_the_contract(base_ce) -> None:
    """``steady_state`` carries the issue's fields; no ``large_signal`` or ``swing`` remain."""
    data = analyze(base_ce).model_dump(mode="json")
    assert "large_signal" not in data and "swing" not in data
    ss = data["steady_state"]
    for key in ("f", "amp_out", "amp_be", "thd", "IC_avg", "VCE_min", "P_tank"):
        assert isinstance(ss[key], float), key
    # this design (loop gain 18) period-doubles: no settling time
    assert ss["behaviour"] == "period-doubling" and ss["settle_cycles"] is None
    assert ss["behaviour"] in ("settles", "squegs", "period-doubling", "unstable", "no-orbit")
    assert all(set(m) == {"re", "im"} for m in ss["multipliers"])
    assert data["verdict"]["code"] and data["verdict"]["icon"] in ("ok", "caution", "stop")
