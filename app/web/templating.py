"""Jinja2 templates (autoescape on) and the context every page gets."""

from __future__ import annotations

from functools import cache
from typing import Any

from fastapi import Request
from fastapi.templating import Jinja2Templates

from ringwise.analysis.stability import RATING_FRACTION, REPORT_OFFSETS
from ringwise.analysis.transient import HARMONICS, MAX_CYCLES, MIN_CYCLES
from ringwise.figures import CONFIG, SHEET_FIGURES
from ringwise.web.assets import plotly_js, static_url
from ringwise.web.fields import FIELDS, GROUPS, choices, display, preset_texts
from ringwise.web.ladders import SPANS, ladder
from ringwise.web.paths import TEMPLATES_DIR
from ringwise.web.routers.simulate import DEFAULT_CYCLES, POLL_MS, SHEET_POINTS
from ringwise.web.samples import samples
from ringwise.web.tools import tool_context
from ringwise.web.view import (
    NOISE_SHOWN,
    ORDINALS,
    PANELS,
    RUN_SHOWN,
    SHOWN,
    STABILITY_SHOWN,
    SUMMARY_PANELS,
    SUMMARY_STABILITY,
    idle_by_form,
)

# Starlette's Jinja2Templates turns autoescaping on for .html templates; it stays on.
templates = Jinja2Templates(directory=str(TEMPLATES_DIR))
templates.env.globals["static_url"] = static_url
templates.env.globals["plotly_url"] = lambda: plotly_js().url

#: Schematic arrangement per form: (series element, shunt at t1, shunt at t2) of the
#: resonator triangle drawn as a π (see app/circuit/topologies.py).
PI_ARRANGEMENT = {
    "common-emitter": ("L", "C1", "C2"),
    "common-base": ("C1", "L", "C2"),
    "common-collector": ("C2", "C1", "L"),
}
#: Which transistor terminal each tank corner faces, per form: (t1, t2, grounded).
CORNERS = {
    "common-emitter": ("C", "B", "E"),
    "common-base": ("C", "E", "B"),
    "common-collector": ("E", "B", "C"),
}


@cache
def _static_context() -> dict[str, Any]:
    return {
        "groups": GROUPS,
        "form_fields": FIELDS,
        "choices": {f.name: choices(f) for f in FIELDS if f.kind == "choice"},
        "shown_list": SHOWN,
        "panels": PANELS,
        "samples": list(samples().values()),
        "ladders": {name: ladder(name)[1] for name in SPANS},
        "pi": PI_ARRANGEMENT,
        "corners": CORNERS,
        "plotly_version": plotly_js().version,
        "stability_shown": STABILITY_SHOWN,
        "summary_panels": SUMMARY_PANELS,
        "summary_stability": [row for row in STABILITY_SHOWN if row[0] in SUMMARY_STABILITY],
        "noise_defaults": [
            {"path": f"stability.phase_noise.{i}.dBc_Hz", "offset": display(f, "Hz")}
            for i, f in enumerate(REPORT_OFFSETS)
        ],
        "spectrum_defaults": [
            {"path": f"stability.spectrum.{i}.dBc_Hz", "offset": display(f, "Hz")}
            for i, f in enumerate(REPORT_OFFSETS)
        ],
        "noise_shown": NOISE_SHOWN,
        "rating_percent": f"{100 * RATING_FRACTION:g} %",
        "run_shown": RUN_SHOWN,
        "harmonic_rows": [
            {"path": f"transient.harmonics_dBc.{i}", "label": f"{ORDINALS[i]} harmonic"}
            for i in range(HARMONICS - 1)
        ],
        "run": {"cycles": DEFAULT_CYCLES},
        "tools": tool_context(),
        "config": {
            "run": {
                "points": SHEET_POINTS,
                "cycles_min": MIN_CYCLES,
                "cycles_max": MAX_CYCLES,
                "poll_ms": POLL_MS,
            },
            "presets": preset_texts(),
            "idle": idle_by_form(),
            "ladders": {name: ladder(name)[1] for name in SPANS},
            "plot": CONFIG,
            "figures": SHEET_FIGURES,
        },
    }


def page_context(request: Request, view: dict[str, Any]) -> dict[str, Any]:
    query = view["query"]
    # relative: the page makes it absolute from its own origin (never from the Host header)
    return {
        **_static_context(),
        "view": view,
        "share_url": f"/?{query}" if query else "/",
        # where `ringwise serve` listens, as it was started (never the request's Host header);
        # blank in-process, where the printed link stays relative
        "served_at": getattr(request.app.state, "served_at", ""),
        "summary_url": f"/summary?{query}",
        "export_url": f"/api/export?{query}",
    }
