"""Standard (preferred) component values: the IEC 60063 E-series.

The tables come from the ``eseries`` package (checked entry by entry against
the standard's lists in the tests).  :func:`snap_design` moves every part of a
design to the nearest value of a series and reports what that does to the
oscillation frequency and the loop gain.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

import eseries

from ringwise.analysis.operating import solve
from ringwise.design import Design, get_param, with_param

SERIES: Final = {
    "E6": eseries.E6,
    "E12": eseries.E12,
    "E24": eseries.E24,
    "E48": eseries.E48,
    "E96": eseries.E96,
}
#: Parts snapped, by kind. Inductors are stocked in the E12 values at most
#: (common practice, no source), so they never snap finer than E12.
RESISTORS: Final = ("RB1", "RB2", "RC", "RE", "R_load")
CAPACITORS: Final = ("C1", "C2", "C3", "CE", "CB", "Cc1", "Cc2")
INDUCTORS: Final = ("L",)
INDUCTOR_SERIES_LIMIT: Final = "E12"


class SeriesError(ValueError):
    """An unknown E-series name."""


def values(series: str) -> tuple[int, ...]:
    """The significant figures of ``series`` per decade (e.g. 10 … 82 for E12)."""
    try:
        return tuple(eseries.series(SERIES[series]))
    except KeyError:
        known = ", ".join(SERIES)
        raise SeriesError(f"unknown series {series!r}; known: {known}") from None


def nearest(value: float, series: str) -> float:
    """The value of ``series`` nearest ``value`` (on a log scale)."""
    values(series)  # validates the name
    return float(eseries.find_nearest(SERIES[series], value))


@dataclass(frozen=True)
class Snapped:
    design: Design
    changes: list[tuple[str, float, float]]  # (part, from, to)
    f_before: float | None
    f_after: float | None
    gain_before: float
    gain_after: float


def snap_design(design: Design, series: str) -> Snapped:
    """Every resistor, capacitor and the coil moved to the nearest ``series`` value."""
    values(series)
    coil_series = series if list(SERIES).index(series) <= 1 else INDUCTOR_SERIES_LIMIT
    snapped = design
    changes: list[tuple[str, float, float]] = []
    for part in (*RESISTORS, *CAPACITORS, *INDUCTORS):
        value = get_param(design, part)
        if value is None or part in design.unused_parts():
            continue
        target = nearest(value, coil_series if part in INDUCTORS else series)
        if target != value:
            snapped = with_param(snapped, part, target)
            changes.append((part, value, target))
    before, after = solve(design), solve(snapped)
    return Snapped(
        design=snapped,
        changes=changes,
        f_before=before.f_osc,
        f_after=after.f_osc,
        gain_before=before.gain,
        gain_after=after.gain,
    )
