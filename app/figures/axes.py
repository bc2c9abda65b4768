"""Axes a person can read: ticks at round values, labelled in engineering notation.

Plotly's automatic ticks label a log axis with bare mantissas ("5", "2" for
0.5 and 0.2) and a linear axis at whatever step fits ("118.3°").  Here every
axis gets its ticks chosen in Python and written out (``tickmode: "array"``):

- a log axis at 1-2-5 per decade (or 1-2-3-5, 1…9 on a short span, or one
  label per decade, every second decade… on a long one), the other integer
  mantissas as unlabelled minor ticks;
- a linear axis at a 1-2-5 step;
- a phase axis at multiples of 30° or 45°;

each label the full value in engineering notation ("13.6 MHz", "470 pF").
How many labels an axis may carry is the caller's (``max_labels``): a
horizontal axis holds fewer than a vertical one, as its labels are wider.
The 1-2-5 sequence and the 30°/45° phase steps are common practice, no source.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Iterable, Sequence
from functools import lru_cache
from typing import Any, Final

import numpy as np

from ringwise.units import format_si

#: Mantissa sets of a log axis, densest first; the first that fits is used.
LOG_MANTISSAS: Final = ((1, 2, 3, 4, 5, 6, 7, 8, 9), (1, 2, 3, 5), (1, 2, 5), (1,))
#: On a log axis the labels are unevenly spaced: the closest pair must be at least
#: 1/LOG_GAP_FACTOR of the even spacing the label count would allow (4 and 5 on a
#: one-decade axis are not; 2, 3 and 5 are).
LOG_GAP_FACTOR: Final = 2.0
#: Minor (unlabelled) mantissas of a log axis.
LOG_MINOR: Final = (2, 3, 4, 5, 6, 7, 8, 9)
#: Steps of a linear axis within a decade (a 1-2-5 sequence).
LINEAR_STEPS: Final = (1.0, 2.0, 5.0)
#: Steps of a phase axis, degrees (multiples of 30° or 45°).
PHASE_STEPS_DEG: Final = (30.0, 45.0, 90.0, 180.0, 360.0)
#: Fewest labels a log axis should carry; below that it takes linear 1-2-5 steps.
MIN_LABELS: Final = 3
#: Significant digits a tick label may use at most before it is refused as unreadable.
MAX_LABEL_DIGITS: Final = 6
#: A plain ratio between these is written in plain digits ("0.5", "2000"), else with
#: an SI prefix ("20k").
PLAIN_LOW: Final = 1e-3
PLAIN_HIGH: Final = 1e3
#: Tick labels remembered: ticks sit at round values, so they repeat from answer to
#: answer, and formatting one takes a noticeable fraction of a millisecond.
LABEL_CACHE: Final = 4096
#: The minus sign of a label (typographic, as Plotly writes it).
MINUS: Final = "\u2212"
#: Relative tolerance when deciding whether a tick lies inside the range.
EDGE_RTOL: Final = 1e-9
#: Every axis here is drawn as chosen: labels level and never hidden.  The ticks are
#: spaced so their labels fit level, and the margins are set from the labels
#: (style.fit_margins), so Plotly's own checks, which measure every label in the
#: page on each redraw (whether to tilt them, whether one runs past the plot's
#: edge), are skipped: they took a third of a plot's redraw in Chromium.
DRAWN_AS_CHOSEN: Final = {"tickangle": 0, "ticklabeloverflow": "allow"}


def _finite_positive(values: Iterable[float | None]) -> list[float]:
    return [v for v in values if v is not None and math.isfinite(v) and v > 0]


def _finite(values: Iterable[float | None]) -> list[float]:
    return [v for v in values if v is not None and math.isfinite(v)]


def data_range(*series: Sequence[float | None], log: bool = False) -> tuple[float, float] | None:
    """Smallest and largest finite value of the series (positive ones only for a log axis)."""
    pick = _finite_positive if log else _finite
    values = [v for s in series for v in pick(s)]
    if not values:
        return None
    return min(values), max(values)


@lru_cache(maxsize=LABEL_CACHE)
def label(value: float, unit: str, digits: int = 3) -> str:
    """Tick text: engineering notation with a unit, plain digits for a ratio ("0.5", "20")."""
    if unit:
        return format_si(value, unit, digits=digits)
    if value == 0:
        return "0"
    if PLAIN_LOW <= abs(value) < PLAIN_HIGH:
        return np.format_float_positional(value, precision=digits, fractional=False, trim="-")
    return format_si(value, "", digits=digits)


def _log_ticks(lo: float, hi: float, mantissas: Sequence[int], every: int = 1) -> list[float]:
    out = []
    for d in range(math.floor(math.log10(lo)), math.ceil(math.log10(hi)) + 1):
        if d % every:
            continue
        for m in mantissas:
            v = m * 10.0**d
            if lo * (1 - EDGE_RTOL) <= v <= hi * (1 + EDGE_RTOL):
                out.append(float(f"{v:.12g}"))  # 0.3, not 0.30000000000000004
    return out


def _min_gap(ticks: Sequence[float]) -> float:
    """Smallest distance between neighbouring ticks, decades (inf for fewer than two)."""
    return min((math.log10(b / a) for a, b in itertools.pairwise(ticks)), default=math.inf)


def log_axis(lo: float, hi: float, unit: str = "", max_labels: int = 6) -> dict[str, Any]:
    """A log axis over ``lo`` … ``hi`` (> 0): range, labelled ticks, minor ticks.

    The densest mantissa set that keeps at most ``max_labels`` labels is used;
    a span too long even for one label per decade labels every n-th decade.
    A span too short for two round labels falls back to linear 1-2-5 steps
    placed on the log scale.
    """
    if hi <= lo:
        lo, hi = lo / 2, hi * 2
    ticks: list[float] = []
    decades = math.log10(hi / lo)
    denser: list[float] = []  # the last set that was too many but evenly enough spaced
    for mantissas in LOG_MANTISSAS:
        candidate = _log_ticks(lo, hi, mantissas)
        if _min_gap(candidate) < decades / (LOG_GAP_FACTOR * max_labels):
            continue
        if len(candidate) <= max_labels:
            ticks = candidate
            break
        denser = candidate
    else:
        every = 2
        while len(ticks := _log_ticks(lo, hi, (1,), every)) > max_labels:
            every += 1
    if len(ticks) < MIN_LABELS:
        # under a decade: linear 1-2-5 steps; over one, one label too many beats too few
        if decades < 1:
            ticks = _linear_ticks(lo, hi, max_labels)
        elif denser and len(denser) <= max_labels + 1:
            ticks = denser
    minor = [v for v in _log_ticks(lo, hi, LOG_MINOR) if v not in ticks] if decades < 4 else []
    return {
        "type": "log",
        "range": [math.log10(lo), math.log10(hi)],
        "tickmode": "array",
        "tickvals": ticks,
        "ticktext": _texts(ticks, unit),
        "minor": {"tickmode": "array", "tickvals": minor, "ticklen": 3, "showgrid": False},
        "automargin": True,
        **DRAWN_AS_CHOSEN,
    }


def _linear_ticks(lo: float, hi: float, max_labels: int) -> list[float]:
    """Ticks at the finest 1-2-5 step that gives at most ``max_labels`` of them."""
    span = hi - lo
    decade = 10.0 ** math.floor(math.log10(span / max(max_labels, 1)))
    for scale in (decade, 10 * decade, 100 * decade):
        for m in LINEAR_STEPS:
            step = m * scale
            first = math.ceil(lo / step - EDGE_RTOL)
            last = math.floor(hi / step + EDGE_RTOL)
            if last - first + 1 <= max_labels:
                # round away the float dust of k·step (0.30000000000000004)
                return [float(f"{k * step:.12g}") for k in range(first, last + 1)]
    return [lo, hi]  # pragma: no cover - a step of 100 decades always fits


def linear_axis(
    lo: float, hi: float, unit: str = "", max_labels: int = 6, pad: float = 0.0
) -> dict[str, Any]:
    """A linear axis over ``lo`` … ``hi`` (widened by ``pad`` of the span each side)
    with ticks at a 1-2-5 step."""
    if hi <= lo:
        width = abs(lo) * 0.1 or 1.0
        lo, hi = lo - width, hi + width
    margin = pad * (hi - lo)
    lo, hi = lo - margin, hi + margin
    ticks = _linear_ticks(lo, hi, max_labels)
    return {
        "type": "linear",
        "range": [lo, hi],
        "tickmode": "array",
        "tickvals": ticks,
        "ticktext": _texts(ticks, unit),
        "automargin": True,
        **DRAWN_AS_CHOSEN,
    }


def phase_axis(lo: float, hi: float, max_labels: int = 7) -> dict[str, Any]:
    """A phase axis in degrees, ticks at the smallest multiple of 30° or 45° that fits."""
    if hi <= lo:
        lo, hi = lo - 45.0, hi + 45.0
    for step in PHASE_STEPS_DEG:
        first = math.floor(lo / step)
        last = math.ceil(hi / step)
        if last - first + 1 <= max_labels:
            break
    ticks = [k * step for k in range(first, last + 1)]
    return {
        "type": "linear",
        "range": [ticks[0], ticks[-1]],
        "tickmode": "array",
        "tickvals": ticks,
        "ticktext": [f"{t:.0f}°".replace("-", MINUS) for t in ticks],
        "automargin": True,
        **DRAWN_AS_CHOSEN,
    }


def _texts(ticks: Sequence[float], unit: str) -> list[str]:
    """Labels with the fewest digits (3 at least) that tell every tick from its neighbours."""
    for digits in range(3, MAX_LABEL_DIGITS + 1):
        texts = [label(t, unit, digits).replace("-", MINUS) for t in ticks]
        if len(set(texts)) == len(texts):
            return texts
    return texts
