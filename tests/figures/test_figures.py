"""The figures (app/figures/): valid Plotly figures, built once, served as built."""

from __future__ import annotations

import plotly.graph_objects as go
import pytest

import ringwise.figures as rf
from ringwise.analysis.analyze import analyze
from ringwise.design import Design
from ringwise.web.samples import samples


@pytest.fixture(scope="module", params=sorted(samples()))
def figures(request) -> dict[str, go.Figure]:
    return rf.design_figures(Design.model_validate(samples()[request.param].document))


def test_every_design_figure_is_a_valid_plotly_figure(figures):
    # go.Figure validates every attribute (plotly.py), so a misspelt key fails here
    # the tuning plot with a varactor only
    optional = {"tuning"} & set(figures)
    assert set(figures) == {*rf.DESIGN_FIGURES, "sweep", *optional}
    for fig in figures.values():
        assert isinstance(fig, go.Figure)
        go.Figure(fig.to_plotly_json())


def test_every_axis_carries_its_own_round_ticks(figures):
    for name, fig in figures.items():
        layout = fig.layout.to_plotly_json()
        for key in ("xaxis", "yaxis", "yaxis2"):
            axis = layout.get(key)
            if axis is None or (name == "budget" and key == "yaxis"):
                continue  # one-axis plots; the budget's categories
            assert axis["tickmode"] == "array"
            assert 2 <= len(axis["tickvals"]) == len(axis["ticktext"]) <= 8, (name, key)
            assert len(set(axis["ticktext"])) == len(axis["ticktext"]), (name, key)


def test_dashed_lines_are_named_in_the_legend(figures):
    for name, fig in figures.items():
        for shape in fig.layout.shapes:
            if shape.type == "line":
                assert shape.showlegend and shape.name, name


def test_the_sheet_gets_the_same_figures():
    from fastapi.testclient import TestClient

    from ringwise.web.server import create_app

    doc = samples()["clapp-clock-1M"].document
    with TestClient(create_app(), base_url="http://127.0.0.1") as client:
        view = client.get("/sheet.json?design=clapp-clock-1M").json()
    built = rf.design_figures(Design.model_validate(doc))
    for name in rf.DESIGN_FIGURES:
        assert go.Figure(view["figures"][name]) == built[name]
    assert view["figures"]["sweep"]["layout"]["xaxis"]["title"]["text"] == "RC (Ω)"


def test_config_keeps_image_download():
    assert rf.CONFIG["toImageButtonOptions"]["format"] == "png"
    assert "toImage" not in rf.CONFIG["modeBarButtonsToRemove"]


def test_budget_texts_have_room_beside_their_bars():
    from ringwise.figures.sheet import BUDGET_MIN_AREA_PX, CHAR_PX, bar_text_places

    # invented costs: one large loss and small ones, a negative "rest", a lone loss,
    # equal losses (common practice, no source: a value is printed inside its bar or
    # beside it, never over the category labels left of the plot)
    cases = [
        [3.69, 0.63, 0.02, -0.12],
        [1.75, 0.14, 0.01],
        [0.01],
        [0.2, 0.2, 0.2],
        [0.05, -0.3],
    ]
    for costs in cases:
        texts = [f"{c:.2f} dB · {100 * c / 9.5:.1f} %" for c in costs]
        lo, hi, beside_zero = bar_text_places(costs, texts)
        assert lo == min(0.0, *costs)  # no room is taken left of the bars
        px = BUDGET_MIN_AREA_PX / (hi - lo)  # px per dB in the narrowest plotting area
        for c, t, zero in zip(costs, texts, beside_zero, strict=True):
            width = len(t) * CHAR_PX
            inside = abs(c) * px >= width
            end = 0.0 if c < 0 else c
            assert inside or (hi - end) * px >= width, (costs, c, t)
            assert zero == (c < 0 and not inside), (costs, c)


def test_the_tuning_figure_draws_f_and_K_against_the_tuning_voltage():
    design = Design.model_validate(samples()["varactor-lo-5M"].document)
    fig = rf.design_figures(design)["tuning"].to_plotly_json()
    f_trace, K_trace = fig["data"]
    result = analyze(design)
    assert f_trace["x"] == result.tuning.V and f_trace["y"] == result.tuning.f_osc
    assert K_trace["y"] == [abs(k) for k in result.tuning.K] and K_trace["yaxis"] == "y2"
    (now,) = fig["layout"]["shapes"]
    assert now["x0"] == design.varactor.V_tune
