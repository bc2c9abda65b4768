"""What the sheet and the summary show for a set of form texts.

:func:`build_view` is the one place that turns form texts into everything a
page displays: each field's state, the problems, the core's result (exactly
as ``POST /api/analyze`` returns it), the displayed figures with their text,
and the plot data.  The pages render it; ``POST /api/sheet`` and the pages'
JSON twins return it as JSON.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping
from typing import Any, get_args
from urllib.parse import urlencode

from pydantic import ValidationError

from ringwise.analysis.analyze import analyze
from ringwise.analysis.operating import solve
from ringwise.analysis.stability import RATING_FRACTION
from ringwise.circuit.topologies import gain_setter
from ringwise.design import PART_PARAMETERS, Design, Feed, Topology, get_param
from ringwise.display import (
    LOG_UNITS,
    NOISE_SHOWN,
    ORDINALS,
    PANELS,
    PARAM_UNITS,
    RUN_SHOWN,
    SHOWN,
    STABILITY_SHOWN,
    SUMMARY_PANELS,
    SUMMARY_STABILITY,
    format_value,
    lookup,
    unit_of,
)
from ringwise.errors import describe_validation_error, domain_message
from ringwise.figures import curves, design_curves, design_specs
from ringwise.figures.panels import envelope_spec, spectrum_spec, waveform_spec
from ringwise.figures.sheet import sweep_spec
from ringwise.web.errors import invalid
from ringwise.web.fields import (
    BY_PATH,
    FIELDS,
    check_fields,
    display,
    document,
    field_of_problem,
    to_query,
)
from ringwise.web.ladders import nearest_step

__all__ = [
    "NOISE_SHOWN",
    "ORDINALS",
    "PANELS",
    "RUN_SHOWN",
    "SHOWN",
    "STABILITY_SHOWN",
    "SUMMARY_PANELS",
    "SUMMARY_STABILITY",
    "build_view",
    "lookup",
]


#: Shown while the steady state is still being computed (the sheet's first answer).
PENDING_TEXT = "computing…"


def _text(value: Any, unit: str) -> str:
    """Display text of a figure (the core's :func:`ringwise.display.format_value`;
    numbers through the web layer's cache of it)."""
    if unit in ("text", "yesno", "%", "behaviour", "cycles", *LOG_UNITS):
        return format_value(value, unit)
    return display(value, unit)


def shown_figures(result: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    """Raw value and display text of every shown figure, keyed by result path."""
    out = {}
    for path, unit, _label, _panel in SHOWN:
        value = lookup(result, path)
        out[path] = _figure(value, _text(value, unit_of(unit, result)))
    steady = result["steady_state"]
    if steady is None:
        for fig in SHOWN:
            if fig.path.startswith("steady_state."):
                out[fig.path] = _figure(None, PENDING_TEXT)
        out["steady_state.reason"] = {**_figure("", ""), "hidden": True}
    else:
        shift = None
        if steady["IC_avg"] is not None and result["operating_point"]["IC"] is not None:
            shift = steady["IC_avg"] - result["operating_point"]["IC"]
        if shift is not None:
            sign = "+" if shift >= 0 else "−"
            text = f"{display(steady['IC_avg'], 'A')} ({sign}{display(abs(shift), 'A')} from DC)"
            out["steady_state.IC_avg"] = _figure(steady["IC_avg"], text)
        reason = steady["reason"] or ""
        out["steady_state.reason"] = {**_figure(reason, reason), "hidden": not reason}
    verdict = result["verdict"]
    out["verdict"] = {**_figure(verdict["code"], verdict["label"]), "icon": verdict["icon"]}
    out.update(stability_figures(result))
    startup = result["startup"]
    out["startup.margin"] = _figure(startup["margin"], display(startup["margin"], ""))
    out["startup.verdict"] = _figure(startup["verdict"], startup["label"])
    out["startup.threshold_param"] = _figure(startup["threshold_param"], startup["threshold_param"])
    return out


def stability_figures(result: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    """The stability panel's figures: phase noise at the report offsets, the stability
    figures, and the tank parts' stresses, keyed by result path."""
    st = result["stability"]
    out = {}
    for i, point in enumerate(st["phase_noise"]):
        path = f"stability.phase_noise.{i}.dBc_Hz"
        out[path] = _figure(point["dBc_Hz"], display(point["dBc_Hz"], "dBc/Hz"))
    for i, point in enumerate(st.get("spectrum") or []):
        path = f"stability.spectrum.{i}.dBc_Hz"
        out[path] = _figure(point["dBc_Hz"], display(point["dBc_Hz"], "dBc/Hz"))
    for path, unit, _label in STABILITY_SHOWN + NOISE_SHOWN:
        value = lookup(result, path)
        out[path] = _figure(value, _text(value, unit))
    for i, part in enumerate(st["parts"]):
        for key, unit in (("I_rms", "A"), ("V_peak", "V"), ("P", "W")):
            out[f"stability.parts.{i}.{key}"] = _figure(part[key], display(part[key], unit))
    return out


def noise_offsets(result: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The phase-noise report points as the sheet lists them: path, offset text."""
    return [
        {"path": f"stability.phase_noise.{i}.dBc_Hz", "offset": display(p["offset"], "Hz")}
        for i, p in enumerate(result["stability"]["phase_noise"])
    ]


def source_rows(result: Mapping[str, Any]) -> list[dict[str, str]]:
    """The noise sources as the sheet lists them: name and share at 1 kHz and 100 kHz, in %."""

    def percent(x: float | None) -> str:
        return "—" if x is None else f"{100.0 * x:.1f} %"

    return [
        {
            "name": src["name"],
            "share_1k": percent(src["share_1k"]),
            "share_100k": percent(src["share_100k"]),
        }
        for src in result["stability"].get("sources") or []
    ]


def part_rows(result: Mapping[str, Any], V_cap: float) -> list[dict[str, Any]]:
    """The power-budget table: per tank part, its paths, and for a capacitor its peak
    voltage as a share of the rating (flagged near the core's warning fraction)."""
    rows = []
    for i, part in enumerate(result["stability"]["parts"]):
        is_cap = part["part"].startswith("C")
        share = part["V_peak"] / V_cap if is_cap and part["V_peak"] is not None else None
        rows.append(
            {
                "part": part["part"],
                "prefix": f"stability.parts.{i}",
                "rating": display(V_cap, "V") if is_cap else "—",
                "share": "—" if share is None else f"{100.0 * share:.3g} %",
                "close": share is not None and share > RATING_FRACTION,
            }
        )
    return rows


def run_view(sim: Mapping[str, Any]) -> dict[str, Any]:
    """What the sheet shows of a time-domain run (the ``simulate`` result): its figures
    by path, the harmonics, the notes and warnings, and the three plots' data."""
    tr = sim["transient"]
    shown = {}
    for path, unit, _label in RUN_SHOWN:
        value = lookup(sim, path)
        shown[path] = _figure(value, _text(value, unit))
    harmonics = []
    for i, level in enumerate(tr["harmonics_dBc"]):
        path = f"transient.harmonics_dBc.{i}"
        shown[path] = _figure(level, display(level, "dBc"))
        harmonics.append({"path": path, "label": f"{ORDINALS[i]} harmonic"})
    return {
        "shown": shown,
        "harmonics": harmonics,
        "notes": list(tr["notes"]),
        "warnings": list(sim["warnings"]),
        "output_node": sim["output_node"],
        "figures": run_figures(sim),
    }


def run_figures(sim: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    """The three figures of a time-domain run: waveform, envelope, spectrum."""
    c = curves.run_curves(dict(sim))
    return {
        "wave": waveform_spec(c["waveform"], c["output_node"]),
        "envelope": envelope_spec(c["envelope"]),
        "spectrum": spectrum_spec(c["spectrum"], c["bars"]),
    }


def _figure(value: Any, text: str) -> dict[str, Any]:
    """A shown figure: its value, its text, and ``raw``, the value as ``data-value`` holds it
    (shortest round-trip form of a float; empty for null)."""
    if value is None:
        raw = ""
    elif isinstance(value, float):
        raw = repr(value)
    else:
        raw = str(value)
    return {"value": value, "text": text, "raw": raw}


def query_string(texts: Mapping[str, str]) -> str:
    return urlencode(to_query(texts))


def _problem(path: str, message: str, kind: str) -> dict[str, Any]:
    field = BY_PATH.get(path)
    return {
        "field": path,
        "message": message,
        "type": kind,
        "input": field.name if field else None,
    }


def build_view(
    texts: Mapping[str, str],
    sweep_param: str | None = None,
    link_problems: list[dict] | None = None,
    with_sweep: bool = True,
    with_steady: bool = True,
    with_curves: bool = False,
    figures: Collection[str] | None = None,
) -> dict[str, Any]:
    """Everything a page shows for these form texts (JSON-ready).

    ``with_sweep=False`` leaves out the what-if sweep and ``with_steady=False``
    the periodic steady state (the slowest parts), which the live sheet
    fetches separately so the small-signal verdict never waits for them.
    ``figures`` names the plots to send (default: all): the live sheet's first
    answer to an edit carries only the plots on screen.
    """
    states = check_fields(texts)
    fields = {name: vars(state).copy() for name, state in states.items()}
    for name, entry in fields.items():
        value = entry["value"] if isinstance(entry["value"], float) else None
        entry["step"] = nearest_step(name, value)
    problems: list[dict[str, Any]] = []
    for f in FIELDS:
        if fields[f.name]["error"]:
            problems.append(_problem(f.path, fields[f.name]["error"], "field_error"))
    view: dict[str, Any] = {
        "ok": False,
        "fields": fields,
        "problems": problems,
        "link_problems": link_problems or [],
        "result": None,
        "design": None,
        "shown": None,
        "noise_offsets": [],
        "part_rows": [],
        "source_rows": [],
        "figures": None,
        "budget_caption": "",
        "unused": [],
        "sweep_options": [],
        "sweep_param": None,
        "query": query_string(texts),
        "topology": texts.get("topology", ""),
        "idle_key": idle_key(texts.get("topology", ""), texts.get("feed", "")),
    }
    doc = document(texts)
    try:
        design = Design.model_validate(doc)
    except ValidationError as err:
        for p in describe_validation_error(err):
            name = field_of_problem(p)
            if name is not None and fields[name]["error"]:
                continue  # already shown beside its field
            if name is not None:
                fields[name]["error"] = p["message"]
            problems.append({**p, "input": name})
        return view
    try:
        result = analyze(design, large_signal=with_steady).model_dump(mode="json")
        solved = solve(design)
    except (ValueError, ArithmeticError) as err:
        problems.append({**_problem("design", domain_message(err), "domain_error"), "input": None})
        return view
    options = curves.sweepable(design)
    setter = gain_setter(design)
    if sweep_param is not None and sweep_param not in options:
        problems.append(
            _problem(
                "sweep_param",
                f"{sweep_param!r} cannot be swept in this design; showing {setter}",
                "value_error",
            )
        )
        sweep_param = None
    param = sweep_param or setter
    what_if = None
    if with_sweep:
        known = curves.analysed_threshold(design, param, result)
        what_if = curves.what_if(design, param, None, PARAM_UNITS.get(param, ""), known)
    plot_data = design_curves(design, solved, result, what_if)
    if with_curves:
        view["curves"] = plot_data  # the plots' data as such (the CSV downloads)
    view.update(
        ok=True,
        result=result,
        design=doc,
        shown=shown_figures(result),
        noise_offsets=noise_offsets(result),
        part_rows=part_rows(result, design.ratings.V_cap),
        source_rows=source_rows(result),
        unused=design.unused_parts() + _idle_parts(design),
        sweep_options=options,
        sweep_param=param,
        figures=design_specs(plot_data, figures),
        budget_caption=plot_data["budget"]["caption"],
    )
    return view


def _idle_parts(design: Design) -> list[str]:
    """Bias parts the chosen form and feed do not use and the design leaves blank."""
    return [p for p in design.idle_parts() if get_param(design, p) is None]


def idle_key(topology: str, feed: str) -> str:
    """The key of :func:`idle_by_form` for a form's texts (blank feed: the resistor)."""
    return f"{topology}|{feed or 'resistor'}"


def idle_by_form() -> dict[str, list[str]]:
    """For each form and collector feed, the inputs it does not use (the core's
    ``Design.idle_parts``, and the feed choice itself where there is no collector load)."""
    from ringwise.web.samples import DEFAULT_SAMPLE, samples

    base = Design.model_validate(samples()[DEFAULT_SAMPLE].document)
    out = {}
    for t in Topology:
        for feed in get_args(Feed):
            probe = base.model_copy(
                update={"topology": t, "bias": base.bias.model_copy(update={"feed": feed})}
            )
            extra = ["feed"] if t is Topology.CC else []
            out[idle_key(t.value, feed)] = [*probe.idle_parts(), *extra]
    return out


def sweep_view(
    texts: Mapping[str, str], param: str | None, threshold_hint: float | None
) -> dict[str, Any]:
    """The what-if sweep alone, for the live sheet (``None`` when the design is not valid).

    ``threshold_hint`` is the threshold the sheet already has (from the result),
    used only to choose a span that shows it.  On the gain setter the threshold
    is the design's analysis's own (remembered from the sheet's answer), not
    searched for again.
    """
    if param is not None and param not in PART_PARAMETERS:
        raise invalid("param", f"{param!r} is not a part; parts: {', '.join(PART_PARAMETERS)}")
    try:
        design = Design.model_validate(document(texts))
    except ValidationError:
        return {"ok": False, "figure": None}
    options = curves.sweepable(design)
    if param is not None and param not in options:
        raise invalid(
            "param", f"{param!r} cannot be swept in this design; it can sweep {', '.join(options)}"
        )
    chosen = param or gain_setter(design)
    try:
        known = None
        if chosen == gain_setter(design):
            # the sheet's answer for this design has just been computed and is remembered
            result = analyze(design, large_signal=False).model_dump(
                mode="json", include={"startup"}
            )
            known = curves.analysed_threshold(design, chosen, result)
        data = curves.what_if(design, chosen, threshold_hint, PARAM_UNITS.get(chosen, ""), known)
    except (ValueError, ArithmeticError):
        return {"ok": False, "figure": None}
    return {"ok": True, "param": chosen, "figure": sweep_spec(data)}
