"""The look every figure shares: colours, fonts, margins, the legend, the lines
that mark a value, and the Plotly configuration (image download on).

Colours are the sheet's own (drafting paper, ink, a copper accent).
"""

from __future__ import annotations

import math
from typing import Any, Final

INK: Final = "#1f2a30"
ACCENT: Final = "#a2521f"
GREEN: Final = "#1d6b57"
BLUE: Final = "#3b6ea5"
VIOLET: Final = "#5b3f8c"
RED: Final = "#a3322a"
MUTED: Final = "#5d6a70"
PAPER: Final = "#fffdf8"
GRID: Final = "#e6e0d3"
FONT: Final = "system-ui, -apple-system, Segoe UI, Roboto, Noto Sans, sans-serif"
FONT_SIZE: Final = 11
LEGEND_FONT_SIZE: Final = 10

#: Labels a horizontal axis may carry (its labels are wide) and a vertical one.
X_LABELS: Final = 7
Y_LABELS: Final = 6
#: Labels of a horizontal axis of a plot drawn half as wide (the sheet's pairs of plots).
NARROW_X_LABELS: Final = 4

#: Plotly configuration of every figure: responsive, the mode bar with image
#: download (PNG here; the sheet adds an SVG button beside it), no logo.
CONFIG: Final = {
    "responsive": True,
    "displaylogo": False,
    "displayModeBar": "hover",
    "modeBarButtonsToRemove": ["select2d", "lasso2d", "autoScale2d"],
    "toImageButtonOptions": {"format": "png", "scale": 2},
}


def layout(**extra: Any) -> dict[str, Any]:
    """The common layout: paper, font, margins, a horizontal legend above the plot."""
    base: dict[str, Any] = {
        "margin": {"l": 8, "r": 8, "t": 8, "b": 8},
        "paper_bgcolor": PAPER,
        "plot_bgcolor": PAPER,
        "font": {"family": FONT, "size": FONT_SIZE, "color": INK},
        "showlegend": True,
        "legend": {
            "orientation": "h",
            "x": 0,
            "y": 1.0,
            "yanchor": "bottom",
            "font": {"size": LEGEND_FONT_SIZE},
        },
        "hovermode": "closest",
    }
    base.update(extra)
    return base


#: Margin estimate: width of a label character and room for an axis title, px
#: (11 px system-ui digits and letters run 6–6.5 px wide).
CHAR_PX: Final = 6.8
TITLE_PX: Final = 22
TICK_PAD_PX: Final = 8
#: Bottom margin (tick labels and the axis title) and top margin (one legend row), px.
BOTTOM_PX: Final = 44
TOP_PX: Final = 26
EDGE_PX: Final = 10
#: Longest line of a category label (the budget's part names), characters.
WRAP_CHARS: Final = 36


def fit_margins(figure: dict[str, Any]) -> dict[str, Any]:
    """Set the margins from the labels the axes will print, so Plotly lays the plot
    out in one pass (its automatic margins redraw the plot until they settle, which
    makes every update several times slower).  Returns the figure."""
    lay = figure["layout"]

    def width(key: str) -> float:
        axis = lay.get(key)
        if axis is None:
            return 0.0
        texts = axis.get("ticktext")
        if texts is None:  # a category axis prints its categories, line by line
            texts = [
                line
                for trace in figure["data"]
                for y in trace.get("y", [])
                for line in str(y).split("<br>")
            ]
        longest = max((len(t) for t in texts), default=0)
        title = TITLE_PX if axis.get("title") else 0
        return longest * CHAR_PX + TICK_PAD_PX + title

    first, last = _x_end_overhang(lay.get("xaxis"))
    lay["margin"] = {
        "l": round(max(width("yaxis"), EDGE_PX, first)),
        "r": round(max(width("yaxis2"), EDGE_PX, last)),
        "t": TOP_PX if lay.get("showlegend", True) else EDGE_PX,
        "b": BOTTOM_PX,
    }
    for key in ("xaxis", "yaxis", "yaxis2"):
        if key in lay:
            lay[key]["automargin"] = False
    return figure


#: A horizontal axis's label counts as sitting on the plot's edge within this
#: fraction of the axis's span from its end.
AT_EDGE: Final = 0.01


def _x_end_overhang(axis: dict[str, Any] | None) -> tuple[float, float]:
    """How far the horizontal axis's first and last labels reach past the plotting
    area's left and right edges, px: half a label's width when it sits on the edge
    (Plotly centres a label on its tick; the axes draw every label, none is hidden)."""
    if not axis or not axis.get("ticktext") or "range" not in axis:
        return 0.0, 0.0
    lo, hi = axis["range"]
    ticks = axis["tickvals"]
    if axis.get("type") == "log":
        ticks = [math.log10(t) for t in ticks]
    span = (hi - lo) or 1.0

    def half(i: int, end: float) -> float:
        at_edge = abs(ticks[i] - end) <= AT_EDGE * abs(span)
        return len(axis["ticktext"][i]) * CHAR_PX / 2 + TICK_PAD_PX / 2 if at_edge else 0.0

    return half(0, lo), half(-1, hi)


def wrap(text: str, width: int = WRAP_CHARS) -> str:
    """A long category label broken into lines (``<br>``) of at most ``width`` characters."""
    lines: list[str] = []
    for word in text.split():
        if lines and len(lines[-1]) + 1 + len(word) <= width:
            lines[-1] += " " + word
        else:
            lines.append(word)
    return "<br>".join(lines)


def titled(axis: dict[str, Any], title: str, **extra: Any) -> dict[str, Any]:
    """An axis (from :mod:`ringwise.figures.axes`) with its title and grid."""
    return {
        **axis,
        "title": {"text": title, "standoff": 6},
        "gridcolor": GRID,
        "zeroline": False,
        **extra,
    }


def marker_line(
    name: str,
    *,
    x: float | None = None,
    y: float | None = None,
    yref: str = "y",
    xref: str = "x",
    dash: str = "dash",
    color: str = MUTED,
    legend: bool = True,
) -> dict[str, Any]:
    """A vertical (``x``) or horizontal (``y``) line across the plot marking a value,
    named in the legend so the plot says what the line means."""
    if x is not None:
        geometry = {"xref": xref, "yref": "paper", "x0": x, "x1": x, "y0": 0, "y1": 1}
    else:
        geometry = {"xref": "paper", "yref": yref, "x0": 0, "x1": 1, "y0": y, "y1": y}
    return {
        "type": "line",
        **geometry,
        "line": {"color": color, "width": 1.2, "dash": dash},
        "name": name,
        "showlegend": legend,
    }
