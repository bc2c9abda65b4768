"""One verdict from startup, steady state and warnings, never contradicting them."""

from __future__ import annotations

import pytest

from ringwise.analysis.periodic import SteadyState
from ringwise.analysis.startup import Verdict
from ringwise.analysis.verdict import combined_verdict

STARTS = Verdict("will-start", "Will start", 4.0, 12.0)
MARGINAL = Verdict("marginal", "Marginal", 1.5, 3.5)
DEAD = Verdict("will-not-start", "Will not start", 0.5, -6.0)


def _ss(behaviour: str) -> SteadyState:
    return SteadyState(behaviour=behaviour, reason=None)


@pytest.mark.parametrize(
    ("start", "behaviour", "warnings", "code", "icon"),
    [
        (STARTS, "settles", [], "settles-cleanly", "ok"),
        (STARTS, "settles", ["unused-part", "load-pulling"], "settles-cleanly", "ok"),
        (STARTS, "settles", ["soft-divider"], "settles-with-warnings", "caution"),
        (STARTS, "settles", ["low-headroom"], "saturates", "caution"),
        (MARGINAL, "settles", [], "marginal", "caution"),
        (STARTS, "squegs", [], "squegs", "stop"),
        (STARTS, "period-doubling", [], "period-doubles", "stop"),
        (STARTS, "unstable", [], "unstable", "stop"),
        (STARTS, "no-orbit", [], "unresolved", "caution"),
        (DEAD, "no-orbit", [], "wont-start", "stop"),
        (STARTS, None, [], "pending", "pending"),
    ],
)
def test_verdict_table(start, behaviour, warnings, code, icon):
    v = combined_verdict(start, None if behaviour is None else _ss(behaviour), warnings)
    assert (v.code, v.icon) == (code, icon)
    assert v.label


def test_a_health_warning_never_sits_beside_a_clean_verdict():
    # every warning code but the bookkeeping ones turns "cleanly" into something else
    for code in ("soft-divider", "capacitor-stress", "extra-rhp-pole", "hot-device"):
        assert combined_verdict(STARTS, _ss("settles"), [code]).code != "settles-cleanly"
