"""What the sheet's on-demand panels show: spread and yield, standard values,
design from targets and bench readings.

Each function takes the form's texts (and the panel's own texts, SI text as
typed), checks them naming the field, calls the same route functions as the
JSON API (``app/web/routers/spread.py``, so the answers are the API's) and
returns that answer together with every displayed figure's text (``shown``,
keyed by the figure's path in the answer, as the sheet's main view does),
the plot data and, where a design comes back, the form texts that load it.
The browser formats and computes nothing.
"""

from __future__ import annotations

import json
import math
import threading
from collections.abc import Mapping
from itertools import pairwise
from typing import Any, Final

from pydantic import ValidationError

from ringwise.design import Design
from ringwise.errors import describe_validation_error, domain_message
from ringwise.figures.panels import histogram_spec, sensitivity_spec, temperature_spec
from ringwise.units import UnitError, format_si, parse_quantity, parse_whole
from ringwise.web.errors import ApiError
from ringwise.web.fields import BY_NAME, FIELDS, choices, display, document
from ringwise.web.routers.spread import (
    ReconcileRequest,
    SnapRequest,
    SpreadRequest,
    SynthesizeRequest,
    post_snap,
    run_reconcile,
    run_spread,
    run_synthesize,
)
from ringwise.web.view import _figure, query_string
from ringwise.web.workers import Progress

#: Groups of the form that describe the spread, not the circuit: a design that
#: comes back from the core (synthesis, as-built) leaves their texts as typed.
KEPT_GROUPS: Final = ("tolerances",)
#: Most significant digits of a value the tool writes into an input (a fitted or
#: computed value is rounded to them; a standard value needs three at most).
MAX_DIGITS: Final = 4
#: A text reads back "as the value" within this relative difference (float dust).
READ_BACK_RTOL: Final = 1e-9
#: Smallest magnitude a panel's quantity may have: below every real reading or
#: part (I_S is some 1e-15 A) and far above the subnormal floats that make the
#: core's divisions overflow.
SMALLEST: Final = 1e-30
#: Sensitivities listed on the sheet (ranked; the plot shows them all).
SENSITIVITY_ROWS: Final = 8
#: Parts in the sensitivity plot (the largest shares; the rest are too small to see).
SENSITIVITY_PLOT: Final = 10
#: Worst cases listed on the sheet.
WORST_ROWS: Final = 3


# ---- shared ---------------------------------------------------------------------


def _problem(field: str, message: str, kind: str = "value_error") -> dict[str, str]:
    return {"field": field, "message": message, "type": kind}


def _fail(problems: list[dict[str, str]]) -> ApiError:
    first = problems[0]
    return ApiError(422, f"{first['field']}: {first['message']}", problems)


def _design(texts: Mapping[str, str]) -> Design:
    """The design of the form texts, or a 422 naming each marked field."""
    try:
        return Design.model_validate(document(texts))
    except ValidationError as err:
        problems = [
            _problem(f"fields.{p['field']}", p["message"], p["type"])
            for p in describe_validation_error(err)
        ]
        raise _fail(problems) from err


def _quantity(
    name: str, text: str, unit: str, problems: list, *, optional: bool = False
) -> float | None:
    if text.strip() == "":
        if not optional:
            problems.append(_problem(name, "is required", "missing"))
        return None
    try:
        value = parse_quantity(text, unit)
    except UnitError as err:
        problems.append(_problem(name, str(err)))
        return None
    if 0 < abs(value) < SMALLEST:
        problems.append(_problem(name, f"{text!r} is too small (below {SMALLEST:g})"))
        return None
    return value


def _integer(name: str, text: str, problems: list) -> int | None:
    try:
        return parse_whole(text)
    except UnitError as err:
        problems.append(_problem(name, str(err)))
        return None


def _validated(model: type, problems: list, **values: Any) -> Any:
    """``model(**values)`` with its problems (bounds) added to ``problems``."""
    if problems:
        raise _fail(problems)
    try:
        return model(**values)
    except ValidationError as err:
        raise _fail(
            [_problem(p["field"], p["message"], p["type"]) for p in describe_validation_error(err)]
        ) from err


def _core(call: Any, *args: Any, **kwargs: Any) -> Any:
    try:
        return call(*args, **kwargs)
    except (ValueError, ArithmeticError) as err:
        raise _fail([_problem("design", domain_message(err), "domain_error")]) from err


def _stopped(stopped: bool, text: str) -> dict[str, Any]:
    """The note a stopped job's answer shows (hidden when it ran to its end)."""
    return {**_figure(stopped, text if stopped else ""), "hidden": not stopped}


def _percent(value: float | None) -> str:
    return "—" if value is None else f"{100 * value:.3g} %"


def _signed(value: float | None) -> str:
    return "—" if value is None else f"{value:+.3f}"


def _hundred(value: float | None) -> float | None:
    return None if value is None else 100 * value


def value_text(value: float) -> str:
    """Compact SI text, at most MAX_DIGITS significant digits, for a value the core
    chose: the fewest digits that read back as the value (``2.2n`` for
    2.2000000000000003e-9, ``430p``), else the value rounded to MAX_DIGITS
    (``211.2p`` for a fitted 211.18181518150605e-12)."""
    for digits in range(1, MAX_DIGITS + 1):
        text = format_si(value, "", digits=digits).replace(" ", "")
        if math.isclose(parse_quantity(text), value, rel_tol=READ_BACK_RTOL):
            return text
    return text


def _at(doc: Mapping[str, Any], path: str) -> Any:
    node: Any = doc
    for key in path.split("."):
        if not isinstance(node, Mapping) or key not in node:
            return None
        node = node[key]
    return node


def texts_for_design(design: Design, texts: Mapping[str, str]) -> dict[str, str]:
    """Form texts that load ``design``: a field whose value does not change keeps its
    text as typed; the tolerance inputs are kept as they are."""
    new = design.model_dump(mode="json")
    try:
        old: dict[str, Any] | None = Design.model_validate(document(texts)).model_dump(mode="json")
    except ValidationError:
        old = None
    out = {f.name: texts.get(f.name, "") for f in FIELDS}
    for f in FIELDS:
        if f.group in KEPT_GROUPS:
            continue
        value = _at(new, f.path)
        if old is not None and _at(old, f.path) == value:
            continue
        if value is None:
            out[f.name] = ""
        elif isinstance(value, float | int) and not isinstance(value, bool):
            out[f.name] = value_text(float(value))
        else:
            out[f.name] = str(value)
    return out


def _changed(before: Mapping[str, str], after: Mapping[str, str]) -> list[str]:
    return [f.name for f in FIELDS if before.get(f.name, "") != after.get(f.name, "")]


# ---- spread and yield -------------------------------------------------------------


def _centres(h: Mapping[str, list]) -> dict[str, list[float]]:
    edges = h["edges"]
    return {
        "x": [(a + b) / 2 for a, b in pairwise(edges)],
        "width": [b - a for a, b in pairwise(edges)],
        "count": h["counts"],
    }


def _tolerance_text(design: Design, row: Mapping[str, Any]) -> str:
    """A part's tolerance as the design states it: β and I_S as the ratio of their
    range ("3:1 range"; they are drawn log-uniform over it), the others as ± %."""
    ratios = {"beta": design.tolerances.beta_ratio, "IS": design.tolerances.IS_ratio}
    if row["part"] in ratios:
        return f"{ratios[row['part']]:.4g}:1 range"
    return f"± {_percent(row['tolerance'])}"


def spread_view(
    texts: Mapping[str, str],
    samples: str,
    seed: str,
    margin: str,
    low: str,
    high: str,
    progress: Progress | None = None,
) -> dict[str, Any]:
    """The spread panel: the API's answer, the figures' texts and the four plots.

    ``progress`` is the core's (a stopped run shows the samples it did)."""
    design = _design(texts)
    problems: list[dict[str, str]] = []
    n = _integer("samples", samples, problems)
    s = _integer("seed", seed, problems)
    m = _quantity("margin", margin, "", problems, optional=True)
    lo = _quantity("window_low", low, "Hz", problems, optional=True)
    hi = _quantity("window_high", high, "Hz", problems, optional=True)
    if (lo is None) != (hi is None) and not problems:
        missing = "window_high" if hi is None else "window_low"
        problems.append(_problem(missing, "give both ends of the window, or neither", "missing"))
    if lo is not None and hi is not None and lo >= hi and not problems:
        problems.append(_problem("window_high", "must be above the window's low end"))
    values: dict[str, Any] = {"design": design, "samples": n, "seed": s}
    if m is not None:
        values["margin"] = m
    if lo is not None and hi is not None:
        values["window"] = {"low": lo, "high": hi}
    req = _validated(SpreadRequest, problems, **values)
    answer = _core(run_spread, req, progress).model_dump(mode="json")
    sp = answer["spread"]
    shown: dict[str, dict[str, Any]] = {}

    def put(path: str, value: Any, text: str) -> None:
        shown[path] = _figure(value, text)

    for key in ("yield_start", "yield_margin", "in_window"):
        put(f"spread.{key}", sp[key], _percent(sp[key]))
    put("spread.samples", sp["samples"], str(sp["samples"]))
    put("spread.requested", sp["requested"], str(sp["requested"]))
    stopped = (
        f"Stopped at {sp['samples']} of {sp['requested']} samples: "
        f"every figure is of those {sp['samples']}"
        if sp["stopped"]
        else ""
    )
    shown["spread.stopped"] = _stopped(sp["stopped"], stopped)
    put("spread.seed", sp["seed"], str(sp["seed"]))
    put("spread.margin", sp["margin"], display(sp["margin"], ""))
    for t, y in sp["yield_by_temperature"].items():
        put(f"spread.yield_by_temperature.{t}", y, _percent(y))
    for p, v in sp["f_osc"].items():
        put(f"spread.f_osc.{p}", v, display(v, "Hz"))
    for p, v in sp["gain"].items():
        put(f"spread.gain.{p}", v, display(v, ""))
    tunes = sp["tuning_voltages"]
    put(
        "spread.tuning_voltages",
        tunes,
        ", ".join(display(v, "V") for v in tunes) if tunes else "no varactor (one per temperature)",
    )
    worst_x = sp["crystal_worst"]
    put(
        "spread.crystal_margin_min",
        sp["crystal_margin_min"],
        "no crystal" if worst_x is None else f"{display(sp['crystal_margin_min'], '')}×",
    )
    put(
        "spread.crystal_margin_yield",
        sp["crystal_margin_yield"],
        "no crystal" if worst_x is None else _percent(sp["crystal_margin_yield"]),
    )
    put(
        "spread.crystal_worst",
        None if worst_x is None else worst_x["margin"],
        "no crystal"
        if worst_x is None
        else f"sample {worst_x['sample']} at {display(worst_x['T_C'], '°C')}: R_neg "
        f"{display(worst_x['R_neg'], 'Ω')}, {display(worst_x['margin'], '')}× R₁",
    )
    window = sp["window"]
    window_text = f"{display(window[0], 'Hz')} to {display(window[1], 'Hz')}" if window else ""
    put("spread.window", window, window_text or "none given (every start counts)")
    shown["spread.window"]["raw"] = json.dumps(window) if window else ""
    sens_rows = []
    for i, row in enumerate(sp["sensitivities"][:SENSITIVITY_ROWS]):
        base = f"spread.sensitivities.{i}"
        unit = BY_NAME[row["part"]].unit if row["part"] in BY_NAME else ""
        put(f"{base}.part", row["part"], row["part"])
        put(f"{base}.value", row["value"], display(row["value"], unit))
        put(f"{base}.tolerance", row["tolerance"], _tolerance_text(design, row))
        put(f"{base}.S_f", row["S_f"], _signed(row["S_f"]))
        put(f"{base}.S_gain", row["S_gain"], _signed(row["S_gain"]))
        put(f"{base}.f_spread", row["f_spread"], _percent(row["f_spread"]))
        put(f"{base}.gain_spread", row["gain_spread"], _percent(row["gain_spread"]))
        sens_rows.append(base)
    worst_rows = []
    for i, row in enumerate(sp["worst_cases"][:WORST_ROWS]):
        base = f"spread.worst_cases.{i}"
        put(f"{base}.sample", row["sample"], str(row["sample"]))
        put(f"{base}.T_C", row["T_C"], display(row["T_C"], "°C"))
        put(f"{base}.gain", row["gain"], display(row["gain"], ""))
        put(f"{base}.f_osc", row["f_osc"], display(row["f_osc"], "Hz"))
        V = row["V_tune"]
        put(f"{base}.V_tune", V, "—" if V is None else display(V, "V"))
        worst_rows.append(base)
    sens = sp["sensitivities"][:SENSITIVITY_PLOT]
    f_hist = _centres(sp["f_histogram"])
    gain_hist = _centres(sp["gain_histogram"])
    window_lines = [("window low", window[0]), ("window high", window[1])] if window else []
    figures = {
        "f_hist": histogram_spec(f_hist, "f_osc", "Hz", window_lines),
        "gain_hist": histogram_spec(
            gain_hist, "loop gain", "", [("loop gain 1", 1.0), ("margin", sp["margin"])]
        ),
        "sensitivity": sensitivity_spec(
            {
                "parts": [r["part"] for r in sens],
                "f_spread": [_hundred(r["f_spread"]) for r in sens],
                "gain_spread": [_hundred(r["gain_spread"]) for r in sens],
            }
        ),
        "temperature": temperature_spec(
            {
                "T_C": [p["T_C"] for p in sp["f_vs_temperature"]],
                "p5": [p["p5"] for p in sp["f_vs_temperature"]],
                "p50": [p["p50"] for p in sp["f_vs_temperature"]],
                "p95": [p["p95"] for p in sp["f_vs_temperature"]],
            }
        ),
    }
    return {
        "result": answer,
        "shown": shown,
        "temperatures": list(sp["yield_by_temperature"]),
        "sensitivity_rows": sens_rows,
        "worst_rows": worst_rows,
        "figures": figures,
        "query": query_string(texts),
    }


# ---- standard values --------------------------------------------------------------


def snap_view(
    texts: Mapping[str, str], series: str, keep_frequency: bool = False
) -> dict[str, Any]:
    """The standard-values preview: each part before → after, f and gain change, and the
    form texts with the snapped values."""
    design = _design(texts)
    req = _validated(SnapRequest, [], design=design, series=series, keep_frequency=keep_frequency)
    answer = _core(post_snap, req).model_dump(mode="json")
    shown: dict[str, dict[str, Any]] = {}
    rows = []
    for i, c in enumerate(answer["changes"]):
        unit = BY_NAME[c["part"]].unit if c["part"] in BY_NAME else ""
        base = f"changes.{i}"
        shown[f"{base}.part"] = _figure(c["part"], c["part"])
        shown[f"{base}.before"] = _figure(c["before"], display(c["before"], unit))
        shown[f"{base}.after"] = _figure(c["after"], display(c["after"], unit))
        rows.append(base)
    for key in ("f_before", "f_after"):
        shown[key] = _figure(answer[key], display(answer[key], "Hz"))
    for key in ("gain_before", "gain_after"):
        shown[key] = _figure(answer[key], display(answer[key], ""))
    f0, f1 = answer["f_before"], answer["f_after"]
    df = (f1 / f0 - 1) if f0 and f1 else None
    shown["f_change"] = _figure(df, "—" if df is None else f"{100 * df:+.2f} %")
    dg = answer["gain_after"] / answer["gain_before"] - 1 if answer["gain_before"] else None
    shown["gain_change"] = _figure(dg, "—" if dg is None else f"{100 * dg:+.2f} %")
    trim = answer["trim"] or ""
    shown["trim"] = {**_figure(trim, trim), "hidden": not trim}
    snapped = Design.model_validate(answer["design"])
    new_texts = texts_for_design(snapped, texts)
    return {
        "result": answer,
        "shown": shown,
        "rows": rows,
        "fields": new_texts,
        "changed": _changed(texts, new_texts),
        "query": query_string(texts),
    }


# ---- design from targets ----------------------------------------------------------


def _kept_from_sheet(texts: Mapping[str, str], targets: Mapping[str, Any]) -> dict[str, Any]:
    """What the synthesis keeps from the sheet's design: the coil's Q, the load and the
    transistor, each unless the panel asks to choose it (or the sheet has no valid design)."""
    try:
        current = Design.model_validate(document(texts))
    except ValidationError:
        return {}
    kept: dict[str, Any] = {}
    if not targets.get("choose_Q_L"):
        kept["Q_L"] = current.tank.Q_L
    if not targets.get("choose_load"):
        kept["R_load"] = current.load.R_load
    if not targets.get("choose_device"):
        kept["device"] = current.device
    return kept


def synthesize_view(
    texts: Mapping[str, str], targets: Mapping[str, Any], progress: Progress | None = None
) -> dict[str, Any]:
    """A design from targets: the API's answer and the form texts that load it.

    The sheet's coil Q, load and transistor are kept unless the panel's
    ``choose_Q_L``, ``choose_load`` or ``choose_device`` asks to choose them;
    ``clapp`` asks for the Clapp form."""
    problems: list[dict[str, str]] = []
    values: dict[str, Any] = {"topology": targets.get("topology", "") or "common-emitter"}
    values.update(_kept_from_sheet(texts, targets), clapp=bool(targets.get("clapp")))
    for name, unit, optional in (
        ("f", "Hz", False),
        ("Vcc", "V", False),
        ("IC", "A", False),
        ("gain", "", True),
        ("L", "H", True),
        ("ratio", "", True),
    ):
        v = _quantity(name, targets.get(name, ""), unit, problems, optional=optional)
        if v is not None:
            values[name] = v
    req = _validated(SynthesizeRequest, problems, **values)
    answer = _core(run_synthesize, req, progress).model_dump(mode="json")
    design = Design.model_validate(answer["design"])
    miss = answer["miss"]
    shown = {
        "f_osc": _figure(answer["f_osc"], display(answer["f_osc"], "Hz")),
        "gain": _figure(answer["gain"], display(answer["gain"], "")),
        "miss": _figure(miss, "—" if miss is None else f"{100 * miss:+.2f} %"),
        "stopped": _stopped(answer["stopped"], "Stopped before the end: the best design so far"),
    }
    return {
        "result": answer,
        "shown": shown,
        "fields": texts_for_design(design, texts),
    }


# ---- bench readings ---------------------------------------------------------------


def reconcile_view(
    texts: Mapping[str, str], bench: Mapping[str, str], progress: Progress | None = None
) -> dict[str, Any]:
    """The bench-readings panel: fitted unknowns, readings nominal vs as built, the
    explanation, and the form texts of the as-built design."""
    design = _design(texts)
    problems: list[dict[str, str]] = []
    f = _quantity("f_measured", bench.get("f_measured", ""), "Hz", problems)
    amp = _quantity("amplitude", bench.get("amplitude", ""), "V", problems, optional=True)
    IC = _quantity("IC", bench.get("IC", ""), "A", problems, optional=True)
    param = bench.get("threshold_param", "").strip()
    values: dict[str, Any] = {"design": design, "f_measured": f, "amplitude": amp, "IC": IC}
    value_text_ = bench.get("threshold_value", "")
    if param:
        unit = BY_NAME[param].unit if param in BY_NAME else ""
        v = _quantity("threshold_value", value_text_, unit, problems)
        values["threshold"] = {"param": param, "value": v}
    elif value_text_.strip():
        problems.append(_problem("threshold_param", "choose the part the value is for", "missing"))
    req = _validated(ReconcileRequest, problems, **values)
    answer = _core(run_reconcile, req, progress).model_dump(mode="json")
    shown: dict[str, dict[str, Any]] = {}
    rows = []
    for i, p in enumerate(answer["fitted"]):
        base = f"fitted.{i}"
        shown[f"{base}.name"] = _figure(p["name"], p["name"])
        shown[f"{base}.nominal"] = _figure(p["nominal"], display(p["nominal"], ""))
        shown[f"{base}.fitted"] = _figure(p["fitted"], display(p["fitted"], ""))
        shown[f"{base}.change"] = _figure(
            p["change"], f"{100 * p['change']:+.2f} % ± {100 * p['sigma']:.2f} %"
        )
        shown[f"{base}.determined"] = _figure(
            p["determined"], "determined" if p["determined"] else "not determined by these readings"
        )
        rows.append(base)
    reading_rows = []
    for key, r in answer["readings"].items():
        unit = {"f": "Hz", "amplitude": "V", "IC": "A"}.get(
            key, BY_NAME[key].unit if key in BY_NAME else ""
        )
        base = f"readings.{key}"
        for col in ("bench", "nominal_model", "as_built_model"):
            shown[f"{base}.{col}"] = _figure(r[col], display(r[col], unit))
        reading_rows.append({"path": base, "label": key})
    shown["explanation"] = _figure(answer["explanation"], answer["explanation"])
    shown["stopped"] = _stopped(
        answer["stopped"],
        f"Stopped after {answer['tried']} of {answer['of']} explanations: the best of those",
    )
    d = answer["evidence_dAIC"]
    shown["evidence_dAIC"] = _figure(d, "—" if d is None else f"{d:.1f}")
    as_built = Design.model_validate(answer["as_built"])
    return {
        "result": answer,
        "shown": shown,
        "rows": rows,
        "readings": reading_rows,
        "fields": texts_for_design(as_built, texts),
        "query": query_string(texts),
    }


def tool_context() -> dict[str, Any]:
    """What the panels' inputs offer (choices, defaults shown as placeholders)."""
    from ringwise.analysis.spread import DEFAULT_SAMPLES
    from ringwise.analysis.startup import MARGINAL_BELOW
    from ringwise.analysis.synthesis import DEFAULT_GAIN
    from ringwise.design import PART_PARAMETERS
    from ringwise.preferred import SERIES

    return {
        "samples": DEFAULT_SAMPLES,
        "margin": display(MARGINAL_BELOW, ""),
        "gain": display(DEFAULT_GAIN, ""),
        "percentiles": ["p1", "p5", "p50", "p95", "p99"],
        "series": list(SERIES),
        "topologies": choices(BY_NAME["topology"]),
        "params": list(PART_PARAMETERS),
    }


#: The summary page's spread when none was computed for the design: a small run,
#: always the same seed (so a printed summary is reproducible), and how many
#: ranked sensitivities it lists.
SUMMARY_SAMPLES: Final = 300
SUMMARY_SEED: Final = 1
SUMMARY_TOP: Final = 3


#: Designs whose last spread is remembered for the summary (the newest kept).
REMEMBERED_SPREADS: Final = 16
_REMEMBER_LOCK = threading.Lock()


def _design_key(texts: Mapping[str, str]) -> str | None:
    """The design of the texts as canonical JSON (tolerances included), if it is valid."""
    try:
        return _design(texts).model_dump_json()
    except ApiError:
        return None


def remember_spread(app: Any, texts: Mapping[str, str], view: dict[str, Any]) -> None:
    """Keep ``view`` as the last spread computed for the texts' design (for the summary)."""
    key = _design_key(texts)
    if key is None:
        return
    store: dict[str, dict[str, Any]] = app.state.spreads
    with _REMEMBER_LOCK:
        store.pop(key, None)
        store[key] = view
        while len(store) > REMEMBERED_SPREADS:
            del store[next(iter(store))]


def remembered(app: Any, texts: Mapping[str, str], view: dict[str, Any]) -> dict[str, Any]:
    """A spread job's end: remember its view (a stopped one too), and keep it."""
    remember_spread(app, texts, view)
    return view


def last_spread(app: Any, texts: Mapping[str, str]) -> dict[str, Any] | None:
    """The last spread computed for the texts' design, if any."""
    key = _design_key(texts)
    with _REMEMBER_LOCK:
        return app.state.spreads.get(key) if key is not None else None


def summary_small_spread(texts: Mapping[str, str]) -> dict[str, Any]:
    """The summary's own small spread, when no spread was computed for the design
    (empty when the design cannot be run)."""
    try:
        return spread_view(texts, str(SUMMARY_SAMPLES), str(SUMMARY_SEED), "", "", "")
    except ApiError:
        return {}


def summary_spread(texts: Mapping[str, str], v: dict[str, Any] | None) -> dict[str, Any] | None:
    """The short spread section of the summary from the spread view ``v``."""
    if not v:
        return None
    sp = v["result"]["spread"]
    temps = sp["temperatures_C"]
    return {
        "shown": v["shown"],
        "range": f"{display(min(temps), '°C')} to {display(max(temps), '°C')}",
        "top": v["sensitivity_rows"][:SUMMARY_TOP],
        "assumptions": tolerance_assumptions(_design(texts)),
    }


def tolerance_assumptions(design: Design) -> list[str]:
    """The tolerances and the temperature range a spread assumes, as short texts
    ("resistors ± 1 %", "β 3:1 range", "−40 °C to 85 °C"), overrides included."""
    t = design.tolerances
    out = [
        f"resistors ± {_percent(t.R)}",
        f"capacitors ± {_percent(t.C)}",
        f"coil ± {_percent(t.L)}",
        f"coil Q ± {_percent(t.Q_L)}",
        f"β {t.beta_ratio:.4g}:1 range",
        f"I_S {t.IS_ratio:.4g}:1 range",
        f"coil tempco {t.L_tempco_ppm:.4g} ppm/°C",
    ]
    out += [f"{part} ± {_percent(v)}" for part, v in t.per_part.items()]
    dielectrics = {
        part: getattr(t.dielectric.get(part), "value", t.dielectric.get(part))
        for part in t.dielectric
    }
    out += [f"{part} {d}" for part, d in dielectrics.items()]
    out.append(f"{display(t.T_min, '°C')} to {display(t.T_max, '°C')}")
    return out
