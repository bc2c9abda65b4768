"""Hypothesis over the design model and every analysis the web serves.

Whatever a document holds, the model either accepts it or raises a
``ValidationError`` naming the field; whatever valid design it accepts, each
analysis either answers with finite numbers (or ``null``) or raises a
``DesignError`` (the web's 422), never anything else.  Two physical
invariants on realistic designs: f_osc falls when L rises (f ≈ 1/(2π√(L·C)),
Thomson's formula, textbook), and in the common-emitter form the loop gain
rises with RC (T ≈ g_m·RC·C1/C2 for the ideal CE Colpitts, textbook, from
memory) while the transistor stays active.
"""

from __future__ import annotations

import copy
import json
import math
import os
from typing import Any

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from pydantic import ValidationError

from ringwise.analysis.analyze import analyze
from ringwise.analysis.operating import solve
from ringwise.analysis.sensitivity import sensitivities
from ringwise.analysis.spread import monte_carlo
from ringwise.analysis.threshold import find_threshold, sweep
from ringwise.analysis.transient import MIN_CYCLES, simulate
from ringwise.design import PARAMETERS, Design, get_param, load_design, with_param
from ringwise.errors import DesignError
from ringwise.web.paths import SAMPLES_DIR

SAMPLES = {p.stem: json.loads(p.read_text(encoding="utf-8")) for p in SAMPLES_DIR.glob("*.json")}
#: ``make fuzz`` multiplies every budget here by this.
SCALE = int(os.environ.get("RINGWISE_FUZZ_SCALE", "1"))
FAST = settings(
    max_examples=25 * SCALE,
    deadline=None,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)
SLOW = settings(FAST, max_examples=6 * SCALE)


def _bounds() -> dict[str, tuple[str, float, float]]:
    """(section, low, high) of every bounded number in the design, from its JSON schema."""
    schema = Design.model_json_schema()
    out = {}
    for section, info in Design.model_fields.items():
        ref = schema["properties"][section].get("$ref") or ""
        props = schema["$defs"][ref.rsplit("/", 1)[-1]].get("properties", {}) if ref else {}
        for name, prop in props.items():
            for alt in prop.get("anyOf", [prop]):
                if "ge" in alt and "le" in alt:
                    out[f"{section}.{name}"] = (section, float(alt["ge"]), float(alt["le"]))
        if info.annotation is float:
            prop = schema["properties"][section]
            out[section] = ("", float(prop["ge"]), float(prop["le"]))
    return out


BOUNDS = _bounds()


def _log_between(low: float, high: float) -> st.SearchStrategy[float]:
    if low <= 0:
        return st.floats(low, high, allow_nan=False, allow_subnormal=False)
    return st.floats(math.log10(low), math.log10(high)).map(lambda e: 10.0**e)


def _put(doc: dict[str, Any], path: str, value: Any) -> None:
    section, _, name = path.partition(".")
    if name:
        doc.setdefault(section, {})[name] = value
    else:
        doc[section] = value


def _finite_json(data: Any) -> None:
    """Every number in ``data`` (a JSON dump) is finite."""
    json.dumps(data, allow_nan=False)


# --- the design model ---------------------------------------------------------------------


@FAST
@given(
    key=st.sampled_from(sorted(SAMPLES)),
    path=st.sampled_from(sorted(BOUNDS)),
    data=st.data(),
)
def test_in_bounds_accepted_out_of_bounds_refused_naming_the_field(key, path, data):
    _, low, high = BOUNDS[path]
    doc = copy.deepcopy(SAMPLES[key])
    inside = data.draw(_log_between(low, high), label="inside")
    _put(doc, path, inside)
    try:
        Design.model_validate(doc)
    except ValidationError as err:  # another rule of the model may object, never this bound
        assert all(e["type"] not in ("greater_than_equal", "less_than_equal") for e in err.errors())
    outside = data.draw(
        st.sampled_from([low - abs(low) * 0.5 - 1e-3, high * 2 + 1, math.nan, math.inf]),
        label="outside",
    )
    _put(doc, path, outside)
    with pytest.raises(ValidationError) as info:
        Design.model_validate(doc)
    fields = [".".join(str(p) for p in e["loc"]) for e in info.value.errors()]
    assert path in fields


_anything = st.recursive(
    st.none()
    | st.booleans()
    | st.floats()
    | st.integers()
    | st.text(max_size=8)
    | st.sampled_from(["2n2", "47u", "39k", "1e-6", "-1", "1 MHz", "inf", "nan"]),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=4), inner),
    max_leaves=6,
)


@FAST
@given(
    key=st.sampled_from(sorted(SAMPLES)),
    path=st.sampled_from([*sorted(BOUNDS), "topology", "name", "device.preset", "format"]),
    value=_anything,
)
def test_any_value_anywhere_is_a_design_or_a_validation_error(key, path, value):
    doc = copy.deepcopy(SAMPLES[key])
    _put(doc, path, value)
    try:
        design = load_design(doc)
    except ValidationError:
        return
    again = Design.model_validate(design.model_dump(mode="json"))
    assert again == design  # the model's own dump reads back as the same design


# --- every analysis -----------------------------------------------------------------------


@st.composite
def wide_designs(draw) -> Design:
    """A sample with a few values anywhere within their bounds (most such designs are dead)."""
    doc = copy.deepcopy(SAMPLES[draw(st.sampled_from(sorted(SAMPLES)))])
    paths = [p for p in BOUNDS if not p.startswith(("tolerances", "noise", "ratings"))]
    for path in draw(st.lists(st.sampled_from(paths), min_size=1, max_size=4, unique=True)):
        _, low, high = BOUNDS[path]
        _put(doc, path, draw(_log_between(low, high)))
    try:
        return Design.model_validate(doc)
    except ValidationError:
        assume(False)
        raise


@st.composite
def near_designs(draw) -> Design:
    """A sample with its tank and bias scaled by up to 3x either way (mostly live designs)."""
    doc = copy.deepcopy(SAMPLES[draw(st.sampled_from(sorted(SAMPLES)))])
    design = Design.model_validate(doc)
    for part in ("L", "C1", "C2", "RB2", "RE", "Q_L"):
        value = get_param(design, part)
        design = with_param(design, part, value * draw(st.floats(1 / 3, 3)))
    return design


def _answers(fn, *args, **kwargs) -> Any:
    """``fn``'s answer, or ``None`` when it refuses with a DesignError (the web's 422)."""
    try:
        return fn(*args, **kwargs)
    except DesignError:
        return None


@FAST
@given(design=st.one_of(wide_designs(), near_designs()))
def test_analyze_answers_with_finite_numbers(design):
    result = _answers(analyze, design)
    if result is not None:
        _finite_json(result.model_dump(mode="json"))
        assert result.startup.verdict and result.startup.label  # the state, explained


@FAST
@given(
    design=st.one_of(wide_designs(), near_designs()),
    param=st.sampled_from([*PARAMETERS, "temperature_C"]),
    span=st.tuples(st.floats(0.1, 10), st.floats(0.1, 10)),
    points=st.integers(2, 9),
)
def test_sweep_and_threshold_answer_with_finite_numbers(design, param, span, points):
    current = get_param(design, param)
    assume(current is not None and current > 0 and param not in design.unused_parts())
    start, stop = current * span[0], current * span[1]
    s = _answers(sweep, design, param, start, stop, points, None)
    if s is not None:
        assert len(s.values) == len(s.f_osc) == len(s.gain) == len(s.valid) == points
        _finite_json([s.values, s.f_osc, s.gain, s.threshold.value, s.threshold.current])
        for ok, f, g in zip(s.valid, s.f_osc, s.gain, strict=True):
            assert ok or (f is None and g is None)
    t = _answers(find_threshold, design, param)
    if t is not None:
        assert t.value is None or (math.isfinite(t.value) and t.value > 0)
        assert t.value is not None or t.reason


@SLOW
@given(design=near_designs())
def test_sensitivities_are_finite_or_none(design):
    for row in _answers(sensitivities, design) or []:
        assert row.S_f is None or math.isfinite(row.S_f)
        assert row.S_gain is None or math.isfinite(row.S_gain)


@SLOW
@given(design=st.one_of(wide_designs(), near_designs()), seed=st.integers(0, 2**32 - 1))
def test_spread_yields_are_fractions(design, seed):
    spread = _answers(monte_carlo, design, samples=16, seed=seed)
    if spread is not None:
        for y in (spread.yield_start, spread.yield_margin, *spread.yield_by_temperature.values()):
            assert 0.0 <= y <= 1.0


@settings(SLOW, max_examples=3 * SCALE)
@given(design=near_designs())
def test_transient_answers_with_finite_numbers(design):
    run = _answers(simulate, design, cycles=MIN_CYCLES, points=100)
    if run is not None:
        _finite_json(run.model_dump(mode="json"))


# --- invariants ---------------------------------------------------------------------------


@FAST
@given(design=near_designs(), k=st.floats(1.1, 4.0))
def test_f_osc_falls_when_L_rises(design, k):
    assume(design.crystal is None)  # a crystal in place of the coil: L is not in the circuit
    a = _answers(solve, design)
    b = _answers(solve, with_param(design, "L", design.tank.L * k))
    assume(a is not None and b is not None and a.f_osc is not None and b.f_osc is not None)
    assert b.f_osc < a.f_osc


@FAST
@given(design=near_designs(), k=st.floats(1.1, 3.0))
def test_loop_gain_rises_with_rc_in_the_common_emitter_form(design, k):
    assume(design.topology.value == "common-emitter")
    a = _answers(solve, design)
    b = _answers(solve, with_param(design, "RC", design.bias.RC * k))
    assume(a is not None and b is not None and a.f_osc is not None and b.f_osc is not None)
    # both active with headroom, so neither saturation nor the Early effect mixes in
    assume(a.op.region.value == b.op.region.value == "active" and b.op.VCE > 1.0)
    assert b.gain > a.gain
