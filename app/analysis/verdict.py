"""One verdict: does it start, and what does the oscillation do once it runs.

The startup verdict (:mod:`ringwise.analysis.startup`, loop gain and bias)
and the periodic steady state's behaviour (:mod:`ringwise.analysis.floquet`)
are combined into one code, one sentence and one symbol.  The verdict is
taken *after* the warnings, so it never calls a design clean beside a
warning: any warning about the design's health turns "settles cleanly" into
"settles, see the warnings".
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

from ringwise.analysis import floquet
from ringwise.analysis.periodic import SteadyState
from ringwise.analysis.startup import Verdict

#: Warning codes that say nothing about whether the oscillation runs cleanly:
#: bookkeeping, and advice on how the output is taken (a buffer against pulling).
NOT_HEALTH: Final = frozenset({"unused-part", "load-pulling"})
#: The warning the steady state raises when the collector swings into saturation.
SATURATION_CODE: Final = "low-headroom"

LABELS: Final = {
    "settles-cleanly": ("Starts and settles cleanly", "ok"),
    "settles-with-warnings": ("Starts and settles; see the warnings", "caution"),
    "saturates": ("Starts, but the swing runs into saturation", "caution"),
    "marginal": ("Marginal: starts, but tolerances or temperature may stop it", "caution"),
    "squegs": ("Starts, but squegs: the envelope will not hold steady", "stop"),
    "period-doubles": ("Starts, but period-doubles: alternate cycles differ", "stop"),
    "unstable": ("Starts, but its steady oscillation is unstable: expect squegging", "stop"),
    "unresolved": (
        "Starts; no steady oscillation found — run the time-domain simulation",
        "caution",
    ),
    "wont-start": ("Will not start", "stop"),
    "pending": ("Steady state pending", "pending"),
}


@dataclass(frozen=True)
class Combined:
    code: str
    label: str
    icon: str


def combined_verdict(start: Verdict, steady: SteadyState | None, warnings: list[str]) -> Combined:
    """The one verdict from the startup verdict, the steady state and the warning codes.

    ``steady`` is ``None`` while the steady state is still to come (the
    sheet's first answer): the startup verdict stands, marked pending.
    """
    if start.verdict == "will-not-start":
        return Combined("wont-start", start.label, "stop")
    if steady is None:
        return Combined("pending", f"{start.label} (steady state pending)", "pending")
    code = {
        floquet.SQUEGS: "squegs",
        floquet.PERIOD_DOUBLING: "period-doubles",
        floquet.UNSTABLE: "unstable",
        floquet.NO_ORBIT: "unresolved",
    }.get(steady.behaviour)
    if code is None:
        health = [w for w in warnings if w not in NOT_HEALTH]
        if SATURATION_CODE in health:
            code = "saturates"
        elif start.verdict == "marginal":
            code = "marginal"
        elif health:
            code = "settles-with-warnings"
        else:
            code = "settles-cleanly"
    label, icon = LABELS[code]
    return Combined(code, label, icon)
