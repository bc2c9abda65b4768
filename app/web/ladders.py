"""Value ladders for the sheet's log-scale sliders.

A slider beside a field steps through the E24 preferred values (IEC 60063)
over a span of decades suited to the part; moving it writes the value's
short text into the field.  The server gives each field the step nearest its
value, so the browser only moves the knob.
"""

from __future__ import annotations

import math
from functools import cache
from typing import Final

from ringwise.units import format_si

#: The E24 series, IEC 60063.
E24: Final = (
    1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
    3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1,
)  # fmt: skip

#: Slider span per field: (lowest decade, highest decade), values 10**lo ... 10**hi.
SPANS: Final = {
    "L": (-8, -1),
    "C1": (-12, -5),
    "C2": (-12, -5),
    "RB1": (1, 7),
    "RB2": (1, 7),
    "RC": (0, 6),
    "RE": (0, 6),
    "Q_L": (0, 3),
}


@cache
def ladder(name: str) -> tuple[tuple[float, ...], tuple[str, ...]]:
    """The values (SI) and their texts for one slider field."""
    lo, hi = SPANS[name]
    values = [m * 10.0**d for d in range(lo, hi) for m in E24] + [10.0**hi]
    texts = [format_si(v, "", digits=3).replace(" ", "") for v in values]
    return tuple(values), tuple(texts)


def nearest_step(name: str, value: float | None) -> int | None:
    """Index of the ladder value nearest ``value`` on a log scale (``None`` when there is none)."""
    if name not in SPANS or value is None or not value > 0:
        return None
    values, _ = ladder(name)
    target = math.log(value)
    return min(range(len(values)), key=lambda i: abs(math.log(values[i]) - target))
