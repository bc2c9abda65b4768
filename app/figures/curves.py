"""Plot data: the curves the figures draw, computed from the core's results.

Nothing here writes a circuit equation: the loop curve evaluates the core's
return ratio :func:`ringwise.analysis.loop.return_ratio` over the core's solved
small-signal circuit, the what-if curve is the core's sweep, and the
reactance chart is the defining relation of an ideal part,
:math:`X_L = \\omega L` and :math:`X_C = 1/(\\omega C)`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any, Final

import numpy as np

from ringwise.analysis.loop import return_ratio
from ringwise.analysis.operating import Solved
from ringwise.analysis.threshold import LINEAR_PARAMS, Threshold, sweep
from ringwise.design import PART_PARAMETERS, Design, get_param

TWO_PI: Final = 2.0 * math.pi
#: The loop curve spans f_ideal / LOOP_SPAN ... f_ideal · LOOP_SPAN.
LOOP_SPAN: Final = 4.0
LOOP_POINTS: Final = 101
#: Extra points packed around f_osc, over ± LOOP_DENSE_WIDTHS resonance widths f/Q.
LOOP_DENSE_POINTS: Final = 60
LOOP_DENSE_WIDTHS: Final = 4.0
#: The reactance chart spans f_ideal / REACTANCE_SPAN ... f_ideal · REACTANCE_SPAN.
REACTANCE_SPAN: Final = 10.0
REACTANCE_POINTS: Final = 61
#: What-if sweep: points, and the span around the current value and the threshold.
SWEEP_POINTS: Final = 25
SWEEP_MARGIN: Final = 3.0
SWEEP_DEFAULT_SPAN: Final = 10.0
#: Widest what-if sweep, as a ratio stop/start (the threshold search's own range).
SWEEP_MAX_RATIO: Final = 1e4


def _finite(values: np.ndarray) -> list[float | None]:
    return [float(v) if math.isfinite(v) else None for v in values]


def loop_curve(solved: Solved) -> dict[str, Any]:
    """|T(j2πf)| and its phase (degrees, unwrapped) around the tank's resonance."""
    f0 = solved.tank.f_ideal
    f = np.geomspace(f0 / LOOP_SPAN, f0 * LOOP_SPAN, LOOP_POINTS)
    f_osc = solved.f_osc
    q = float(solved.loop.Q_loaded)
    if f_osc is not None and math.isfinite(q) and q > 0:
        width = min(LOOP_DENSE_WIDTHS / q, 0.5)
        dense = np.linspace(f_osc * (1 - width), f_osc * (1 + width), LOOP_DENSE_POINTS)
        f = np.unique(np.concatenate([f, dense[dense > 0], [f_osc]]))
    T = return_ratio(solved.ss, TWO_PI * 1j * f)
    phase = np.degrees(np.unwrap(np.angle(T)))
    # keep 0° at the oscillation frequency (unwrapping may shift by whole turns)
    if f_osc is not None:
        k = int(np.argmin(np.abs(f - f_osc)))
        phase -= 360.0 * round(phase[k] / 360.0)
    return {
        "f": _finite(f),
        "magnitude": _finite(np.abs(T)),
        "phase_deg": _finite(phase),
        "f_osc": f_osc,
        "f_ideal": f0,
        "gain": solved.gain if f_osc is not None else None,
    }


def tuning_curve(tuning: dict[str, Any]) -> dict[str, Any]:
    """f_osc and the tuning gain K across the varactor's tuning range, and the design's
    own tuning voltage (from the result's ``tuning`` section, JSON form)."""
    return {
        "V": tuning["V"],
        "f_osc": tuning["f_osc"],
        "K": tuning["K"],
        "gain": tuning["gain"],
        "V_tune": tuning["V_tune"],
    }


def reactance_curves(design: Design, C_series: float, f_ideal: float) -> dict[str, Any]:
    """X_L = ωL and X_C = 1/(ωC) of the tank's parts, Ω, against frequency."""
    f = np.geomspace(f_ideal / REACTANCE_SPAN, f_ideal * REACTANCE_SPAN, REACTANCE_POINTS)
    w = TWO_PI * f
    t = design.tank
    lines = [] if t.L is None else [{"part": "L", "label": "L", "X": _finite(w * t.L)}]
    for part in ("C1", "C2", "C3"):
        C = getattr(t, part)
        if C is not None:
            lines.append({"part": part, "label": part, "X": _finite(1.0 / (w * C))})
    series = "Cs (C1, C2" + (", C3" if t.C3 is not None else "") + " in series)"
    lines.append({"part": "C_series", "label": series, "X": _finite(1.0 / (w * C_series))})
    return {"f": _finite(f), "lines": lines, "f_ideal": f_ideal}


def sweepable(design: Design) -> list[str]:
    """Parts of this design a what-if sweep can run over (present, used by the form,
    log-scaled); the noise model's figures and the capacitors' rating are not parts."""
    unused = design.unused_parts()
    return [
        p
        for p in PART_PARAMETERS
        if p not in LINEAR_PARAMS and p not in unused and (get_param(design, p) or 0) > 0
    ]


def sweep_range(current: float, threshold: float | None) -> tuple[float, float]:
    """A span showing the current value and, when known, the threshold, with room either side."""
    if threshold is None or not math.isfinite(threshold) or threshold <= 0:
        return current / SWEEP_DEFAULT_SPAN, current * SWEEP_DEFAULT_SPAN
    lo = min(current, threshold) / SWEEP_MARGIN
    hi = max(current, threshold) * SWEEP_MARGIN
    if hi / lo > SWEEP_MAX_RATIO:
        # keep the current value in view; the threshold may fall outside
        lo = max(lo, current / math.sqrt(SWEEP_MAX_RATIO))
        hi = min(hi, current * math.sqrt(SWEEP_MAX_RATIO))
    return lo, hi


def analysed_threshold(design: Design, param: str, result: Mapping[str, Any]) -> Threshold | None:
    """The threshold the design's analysis (``result``, JSON form) found, when it was
    searched on ``param`` (the gain setter) and found: the what-if sweep then marks the
    very value the sheet shows, without searching for it again."""
    startup = result["startup"]
    value = startup["threshold_value"]
    if startup["threshold_param"] != param or value is None:
        return None
    current = get_param(design, param)
    assert current is not None  # the analysis searched on a part of this design
    return Threshold(param, value, current)


def what_if(
    design: Design,
    param: str,
    threshold_hint: float | None,
    unit: str = "",
    threshold: Threshold | None = None,
) -> dict[str, Any]:
    """Loop gain and f_osc along ``param`` (the core's sweep), with its threshold.

    ``unit`` is the parameter's display unit ("F", "Ω"; blank for a ratio);
    ``threshold_hint`` a threshold already known, used to choose the span, and
    ``threshold`` one already found for ``param`` (:func:`analysed_threshold`),
    used as it is.
    """
    current = get_param(design, param)
    assert current is not None  # callers pass a sweepable parameter
    if threshold is not None:
        threshold_hint = threshold.value
    lo, hi = sweep_range(current, threshold_hint)
    s = sweep(design, param, lo, hi, SWEEP_POINTS, "log", threshold=threshold)
    return {
        "param": param,
        "unit": unit,
        "values": s.values,
        "gain": s.gain,
        "f_osc": s.f_osc,
        "current": current,
        "threshold": s.threshold.value,
        "threshold_reason": s.threshold.reason,
    }


def budget_bars(loop: dict[str, Any]) -> dict[str, Any]:
    """The loop-gain story as a horizontal bar chart: the hand formula with its
    numbers, then each loss the hand method ignores (the core's order, largest
    first, "the rest" last) with the text its bar prints."""
    story = loop.get("story")
    losses = story["losses"] if story else []
    caption = (
        f"Hand formula {story['formula']} = {story['numbers']}; full circuit "
        f"{story['full']:.4g}, {story['gap_dB']:.2f} dB below"
        if story
        else ""
    )
    return {
        "caption": caption,
        "formula": story["formula"] if story else None,
        "numbers": story["numbers"] if story else None,
        "hand": story["hand"] if story else None,
        "full": story["full"] if story else None,
        "gap_dB": story["gap_dB"] if story else None,
        "labels": [x["label"] for x in losses],
        "elements": [x["element"] for x in losses],
        "cost_dB": [x["cost_dB"] for x in losses],
        "fraction": [x["fraction"] for x in losses],
        "share": [x["share"] for x in losses],
        "text": [x["text"] for x in losses],
    }


def noise_regions(
    lo: float, hi: float, f_corner: float | None, leeson_corner: float | None
) -> list[dict[str, Any]]:
    """The slope regions of Leeson's L(Δf) over ``lo`` … ``hi``.

    L = (F·k·T/2Ps)·(1 + (f0/(2·Q·Δf))²)·(1 + fc/Δf): below both corners it
    falls as 1/f³; between them as 1/f² (fc below the Leeson corner) or as 1/f
    (fc above it); above both it is flat (the floor).
    """
    if not (f_corner and leeson_corner and f_corner > 0 and leeson_corner > 0):
        return []
    a, b = sorted((f_corner, leeson_corner))
    middle = ("1/f²", "square") if f_corner <= leeson_corner else ("1/f", "flicker")
    spans = [(lo, a, "1/f³", "cube"), (a, b, *middle)]
    spans.append((b, hi, "floor", "floor"))
    out = []
    for x0, x1, label, kind in spans:
        x0, x1 = max(x0, lo), min(x1, hi)
        if x1 > x0:
            out.append({"x0": x0, "x1": x1, "label": label, "kind": kind})
    return out


def noise_curve(stability: dict[str, Any]) -> dict[str, Any]:
    """The core's Leeson curve with its regions and report points, and the phase noise
    computed from the noise sources beside it, for a log-log plot."""
    curve = stability["curve"]
    offsets = curve["offset"]
    regions = (
        noise_regions(offsets[0], offsets[-1], stability["f_corner"], stability["leeson_corner"])
        if offsets
        else []
    )
    return {
        "offset": offsets,
        "dBc_Hz": curve["dBc_Hz"],
        "regions": regions,
        "points": {
            "offset": [p["offset"] for p in stability["phase_noise"]],
            "dBc_Hz": [p["dBc_Hz"] for p in stability["phase_noise"]],
        },
        "f_corner": stability["f_corner"],
        "leeson_corner": stability["leeson_corner"],
        "F_dB": stability["F_dB"],
        "computed": _computed_noise(stability),
    }


def _computed_noise(stability: dict[str, Any]) -> dict[str, Any] | None:
    """The phase noise from the circuit's noise sources, with its report points and the
    1/f³ corner (``None`` without a steady state)."""
    curve = stability.get("spectrum_curve")
    if not curve:
        return None
    points = stability.get("spectrum") or []
    return {
        "offset": curve["offset"],
        "dBc_Hz": curve["dBc_Hz"],
        "points": {
            "offset": [p["offset"] for p in points],
            "dBc_Hz": [p["dBc_Hz"] for p in points],
        },
        "flicker_corner": stability.get("flicker_corner"),
        "F_effective_dB": stability.get("F_effective_dB"),
    }


#: The harmonic bars stand on a floor this far below the lowest harmonic shown, dB,
#: rounded down to a multiple of HARMONIC_FLOOR_STEP (and never above −20 dBc).
HARMONIC_FLOOR_MARGIN: Final = 10.0
HARMONIC_FLOOR_STEP: Final = 10.0
HARMONIC_FLOOR_TOP: Final = -20.0
#: Width of a harmonic bar, as a fraction of the spacing of the harmonics.
HARMONIC_BAR_WIDTH: Final = 0.25


def run_curves(sim: dict[str, Any]) -> dict[str, Any]:
    """A time-domain run's plot data: waveform, envelope, spectrum with harmonic bars.

    The bars are the fundamental (0 dBc) and the run's harmonics at whole
    multiples of the measured frequency, each drawn from a common floor.
    """
    tr = sim["transient"]
    levels: list[float | None] = [0.0, *tr["harmonics_dBc"]] if tr["f_meas"] else []
    known = [v for v in levels if v is not None]
    floor = min([HARMONIC_FLOOR_TOP, *(v - HARMONIC_FLOOR_MARGIN for v in known)])
    floor = HARMONIC_FLOOR_STEP * math.floor(floor / HARMONIC_FLOOR_STEP)
    bars = [(k + 1, v) for k, v in enumerate(levels) if v is not None]
    return {
        "waveform": tr["waveform"],
        "envelope": tr["envelope"],
        "spectrum": tr["spectrum"],
        "bars": {
            "f": [k * tr["f_meas"] for k, _ in bars],
            "order": [k for k, _ in bars],
            "dBc": [v for _, v in bars],
            "base": floor,
            "height": [v - floor for _, v in bars],
            "width": HARMONIC_BAR_WIDTH * tr["f_meas"] if tr["f_meas"] else None,
        },
        "output_node": sim["output_node"],
    }
