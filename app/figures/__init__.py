"""The figures, built once in Python and drawn everywhere.

Each figure is a Plotly figure in its JSON form, ``{"data": [...],
"layout": {...}}``, built from the core's results by the ``*_spec``
functions of :mod:`ringwise.figures.sheet` (the design's plots) and
:mod:`ringwise.figures.panels` (a time-domain run, a spread).  The sheet
hands that JSON to ``Plotly.react``; the printed summary draws the same JSON
as a static plot; in a notebook :func:`design_figures` wraps them as
:class:`plotly.graph_objects.Figure` objects::

    import ringwise.figures as rf
    from ringwise.design import Design
    figs = rf.design_figures(Design.model_validate_json(open("my.json").read()))
    figs["loop"].show(config=rf.CONFIG)

The dicts are built directly (a ``go.Figure`` validates every attribute, some
10 ms a figure, too slow for the live sheet); the tests pass every one
through ``go.Figure`` with validation on.  Axes carry their own ticks
(:mod:`ringwise.figures.axes`).  To add a figure: write its ``*_spec`` here,
name it in :data:`DESIGN_FIGURES` if every answer carries it, and give the
sheet a ``<div class="plot" data-figure="name">``.
"""

from __future__ import annotations

from collections.abc import Collection
from typing import TYPE_CHECKING, Any, Final

from ringwise.figures import curves
from ringwise.figures.sheet import (
    budget_spec,
    loop_spec,
    noise_spec,
    reactance_spec,
    sweep_spec,
    tuning_spec,
)
from ringwise.figures.style import CONFIG

if TYPE_CHECKING:  # plotly is imported only when a Figure object is asked for
    import plotly.graph_objects as go

    from ringwise.analysis.operating import Solved
    from ringwise.design import Design

#: The figures of every answer of the sheet, by name (the sheet's ``data-figure``).
DESIGN_FIGURES: Final = ("loop", "reactance", "budget", "noise")
#: Every figure a sheet's answer may carry: those, and the tuning curve of a
#: varactor-tuned design (the what-if sweep comes on a request of its own).
SHEET_FIGURES: Final = (*DESIGN_FIGURES, "tuning")

__all__ = [
    "CONFIG",
    "DESIGN_FIGURES",
    "SHEET_FIGURES",
    "design_curves",
    "design_figures",
    "design_specs",
    "to_figure",
]


def to_figure(spec: dict[str, Any]) -> go.Figure:
    """A figure dict as a :class:`plotly.graph_objects.Figure` (validated)."""
    import plotly.graph_objects as go

    return go.Figure(spec)


def design_curves(
    design: Design, solved: Solved, result: dict[str, Any], what_if: dict[str, Any] | None = None
) -> dict[str, dict[str, Any]]:
    """The plot data of the design's figures (what a CSV of a plot holds), from its
    solved circuit and its result (JSON form); ``sweep`` when the what-if sweep
    (:func:`curves.what_if`) is given."""
    data = {
        "loop": curves.loop_curve(solved),
        "reactance": curves.reactance_curves(
            design, result["tank"]["C_series"], result["tank"]["f_ideal"]
        ),
        "budget": curves.budget_bars(result["loop"]),
        "noise": curves.noise_curve(result["stability"]),
    }
    if result.get("tuning"):
        data["tuning"] = curves.tuning_curve(result["tuning"])
    if what_if is not None:
        data["sweep"] = what_if
    return data


#: The figure of each plot data of :func:`design_curves`.
SPECS: Final = {
    "loop": loop_spec,
    "reactance": reactance_spec,
    "budget": budget_spec,
    "noise": noise_spec,
    "sweep": sweep_spec,
    "tuning": tuning_spec,
}


def design_specs(
    data: dict[str, dict[str, Any]], names: Collection[str] | None = None
) -> dict[str, dict[str, Any]]:
    """The figure dicts of the design's plot data (:func:`design_curves`); only
    those of ``names`` when given."""
    return {name: SPECS[name](d) for name, d in data.items() if names is None or name in names}


def design_figures(design: Design, sweep_param: str | None = None) -> dict[str, go.Figure]:
    """Every figure of a design as Plotly figures (for a notebook or a script); the
    what-if sweep runs over ``sweep_param`` (default: the form's gain-setting part)."""
    from ringwise.analysis.analyze import analyze
    from ringwise.analysis.operating import solve
    from ringwise.circuit.topologies import gain_setter
    from ringwise.display import PARAM_UNITS

    result = analyze(design).model_dump(mode="json")
    setter = gain_setter(design)
    param = sweep_param or setter
    known = curves.analysed_threshold(design, param, result)
    sweep = curves.what_if(design, param, None, PARAM_UNITS.get(param, ""), known)
    specs = design_specs(design_curves(design, solve(design), result, sweep))
    return {name: to_figure(spec) for name, spec in specs.items()}
