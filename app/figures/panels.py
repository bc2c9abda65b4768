"""The on-demand panels' figures: a time-domain run (waveform, envelope,
spectrum) and a spread (histograms, sensitivity bars, f_osc against
temperature).  Same form as :mod:`ringwise.figures.sheet`: plot data in,
a Plotly figure dict out.
"""

from __future__ import annotations

from typing import Any, Final

from ringwise.figures import axes
from ringwise.figures.style import (
    ACCENT,
    INK,
    MUTED,
    X_LABELS,
    Y_LABELS,
    fit_margins,
    layout,
    marker_line,
    titled,
)
from ringwise.units import format_si

#: Headroom of a linear curve, as a fraction of its span.
PAD: Final = 0.05
#: Top of the spectrum's level axis, dBc (a little above the carrier's 0 dBc).
SPECTRUM_TOP_DBC: Final = 5.0


def _linear(values: list[Any], unit: str, n: int, *, zero: bool = False) -> dict[str, Any]:
    r = axes.data_range(values, [0.0] if zero else []) or (0.0, 1.0)
    return axes.linear_axis(*r, unit, n, pad=PAD)


def waveform_spec(w: dict[str, Any], node: str) -> dict[str, Any]:
    """The last cycles of the run: the output node (left) and v_be (right) against time."""
    return fit_margins(
        {
            "data": [
                {
                    "type": "scatter",
                    "x": w["t"],
                    "y": w["v_out"],
                    "name": f"output ({node})",
                    "line": {"color": INK, "width": 1.6},
                    "hovertemplate": "%{x:.4s}s  %{y:.3s}V<extra></extra>",
                },
                {
                    "type": "scatter",
                    "x": w["t"],
                    "y": w["v_be"],
                    "name": "v_be",
                    "yaxis": "y2",
                    "line": {"color": ACCENT, "width": 1.3, "dash": "dot"},
                    "hovertemplate": "%{x:.4s}s  v_be %{y:.3s}V<extra></extra>",
                },
            ],
            "layout": layout(
                xaxis=titled(_linear(w["t"], "s", X_LABELS), "time"),
                yaxis=titled(_linear(w["v_out"], "V", Y_LABELS), "output node"),
                yaxis2=titled(
                    _linear(w["v_be"], "V", Y_LABELS),
                    "v_be",
                    overlaying="y",
                    side="right",
                    showgrid=False,
                ),
            ),
        }
    )


def envelope_spec(e: dict[str, Any]) -> dict[str, Any]:
    """The startup envelope (half peak-to-peak per period) against time from the kick."""
    return fit_margins(
        {
            "data": [
                {
                    "type": "scatter",
                    "x": e["t"],
                    "y": e["v"],
                    "name": "half peak-to-peak per period",
                    "line": {"color": INK, "width": 1.8},
                    "hovertemplate": "%{x:.4s}s  %{y:.3s}V<extra></extra>",
                }
            ],
            "layout": layout(
                showlegend=False,
                xaxis=titled(_linear(e["t"], "s", X_LABELS), "time from the kick"),
                yaxis=titled(_linear(e["v"], "V", Y_LABELS, zero=True), "amplitude"),
            ),
        }
    )


def spectrum_spec(spectrum: dict[str, Any], bars: dict[str, Any]) -> dict[str, Any]:
    """The output's spectrum (dBc) with the harmonics as bars from a common floor."""
    f_range = axes.data_range(spectrum["f"], bars["f"]) or (0.0, 1.0)
    return fit_margins(
        {
            "data": [
                {
                    "type": "bar",
                    "x": bars["f"],
                    "y": bars["height"],
                    "base": bars["base"],
                    "customdata": bars["dBc"],
                    "name": "harmonics",
                    "marker": {"color": ACCENT},
                    "width": bars["width"],
                    "hovertemplate": "%{x:.4s}Hz  %{customdata:.1f} dBc<extra></extra>",
                },
                {
                    "type": "scatter",
                    "x": spectrum["f"],
                    "y": spectrum["dBc"],
                    "name": "spectrum",
                    "line": {"color": MUTED, "width": 1},
                    "hovertemplate": "%{x:.4s}Hz  %{y:.1f} dBc<extra></extra>",
                },
            ],
            "layout": layout(
                xaxis=titled(axes.linear_axis(*f_range, "Hz", X_LABELS), "frequency"),
                yaxis=titled(
                    axes.linear_axis(bars["base"], SPECTRUM_TOP_DBC, "", Y_LABELS), "level (dBc)"
                ),
            ),
        }
    )


def histogram_spec(
    h: dict[str, Any], title: str, unit: str, lines: list[tuple[str, float]]
) -> dict[str, Any]:
    """Counts of samples per bin; ``lines`` are (name, value) marks (a window, a margin)."""
    lo = min([x - w / 2 for x, w in zip(h["x"], h["width"], strict=True)], default=0.0)
    hi = max([x + w / 2 for x, w in zip(h["x"], h["width"], strict=True)], default=1.0)
    for _, v in lines:
        lo, hi = min(lo, v), max(hi, v)
    return fit_margins(
        {
            "data": [
                {
                    "type": "bar",
                    "x": h["x"],
                    "y": h["count"],
                    "width": h["width"],
                    "marker": {"color": INK},
                    "name": "samples",
                    "showlegend": False,
                    "hovertemplate": f"%{{x:.4s}}{unit}  %{{y}} samples<extra></extra>",
                }
            ],
            "layout": layout(
                bargap=0,
                xaxis=titled(axes.linear_axis(lo, hi, unit, X_LABELS - 1, pad=PAD), title),
                yaxis=titled(_linear(h["count"], "", Y_LABELS, zero=True), "samples"),
                shapes=[
                    marker_line(f"{name} {format_si(v, unit)}", x=v, color=ACCENT)
                    for name, v in lines
                ],
            ),
        }
    )


def sensitivity_spec(s: dict[str, Any]) -> dict[str, Any]:
    """Spread of f_osc and of the loop gain each part's tolerance causes, %, as bars."""
    values = [v for v in (*s["f_spread"], *s["gain_spread"]) if v is not None]
    return fit_margins(
        {
            "data": [
                {
                    "type": "bar",
                    "orientation": "h",
                    "y": s["parts"],
                    "x": s["f_spread"],
                    "name": "f_osc spread (%)",
                    "marker": {"color": ACCENT},
                    "hovertemplate": "%{y}: %{x:.3f} % of f<extra></extra>",
                },
                {
                    "type": "bar",
                    "orientation": "h",
                    "y": s["parts"],
                    "x": s["gain_spread"],
                    "name": "loop-gain spread (%)",
                    "marker": {"color": INK},
                    "hovertemplate": "%{y}: %{x:.3f} % of gain<extra></extra>",
                },
            ],
            "layout": layout(
                barmode="group",
                xaxis=titled(_linear(values, "", X_LABELS, zero=True), "|S|·tolerance (%)"),
                yaxis={"type": "category", "autorange": "reversed", "automargin": True},
            ),
        }
    )


def temperature_spec(t: dict[str, Any]) -> dict[str, Any]:
    """f_osc against temperature: median and the 5–95 % band."""
    hover = "%{x} °C  %{y:.5s}Hz<extra></extra>"
    band = {"color": MUTED, "width": 1, "dash": "dot"}
    return fit_margins(
        {
            "data": [
                {
                    "type": "scatter",
                    "x": t["T_C"],
                    "y": t["p95"],
                    "name": "95 %",
                    "line": band,
                    "hovertemplate": hover,
                },
                {
                    "type": "scatter",
                    "x": t["T_C"],
                    "y": t["p5"],
                    "name": "5 %",
                    "fill": "tonexty",
                    "fillcolor": "rgba(162, 82, 31, 0.12)",
                    "line": band,
                    "hovertemplate": hover,
                },
                {
                    "type": "scatter",
                    "x": t["T_C"],
                    "y": t["p50"],
                    "name": "median",
                    "line": {"color": INK, "width": 2},
                    "hovertemplate": hover,
                },
            ],
            "layout": layout(
                xaxis=titled(_linear(t["T_C"], "°C", X_LABELS), "temperature"),
                yaxis=titled(_linear([*t["p5"], *t["p95"]], "Hz", Y_LABELS), "f_osc"),
            ),
        }
    )
