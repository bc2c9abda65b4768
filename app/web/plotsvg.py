"""The loop-gain plot of the printed summary, drawn as SVG on the server.

Only geometry happens here: the curve is the one :mod:`ringwise.web.curves`
computes for the sheet; this maps it to a box (log frequency across, log
magnitude and linear phase up) and chooses tick marks.  The template draws it.
"""

from __future__ import annotations

import math
from typing import Any, Final

from ringwise.units import format_si

WIDTH: Final = 330.0
HEIGHT: Final = 170.0
#: Plot margins inside the SVG: left, right, top, bottom (px).
PAD: Final = (40.0, 38.0, 10.0, 24.0)
#: Mantissas of the frequency ticks (a 1-2-5 sequence, common practice, no source).
TICK_MANTISSAS: Final = (1.0, 2.0, 5.0)
PHASE_TICK_DEG: Final = 90.0


def _ticks(lo: float, hi: float) -> list[float]:
    out = []
    for d in range(math.floor(math.log10(lo)), math.ceil(math.log10(hi)) + 1):
        for m in TICK_MANTISSAS:
            v = m * 10.0**d
            if lo <= v <= hi:
                out.append(v)
    return out


def loop_plot(curve: dict[str, Any]) -> dict[str, Any]:
    """Polylines and ticks (px in a WIDTH × HEIGHT box) for |T| and phase against f."""
    points = [
        (f, m, p)
        for f, m, p in zip(curve["f"], curve["magnitude"], curve["phase_deg"], strict=True)
        if f and m and m > 0 and p is not None
    ]
    left, right, top, bottom = PAD
    x0, x1 = left, WIDTH - right
    y0, y1 = top, HEIGHT - bottom
    f_lo, f_hi = points[0][0], points[-1][0]
    m_lo = math.floor(math.log10(min(min(p[1] for p in points), 1.0)))
    m_hi = math.ceil(math.log10(max(max(p[1] for p in points), 1.0)))
    m_hi = m_hi if m_hi > m_lo else m_lo + 1
    ph = [p[2] for p in points]
    p_lo = PHASE_TICK_DEG * math.floor(min(ph) / PHASE_TICK_DEG)
    p_hi = PHASE_TICK_DEG * math.ceil(max(ph) / PHASE_TICK_DEG)
    p_hi = p_hi if p_hi > p_lo else p_lo + PHASE_TICK_DEG

    def x(f: float) -> float:
        return x0 + (x1 - x0) * math.log(f / f_lo) / math.log(f_hi / f_lo)

    def y_mag(m: float) -> float:
        return y1 - (y1 - y0) * (math.log10(m) - m_lo) / (m_hi - m_lo)

    def y_ph(p: float) -> float:
        return y1 - (y1 - y0) * (p - p_lo) / (p_hi - p_lo)

    def line(pairs: list[tuple[float, float]]) -> str:
        return " ".join(f"{a:.1f},{b:.1f}" for a, b in pairs)

    f_osc = curve.get("f_osc")
    return {
        "width": WIDTH,
        "height": HEIGHT,
        "box": {"x0": x0, "x1": x1, "y0": y0, "y1": y1},
        "magnitude": line([(x(f), y_mag(m)) for f, m, _ in points]),
        "phase": line([(x(f), y_ph(p)) for f, _, p in points]),
        "unity_y": y_mag(1.0),
        "zero_y": y_ph(0.0) if p_lo <= 0 <= p_hi else None,
        "f_osc_x": x(f_osc) if f_osc and f_lo <= f_osc <= f_hi else None,
        "f_osc_text": format_si(f_osc, "Hz") if f_osc else None,
        "x_ticks": [{"x": x(f), "text": format_si(f, "Hz", digits=2)} for f in _ticks(f_lo, f_hi)],
        "mag_ticks": [
            {"y": y_mag(10.0**d), "text": format_si(10.0**d, "", digits=2)}
            for d in range(m_lo, m_hi + 1)
        ],
        "phase_ticks": [
            {"y": y_ph(p), "text": f"{p:+.0f}°" if p else "0°"}
            for p in _frange(p_lo, p_hi + 0.5 * PHASE_TICK_DEG, PHASE_TICK_DEG)
        ],
    }


def _frange(start: float, stop: float, step: float) -> list[float]:
    n = math.floor((stop - start) / step) + 1
    return [start + k * step for k in range(max(n, 0)) if start + k * step <= stop]
