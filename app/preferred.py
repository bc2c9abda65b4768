"""Standard (preferred) component values: the IEC 60063 E-series.

The tables are written out here, one decade each as significant figures
(checked entry by entry against the standard's lists in the tests).  The
two-figure series (E6, E12, E24) are not rounded geometric series: IEC 60063
keeps 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2 for historical reasons, so a
formula cannot replace the table.  :func:`snap_design` moves every part of a
design to the nearest value of a series and reports what that does to the
oscillation frequency and the loop gain; asked to keep the frequency, it then
re-trims one tank capacitor (:mod:`ringwise.analysis.trim`: C3, or the
smaller of C1 and C2) to a standard value or two in parallel.

References
----------
IEC 60063:2015, "Preferred number series for resistors and capacitors".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Final

from ringwise.analysis.operating import solve
from ringwise.design import Design, get_param, with_param

if TYPE_CHECKING:
    from ringwise.analysis.trim import Trim

_E24: Final = (
    10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
    33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91,
)  # fmt: skip
_E96: Final = (
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143,
    147, 150, 154, 158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210,
    215, 221, 226, 232, 237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
    316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412, 422, 432, 442, 453,
    464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
    681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976,
)  # fmt: skip
#: Significant figures of each series in one decade, coarsest first.  E12 is
#: every second E24 value and E6 every fourth; E48 is every second E96 value
#: (IEC 60063 builds each coarser series that way).
SERIES: Final = {
    "E6": _E24[::4],
    "E12": _E24[::2],
    "E24": _E24,
    "E48": _E96[::2],
    "E96": _E96,
}
#: Relative difference below which a value counts as a series value (a value
#: written as "4k7" parses to 4700 within float rounding).
SAME_VALUE: Final = 1e-9
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
        return SERIES[series]
    except KeyError:
        known = ", ".join(SERIES)
        raise SeriesError(f"unknown series {series!r}; known: {known}") from None


def nearest(value: float, series: str) -> float:
    """The value of ``series`` nearest ``value`` (on a log scale); ``value`` > 0."""
    figures = values(series)
    if not (math.isfinite(value) and value > 0):
        raise SeriesError(f"no standard value near {value!r}: the value must be positive")
    digits = len(str(figures[0]))  # 2 for E6 … E24, 3 for E48 and E96
    scale = 10.0 ** (math.floor(math.log10(value)) - digits + 1)
    # this decade's figures and the next decade's first, as values
    candidates = [f * scale for f in figures] + [figures[0] * scale * 10]
    best = min(candidates, key=lambda c: abs(math.log(c / value)))
    return float(f"{best:.{digits}g}")


def series_of(value: float) -> str | None:
    """The coarsest series that has ``value`` as one of its values, or None."""
    if not (math.isfinite(value) and value > 0):
        return None
    for name in SERIES:
        if math.isclose(nearest(value, name), value, rel_tol=SAME_VALUE):
            return name
    return None


@dataclass(frozen=True)
class Snapped:
    design: Design
    changes: list[tuple[str, float, float]]  # (part, from, to)
    f_before: float | None
    f_after: float | None
    gain_before: float
    gain_after: float
    #: the capacitor re-trimmed to keep the frequency (None when not asked)
    trim: Trim | None = None


def snap_design(design: Design, series: str, keep_frequency: bool = False) -> Snapped:
    """Every resistor, capacitor and the coil moved to the nearest ``series`` value;
    with ``keep_frequency``, one tank capacitor then re-trimmed so that f_osc is
    what it was (or the reason it cannot be)."""
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
    trim = None
    if keep_frequency and before.f_osc is not None:
        from ringwise.analysis.trim import trim_frequency  # trim uses this module's tables

        trim = trim_frequency(snapped, before.f_osc, series)
        if trim.reason is None:
            snapped = trim.design
            part = trim.part
            old = get_param(design, part)
            changes = [c for c in changes if c[0] != part]
            if old != sum(trim.parts):
                changes.append((part, old, sum(trim.parts)))
            after = solve(snapped)
    return Snapped(
        design=snapped,
        changes=changes,
        f_before=before.f_osc,
        f_after=after.f_osc,
        gain_before=before.gain,
        gain_after=after.gain,
        trim=trim,
    )
