"""The design's figures: loop gain, what-if sweep, reactances, loop-gain budget,
phase noise.  Each takes the plot data of :mod:`ringwise.figures.curves` and
returns a Plotly figure as a dict (``{"data": [...], "layout": {...}}``), the
form the sheet hands to ``Plotly.react``; :func:`ringwise.figures.to_figure`
wraps it as a :class:`plotly.graph_objects.Figure` for a notebook.
"""

from __future__ import annotations

from typing import Any, Final

from ringwise.figures import axes
from ringwise.figures.style import (
    ACCENT,
    BLUE,
    CHAR_PX,
    GREEN,
    INK,
    MUTED,
    NARROW_X_LABELS,
    RED,
    VIOLET,
    X_LABELS,
    Y_LABELS,
    fit_margins,
    layout,
    marker_line,
    titled,
    wrap,
)
from ringwise.units import format_si

#: Line colours of the tank parts in the reactance chart.
REACTANCE_COLOURS: Final = {"L": ACCENT, "C1": GREEN, "C2": BLUE, "C3": VIOLET, "C_series": INK}
#: Fill of the phase-noise slope regions (by kind).
REGION_FILL: Final = {
    "cube": "rgba(162, 82, 31, 0.08)",
    "square": "rgba(29, 107, 87, 0.07)",
    "flicker": "rgba(154, 106, 0, 0.08)",
    "floor": "rgba(59, 110, 165, 0.07)",
}
#: The phase-noise plot's offset span, Hz (10 Hz … 10 MHz, the report offsets' decades).
NOISE_OFFSETS_HZ: Final = (10.0, 1e7)
#: Headroom above and below a log curve, as a factor of its extremes.
LOG_PAD: Final = 1.25
#: Headroom of a linear curve, as a fraction of its span.
LINEAR_PAD: Final = 0.05
#: The narrowest the budget chart's plotting area gets, px (a 1920 px screen puts it
#: in a pair of plots, about 340 px beside its labels; the printed summary's is wider):
#: every bar's value text must fit beside its bar in it.
BUDGET_MIN_AREA_PX: Final = 300
#: Room between a bar's end and its text, and inside a bar round its text, px (the
#: text's own width is estimated as for tick labels, style.CHAR_PX a character).
BAR_TEXT_PAD_PX: Final = 10


def _log_range(*series: Any, include: tuple[float, ...] = ()) -> tuple[float, float]:
    r = axes.data_range(*series, include, log=True) or (0.1, 10.0)
    return r[0] / LOG_PAD, r[1] * LOG_PAD


def loop_spec(c: dict[str, Any]) -> dict[str, Any]:
    """|T(j2πf)| (log, left) and its phase (right) against frequency; the unity line
    and f_osc marked."""
    f_lo, f_hi = c["f"][0], c["f"][-1]
    ph = axes.data_range(c["phase_deg"]) or (-90.0, 90.0)
    shapes = [marker_line("|T| = 1", y=1.0, dash="dot")]
    if c["f_osc"]:
        name = f"f_osc {format_si(c['f_osc'], 'Hz')}"
        shapes.append(marker_line(name, x=c["f_osc"], color=ACCENT))
    return fit_margins(
        {
            "data": [
                {
                    "type": "scatter",
                    "x": c["f"],
                    "y": c["magnitude"],
                    "name": "|T|",
                    "line": {"color": INK, "width": 2},
                    "hovertemplate": "%{x:.4s}Hz  |T| %{y:.3f}<extra></extra>",
                },
                {
                    "type": "scatter",
                    "x": c["f"],
                    "y": c["phase_deg"],
                    "name": "phase",
                    "yaxis": "y2",
                    "line": {"color": ACCENT, "width": 1.5, "dash": "dot"},
                    "hovertemplate": "%{x:.4s}Hz  %{y:.1f}°<extra></extra>",
                },
            ],
            "layout": layout(
                xaxis=titled(axes.log_axis(f_lo, f_hi, "Hz", X_LABELS), "frequency"),
                yaxis=titled(
                    axes.log_axis(*_log_range(c["magnitude"], include=(1.0,)), "", Y_LABELS), "|T|"
                ),
                yaxis2=titled(
                    axes.phase_axis(*ph, Y_LABELS + 1),
                    "phase of T",
                    overlaying="y",
                    side="right",
                    showgrid=False,
                ),
                shapes=shapes,
            ),
        }
    )


def sweep_spec(s: dict[str, Any]) -> dict[str, Any]:
    """Loop gain (log, left) and f_osc (right) along the what-if parameter; the
    current value, the threshold and loop gain 1 marked."""
    unit = s["unit"]
    values = s["values"]
    shapes = [
        marker_line("loop gain 1", y=1.0, dash="dot"),
        marker_line(f"now {format_si(s['current'], unit)}", x=s["current"], dash="dot", color=INK),
    ]
    if s["threshold"]:
        name = f"threshold {format_si(s['threshold'], unit)}"
        shapes.append(marker_line(name, x=s["threshold"], color=RED))
    f_range = axes.data_range(s["f_osc"])
    f_axis = (
        axes.linear_axis(*f_range, "Hz", Y_LABELS, pad=LINEAR_PAD)
        if f_range
        else axes.linear_axis(0.0, 1.0, "Hz", Y_LABELS)
    )
    unit_text = unit or "ratio"
    gain_hover = f"{s['param']} %{{x:.3s}}{unit}  gain %{{y:.3f}}<extra></extra>"
    return fit_margins(
        {
            "data": [
                {
                    "type": "scatter",
                    "x": values,
                    "y": s["gain"],
                    "name": "loop gain",
                    "line": {"color": INK, "width": 2},
                    "hovertemplate": gain_hover,
                },
                {
                    "type": "scatter",
                    "x": values,
                    "y": s["f_osc"],
                    "name": "f_osc",
                    "yaxis": "y2",
                    "line": {"color": ACCENT, "width": 1.5, "dash": "dot"},
                    "hovertemplate": f"{s['param']} %{{x:.3s}}{unit}  %{{y:.4s}}Hz<extra></extra>",
                },
            ],
            "layout": layout(
                xaxis=titled(
                    axes.log_axis(values[0], values[-1], unit, X_LABELS),
                    f"{s['param']} ({unit_text})",
                ),
                yaxis=titled(
                    axes.log_axis(*_log_range(s["gain"], include=(1.0,)), "", Y_LABELS), "loop gain"
                ),
                yaxis2=titled(f_axis, "f_osc", overlaying="y", side="right", showgrid=False),
                shapes=shapes,
            ),
        }
    )


def tuning_spec(t: dict[str, Any]) -> dict[str, Any]:
    """f_osc (left) and the tuning gain K (log, right) against the tuning voltage;
    the design's own tuning voltage marked."""
    V = t["V"]
    f_range = axes.data_range(t["f_osc"])
    f_axis = (
        axes.linear_axis(*f_range, "Hz", Y_LABELS, pad=LINEAR_PAD)
        if f_range
        else axes.linear_axis(0.0, 1.0, "Hz", Y_LABELS)
    )
    K_pos = [abs(k) if k is not None else None for k in t["K"]]
    K_axis = axes.log_axis(*_log_range(K_pos), "Hz/V", Y_LABELS)
    now = marker_line(f"now {format_si(t['V_tune'], 'V')}", x=t["V_tune"], dash="dot", color=INK)
    return fit_margins(
        {
            "data": [
                {
                    "type": "scatter",
                    "x": V,
                    "y": t["f_osc"],
                    "name": "f_osc",
                    "line": {"color": ACCENT, "width": 2},
                    "hovertemplate": "V_tune %{x:.3s}V  f_osc %{y:.5s}Hz<extra></extra>",
                },
                {
                    "type": "scatter",
                    "x": V,
                    "y": K_pos,
                    "name": "tuning gain |K|",
                    "yaxis": "y2",
                    "line": {"color": BLUE, "width": 1.5, "dash": "dot"},
                    "hovertemplate": "V_tune %{x:.3s}V  K %{y:.3s}Hz/V<extra></extra>",
                },
            ],
            "layout": layout(
                xaxis=titled(axes.linear_axis(V[0], V[-1], "V", X_LABELS), "tuning voltage"),
                yaxis=titled(f_axis, "f_osc"),
                yaxis2=titled(K_axis, "K = df/dV", overlaying="y", side="right", showgrid=False),
                shapes=[now],
            ),
        }
    )


def reactance_spec(r: dict[str, Any]) -> dict[str, Any]:
    """X_L and X_C of the tank parts against frequency (log-log); the ideal resonance marked."""
    data = []
    for line in r["lines"]:
        series = line["part"] == "C_series"
        data.append(
            {
                "type": "scatter",
                "x": r["f"],
                "y": line["X"],
                "name": line["label"],
                "line": {
                    "color": REACTANCE_COLOURS[line["part"]],
                    "width": 2 if series else 1.5,
                    "dash": "dash" if series else "solid",
                },
                "hovertemplate": f"{line['label']} %{{x:.4s}}Hz  %{{y:.3s}}Ω<extra></extra>",
            }
        )
    y_lo, y_hi = _log_range(*(line["X"] for line in r["lines"]))
    name = f"f0 {format_si(r['f_ideal'], 'Hz')}"
    return fit_margins(
        {
            "data": data,
            "layout": layout(
                xaxis=titled(
                    axes.log_axis(r["f"][0], r["f"][-1], "Hz", NARROW_X_LABELS), "frequency"
                ),
                yaxis=titled(axes.log_axis(y_lo, y_hi, "Ω", Y_LABELS), "reactance"),
                shapes=[marker_line(name, x=r["f_ideal"], dash="dot")],
            ),
        }
    )


def bar_text_places(costs: list[float], texts: list[str]) -> tuple[float, float, list[bool]]:
    """The cost axis's range that leaves room for each bar's value text, and which texts
    are written beside zero rather than by Plotly on their bar.

    A text goes inside its bar when it fits there even in the narrowest plotting area
    (:data:`BUDGET_MIN_AREA_PX`); otherwise beside the bar: right of a positive bar's
    end, and for a negative bar right of zero (left of it are the labels), and the
    range reaches far enough for it.  With ``S`` the range's span and ``a`` a text's
    width as a fraction of the area, the span solves ``S = max(end + a·S) − min(c)``
    over the texts outside; fixed-point iteration finds it (it converges, each width
    being well under the area).  Returns ``(lo, hi, beside_zero)``.
    """
    widths = [(len(t) * CHAR_PX + BAR_TEXT_PAD_PX) / BUDGET_MIN_AREA_PX for t in texts]
    lo, hi = min([0.0, *costs]), max([0.0, *costs])
    span = (hi - lo) or 1.0
    for _ in range(50):
        outside = [abs(c) < a * span for c, a in zip(costs, widths, strict=True)]
        ends = [max(c, 0.0) + a * span for c, a, o in zip(costs, widths, outside, strict=True) if o]
        hi = max([0.0, *costs, *ends])
        if abs((hi - lo) - span) <= 1e-9 * span:
            break
        span = hi - lo
    beside_zero = [o and c < 0 for c, o in zip(costs, outside, strict=True)]
    return lo, hi, beside_zero


def budget_spec(b: dict[str, Any]) -> dict[str, Any]:
    """What each loss the hand formula ignores costs, dB, as horizontal bars (the core's
    order: largest first, "the rest" last), each bar printing its value inside the bar
    or beside it, never over the labels or past the plot's edge (:func:`bar_text_places`)."""
    costs = b["cost_dB"]
    labels = [wrap(label) for label in b["labels"]]
    lo, hi, beside_zero = bar_text_places(costs, b["text"])
    # a negative bar's text too long for it is written right of zero, as an annotation
    notes = [
        {
            "x": 0.0,
            "y": label,
            "xref": "x",
            "yref": "y",
            "text": text,
            "showarrow": False,
            "xanchor": "left",
            "xshift": BAR_TEXT_PAD_PX / 2,
        }
        for label, text, zero in zip(labels, b["text"], beside_zero, strict=True)
        if zero
    ]
    return fit_margins(
        {
            "data": [
                {
                    "type": "bar",
                    "orientation": "h",
                    "x": costs,
                    "y": labels,
                    "marker": {"color": [ACCENT if v >= 0 else GREEN for v in costs]},
                    "customdata": b["share"],
                    "text": b["text"],
                    "textposition": ["none" if zero else "auto" for zero in beside_zero],
                    "cliponaxis": False,
                    "hovertemplate": "%{y}: %{text} (%{customdata:.0%} of the gap)<extra></extra>",
                }
            ],
            "layout": layout(
                showlegend=False,
                xaxis=titled(
                    axes.linear_axis(lo, hi, "", NARROW_X_LABELS, pad=LINEAR_PAD),
                    "loop gain it costs (dB)",
                ),
                yaxis={"autorange": "reversed", "automargin": True, "type": "category"},
                annotations=notes,
            ),
        }
    )


def noise_spec(n: dict[str, Any]) -> dict[str, Any]:
    """The phase noise from the circuit's noise sources against offset (log), Leeson's curve
    dashed beside it for comparison, its slope regions shaded, the corners and the report
    points marked (Leeson's curve alone when there is no steady state)."""
    shapes: list[dict[str, Any]] = [
        {
            "type": "rect",
            "layer": "below",
            "xref": "x",
            "yref": "paper",
            "x0": r["x0"],
            "x1": r["x1"],
            "y0": 0,
            "y1": 1,
            "fillcolor": REGION_FILL[r["kind"]],
            "line": {"width": 0},
            "label": {
                "text": r["label"],
                "textposition": "top center",
                "font": {"size": 10, "color": MUTED},
            },
        }
        for r in n["regions"]
    ]
    if n["f_corner"]:
        name = f"flicker corner {format_si(n['f_corner'], 'Hz')}"
        shapes.append(marker_line(name, x=n["f_corner"], dash="dot"))
    if n["leeson_corner"]:
        name = f"Leeson corner {format_si(n['leeson_corner'], 'Hz')}"
        shapes.append(marker_line(name, x=n["leeson_corner"], dash="dash"))
    computed = n.get("computed")
    hover = "%{x:.3s}Hz  %{y:.1f} dBc/Hz<extra></extra>"
    leeson = {
        "type": "scatter",
        "x": n["offset"],
        "y": n["dBc_Hz"],
        "name": "L(Δf), Leeson",
        "line": {"color": INK, "width": 2},
        "hovertemplate": hover,
    }
    points = {
        "type": "scatter",
        "x": n["points"]["offset"],
        "y": n["points"]["dBc_Hz"],
        "name": "reported offsets",
        "mode": "markers",
        "marker": {"color": ACCENT, "size": 7, "symbol": "diamond"},
        "hovertemplate": hover,
    }
    data: list[dict[str, Any]] = [leeson, points]
    every_level = list(n["dBc_Hz"])
    if computed:
        # the circuit's own figure is the curve; Leeson's formula stays beside it, dashed
        leeson["name"] = f"Leeson's formula, F = {n['F_dB']:.3g} dB (comparison)"
        leeson["line"] = {"color": MUTED, "width": 1.5, "dash": "dash"}
        points["x"] = computed["points"]["offset"]
        points["y"] = computed["points"]["dBc_Hz"]
        data = [
            {
                "type": "scatter",
                "x": computed["offset"],
                "y": computed["dBc_Hz"],
                "name": "L(Δf) from the circuit's noise sources",
                "line": {"color": INK, "width": 2},
                "hovertemplate": hover,
            },
            leeson,
            points,
        ]
        every_level += list(computed["dBc_Hz"])
    levels = axes.data_range(every_level) or (-180.0, -60.0)
    xaxis = axes.log_axis(*NOISE_OFFSETS_HZ, "Hz", X_LABELS)
    # the first offset label sits under the lowest level label: keep them apart
    xaxis.update(ticks="outside", ticklen=6, tickcolor="rgba(0,0,0,0)")
    return fit_margins(
        {
            "data": data,
            "layout": layout(
                xaxis=titled(xaxis, "offset from the carrier"),
                yaxis=titled(axes.linear_axis(*levels, "", Y_LABELS, pad=LINEAR_PAD), "L (dBc/Hz)"),
                shapes=shapes,
            ),
        }
    )
