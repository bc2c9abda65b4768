"""What the sheet and the summary show for a set of form texts.

:func:`build_view` is the one place that turns form texts into everything a
page displays: each field's state, the problems, the core's result (exactly
as ``POST /api/analyze`` returns it), the displayed figures with their text,
and the plot data.  The pages render it; ``POST /api/sheet`` and the pages'
JSON twins return it as JSON.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, Final
from urllib.parse import urlencode

from pydantic import ValidationError

from app.analysis.analyze import analyze
from app.analysis.operating import solve
from app.circuit.topologies import GAIN_SETTER
from app.design import Design, Topology, get_param
from app.errors import describe_validation_error
from app.web import curves
from app.web.fields import (
    BY_NAME,
    FIELDS,
    check_fields,
    display,
    document,
    field_of_problem,
    to_query,
)
from app.web.ladders import nearest_step

#: Figures the sheet shows, in order: (result path, display unit, label, panel).
#: The unit ``"param"`` means "the unit of the threshold's parameter".
SHOWN: Final = (
    ("tank.f_ideal", "Hz", "Ideal resonance 1/(2π√(L·Cs))", "frequency"),
    ("loop.f_osc", "Hz", "Oscillation frequency (zero loop phase)", "frequency"),
    ("tank.C_series", "F", "Series capacitance Cs", "frequency"),
    ("tank.feedback_ratio", "", "Feedback ratio C1/C2", "frequency"),
    ("loop.Q_loaded", "", "Loaded Q (from the phase slope)", "frequency"),
    ("large_signal.f", "Hz", "Frequency at full amplitude", "frequency"),
    ("stability.pushing_Hz_per_V", "Hz/V", "Pushing df/dVcc", "frequency"),
    ("loop.gain_ideal", "", "Loop gain, hand method", "loop"),
    ("loop.gain", "", "Loop gain, full circuit", "loop"),
    ("startup.margin_dB", "dB", "Margin over the threshold of 1", "loop"),
    ("startup.threshold_value", "param", "Value at loop gain 1", "loop"),
    ("tank.R_s", "Ω", "Coil series loss R_s", "loop"),
    ("loop.Z_out", "Ω", "Load on the controlled source", "loop"),
    ("poles.growth_time", "s", "Envelope growth time 1/σ", "loop"),
    ("large_signal.amp_out", "V", "Output amplitude (large signal)", "loop"),
    ("stability.leeson_corner", "Hz", "Leeson corner f0/(2·Q)", "loop"),
    ("operating_point.IC", "A", "Collector current I_C", "bias"),
    ("operating_point.VCE", "V", "V_CE", "bias"),
    ("operating_point.VBE", "V", "V_BE", "bias"),
    ("operating_point.VB", "V", "Base voltage", "bias"),
    ("operating_point.VE", "V", "Emitter voltage", "bias"),
    ("operating_point.VC", "V", "Collector voltage", "bias"),
    ("operating_point.I_divider", "A", "Divider current (RB2)", "bias"),
    ("operating_point.P_device", "W", "Transistor dissipation", "bias"),
    ("operating_point.region", "text", "Region", "bias"),
    ("small_signal.gm", "S", "g_m", "bias"),
    ("small_signal.r_pi", "Ω", "r_π", "bias"),
    ("swing.V_ce", "V", "Collector swing estimate (fixed bias)", "bias"),
)

PANELS: Final = (
    ("frequency", "Frequency and tank"),
    ("loop", "Loop gain and startup"),
    ("bias", "Operating point"),
)


def lookup(result: Mapping[str, Any], path: str) -> Any:
    """The value at a dotted path of the result (``None`` where the result has none)."""
    value: Any = result
    for key in path.split("."):
        if not isinstance(value, Mapping) or key not in value:
            return None
        value = value[key]
    return value


def shown_figures(result: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    """Raw value and display text of every shown figure, keyed by result path."""
    out = {}
    for path, unit, _label, _panel in SHOWN:
        value = lookup(result, path)
        if unit == "text":
            text = str(value)
        else:
            if unit == "param":
                unit = BY_NAME[result["startup"]["threshold_param"]].unit
            text = display(value, unit)
        out[path] = _figure(value, text)
    startup = result["startup"]
    out["startup.margin"] = _figure(startup["margin"], display(startup["margin"], ""))
    out["startup.verdict"] = _figure(startup["verdict"], startup["label"])
    out["startup.threshold_param"] = _figure(startup["threshold_param"], startup["threshold_param"])
    return out


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
    name = path.rsplit(".", 1)[-1]
    return {
        "field": path,
        "message": message,
        "type": kind,
        "input": name if name in BY_NAME else None,
    }


def build_view(
    texts: Mapping[str, str],
    sweep_param: str | None = None,
    link_problems: list[dict] | None = None,
    with_sweep: bool = True,
) -> dict[str, Any]:
    """Everything a page shows for these form texts (JSON-ready).

    ``with_sweep=False`` leaves out the what-if sweep (the slowest part), which
    the live sheet fetches separately so the indicator never waits for it.
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
        "shown": None,
        "curves": None,
        "unused": [],
        "sweep_options": [],
        "sweep_param": None,
        "query": query_string(texts),
        "topology": texts.get("topology", ""),
    }
    try:
        design = Design.model_validate(document(texts))
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
        result = analyze(design).model_dump(mode="json")
        solved = solve(design)
    except (ValueError, ArithmeticError) as err:
        problems.append({**_problem("design", str(err), "domain_error"), "input": None})
        return view
    options = curves.sweepable(design)
    setter = GAIN_SETTER[design.topology]
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
    hint = result["startup"]["threshold_value"] if param == setter else None
    what_if = curves.what_if(design, param, hint) if with_sweep else None
    view.update(
        ok=True,
        result=result,
        shown=shown_figures(result),
        unused=design.unused_parts() + _idle_parts(design),
        sweep_options=options,
        sweep_param=param,
        curves={
            "loop": curves.loop_curve(solved),
            "reactance": curves.reactance_curves(
                design, result["tank"]["C_series"], result["tank"]["f_ideal"]
            ),
            "sweep": what_if,
            "budget": curves.budget_bars(result["loop"]["budget"]),
        },
    )
    return view


def _idle_parts(design: Design) -> list[str]:
    """Bias parts the chosen form does not use and the design leaves blank."""
    probe = design.model_copy(
        update={
            "bias": design.bias.model_copy(update={"RC": 1.0, "CE": 1.0, "CB": 1.0}),
        }
    )
    return [p for p in probe.unused_parts() if get_param(design, p) is None]


def idle_by_topology() -> dict[str, list[str]]:
    """For each form, the bias parts it does not use (the core's ``unused_parts``)."""
    from app.web.samples import DEFAULT_SAMPLE, samples

    base = Design.model_validate(samples()[DEFAULT_SAMPLE].document)
    bias = base.bias.model_copy(update={"RC": 1.0, "CE": 1.0, "CB": 1.0})
    return {
        t.value: base.model_copy(update={"topology": t, "bias": bias}).unused_parts()
        for t in Topology
    }


def sweep_view(
    texts: Mapping[str, str], param: str | None, threshold_hint: float | None
) -> dict[str, Any]:
    """The what-if sweep alone, for the live sheet (``None`` when the design is not valid).

    ``threshold_hint`` is the threshold the sheet already has (from the result),
    used only to choose a span that shows it.
    """
    try:
        design = Design.model_validate(document(texts))
    except ValidationError:
        return {"ok": False, "sweep": None}
    options = curves.sweepable(design)
    setter = GAIN_SETTER[design.topology]
    chosen = param if param in options else setter
    try:
        data = curves.what_if(design, chosen, threshold_hint)
    except (ValueError, ArithmeticError):
        return {"ok": False, "sweep": None}
    return {"ok": True, "sweep": data}
