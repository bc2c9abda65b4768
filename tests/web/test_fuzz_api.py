"""Schemathesis against the app's own OpenAPI schema: every operation, no 500s, schema-true answers.

The normal suite runs a few generated examples per operation; ``make fuzz``
sets ``RINGWISE_FUZZ_EXAMPLES`` for a larger budget and
``RINGWISE_FUZZ_COVERAGE=1`` for Schemathesis' boundary cases of every
field.  The checks are Schemathesis' defaults (no server error; status
code, content type, headers and body of every answer conform to the
schema; 405 answers carry ``Allow``), less two that test the schema's
*strictness* rather than the server:

- ``positive_data_acceptance``: the schema admits any text for a quantity
  (``"2n2"`` is parsed by the core), so schema-valid input may still be out
  of the physical bounds and is rightly refused with 422;
- ``negative_data_rejection``: pydantic's lax mode accepts ``"5"`` for an
  integer and ``false`` for a number; that coercion is harmless and the
  answer is still checked for its shape.

Every request must answer within :data:`REQUEST_LIMIT_S` (5 s), or the test
fails: a hang detector, not a timing test.  Hypothesis adds the class of input
that once froze the server: very long digit strings (as quantity text, form
text, link query and raw JSON numbers) and deep nesting.
"""

from __future__ import annotations

import json
import os
import sys
import threading
import time
from typing import Any

import pytest
import schemathesis
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from schemathesis.config import SchemathesisConfig
from schemathesis.specs.openapi.checks import (
    negative_data_rejection,
    positive_data_acceptance,
)

from ringwise.analysis.spread import MAX_SAMPLES
from ringwise.analysis.threshold import MAX_SWEEP_POINTS
from ringwise.analysis.transient import MAX_CYCLES, MAX_POINTS, MIN_CYCLES
from ringwise.web.paths import SAMPLES_DIR
from ringwise.web.server import create_app

#: Generated examples per operation (``make fuzz`` raises it).
EXAMPLES = int(os.environ.get("RINGWISE_FUZZ_EXAMPLES", "12"))
#: The coverage phase adds every boundary of every field (about 400 cases for
#: each operation that takes a design, some 40 s in all): under ``make fuzz``.
COVERAGE = os.environ.get("RINGWISE_FUZZ_COVERAGE") == "1"
#: Within their caps, sweeps, transients and Monte Carlo runs are clamped to this much work, so a
#: fuzz run spends its time on variety, not on solving a 1000-point sweep
#: again; values beyond a cap are left as generated, so the caps are fuzzed too.
FUZZ_SWEEP_POINTS = 8
FUZZ_CYCLES = MIN_CYCLES
FUZZ_POINTS = 200
FUZZ_SAMPLES = 16

#: Longest any one request may take before the test fails: a hang detector, not a
#: timing test (the answers here take milliseconds to a second or two; a quadratic
#: parse of 60 000 digits once took about 40 minutes).
REQUEST_LIMIT_S = float(os.environ.get("RINGWISE_FUZZ_LIMIT_S", "5"))


def within_limit(call: Any, *args: Any, limit: float = REQUEST_LIMIT_S, **kwargs: Any) -> Any:
    """``call(*args, **kwargs)`` in a thread of its own; the test fails when it has
    not returned within ``limit`` s (the thread is left behind, a daemon)."""
    out: dict[str, Any] = {}

    def target() -> None:
        try:
            out["value"] = call(*args, **kwargs)
        except BaseException as err:  # raised again in the test's own thread
            out["error"] = err

    thread = threading.Thread(target=target, daemon=True, name="fuzz-request")
    thread.start()
    thread.join(limit)
    if thread.is_alive():
        pytest.fail(f"no answer within {limit:g} s: the server hangs on this input")
    if "error" in out:
        raise out["error"]
    return out.get("value")


schema = schemathesis.openapi.from_asgi(
    "/openapi.json",
    # Schemathesis' in-process client sends Host: testserver
    create_app(allow_hosts=["testserver"]),
    config=SchemathesisConfig.from_dict({"phases": {"coverage": {"enabled": COVERAGE}}}),
)


def _clamp(body: Any) -> Any:
    if not isinstance(body, dict):
        return body
    points = body.get("points")
    if _within(body.get("samples"), 1, MAX_SAMPLES):
        body["samples"] = min(int(body["samples"]), FUZZ_SAMPLES)
    if "param" in body and _within(points, 2, MAX_SWEEP_POINTS):
        body["points"] = min(int(points), FUZZ_SWEEP_POINTS)
    if "cycles" in body or ("points" in body and "param" not in body):
        if _within(body.get("cycles"), MIN_CYCLES, MAX_CYCLES):
            body["cycles"] = FUZZ_CYCLES
        if _within(points, 100, MAX_POINTS):
            body["points"] = FUZZ_POINTS
    return body


def _within(value: Any, low: int, high: int) -> bool:
    """Whether ``value`` is a whole number in [low, high] (``16921.0`` counts: pydantic's
    lax mode takes it for an int)."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return False
    return float(value).is_integer() and low <= value <= high


def _no_subnormals(value: Any) -> Any:
    """The body with subnormal floats (0 < |x| < 2.2e-308) set to 0, which bounds refuse."""
    if isinstance(value, dict):
        return {k: _no_subnormals(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_no_subnormals(v) for v in value]
    if isinstance(value, float) and 0 < abs(value) < sys.float_info.min:
        return 0.0
    return value


@schema.parametrize()
@settings(
    max_examples=EXAMPLES,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
    database=None,
)
def test_every_operation_answers_by_its_schema(case):
    # Done here, not in a hook, so it applies to the schema's own examples too.
    # A subnormal f_measured makes the reconciliation's least squares warn (numpy
    # RuntimeWarning, an exception under this suite's filterwarnings=error): reported,
    # pinned by test_subnormal_f_measured_is_refused.
    case.body = _clamp(_no_subnormals(case.body))
    if isinstance(case.query, dict):  # GET /api/csv/spread takes samples in the query
        case.query = _clamp(dict(case.query))
    within_limit(
        case.call_and_validate,
        excluded_checks=[positive_data_acceptance, negative_data_rejection],
    )


@pytest.mark.parametrize("preset", [{}, [1]])
def test_non_text_preset_is_422(client, sample, preset):
    # found by this fuzzing (it was a TypeError, a 500) and fixed in the core
    sample["device"]["preset"] = preset
    assert client.post("/api/analyze", json=sample).status_code == 422


def test_subnormal_f_measured_is_refused(client, sample):
    r = client.post("/api/reconcile", json={"design": sample, "f_measured": 5e-324})
    assert r.status_code == 422
    assert r.json()["problems"][0]["field"] == "f_measured"


# ---- the class of inputs that once froze the server --------------------------------
#
# Long digit strings (a quadratic parse of 4 000 digits held the interpreter for
# 12 s) and deep nesting (a recursive walk), in every place a request carries
# them: a quantity's text in the design, the sheet's form texts, the share link's
# query, a raw JSON number, the body's own nesting.  Each must be refused (4xx,
# never 5xx) within REQUEST_LIMIT_S: a hang detector, not a timing test.

#: Digits in a generated number: from past the quantity's text cap (MAX_TEXT) to
#: about what the 64 KiB body cap allows.
DIGITS = st.integers(min_value=70, max_value=60_000)
#: Nesting depths: from just past the cap (MAX_DEPTH) to what the body cap allows.
DEPTHS = st.integers(min_value=33, max_value=30_000)
_HYPOTHESIS_EXAMPLES = max(5, EXAMPLES // 2)


def _long_number(n: int, digit: str, tail: str) -> str:
    return digit * n + tail


LONG_TEXTS = st.builds(
    _long_number, DIGITS, st.sampled_from("197"), st.sampled_from(["", "n", "p", ".5", "e3", "k7"])
)


def _answered(response: Any) -> None:
    assert 400 <= response.status_code < 500, (response.status_code, response.text[:300])
    body = response.json()
    assert set(body) == {"status", "error", "message", "problems"}


@settings(max_examples=_HYPOTHESIS_EXAMPLES, deadline=None, database=None)
@given(text=LONG_TEXTS, where=st.sampled_from(["design", "form", "link"]))
def test_long_digit_strings_are_refused_in_time(client, text, where):
    sample = json.loads((SAMPLES_DIR / "clapp-clock-1M.json").read_text(encoding="utf-8"))
    if where == "design":
        sample["tank"]["C2"] = text
        r = within_limit(client.post, "/api/analyze", json=sample)
    elif where == "form":
        r = within_limit(client.post, "/api/sheet/spread", json={"fields": {"C2": text}})
    else:
        r = within_limit(client.get, f"/api/export?design=clapp-clock-1M&C2={text}")
    _answered(r)


@settings(max_examples=_HYPOTHESIS_EXAMPLES, deadline=None, database=None)
@given(n=DIGITS, path=st.sampled_from(["/api/analyze", "/api/spread", "/api/simulate"]))
def test_long_json_numbers_are_refused_in_time(client, n, path):
    sample = json.loads((SAMPLES_DIR / "clapp-clock-1M.json").read_text(encoding="utf-8"))
    doc = sample if path == "/api/analyze" else {"design": sample}
    body = json.dumps(doc).replace('"C2": "4n7"', '"C2": 9' + "9" * (n - 1))
    assert "9" * (n - 1) in body
    r = within_limit(client.post, path, content=body, headers={"content-type": "application/json"})
    _answered(r)


@settings(max_examples=_HYPOTHESIS_EXAMPLES, deadline=None, database=None)
@given(depth=DEPTHS, shape=st.sampled_from(["array", "object", "inside"]))
def test_deep_nesting_is_refused_in_time(client, depth, shape):
    if shape == "array":
        body = "[" * depth + "]" * depth
    elif shape == "object":
        body = '{"a":' * depth + "1" + "}" * depth
    else:
        body = '{"design": ' + "[" * depth + "]" * depth + "}"
    r = within_limit(
        client.post,
        "/api/spread",
        content=body,
        headers={"content-type": "application/json"},
    )
    _answered(r)


def test_the_time_limit_catches_a_hang():
    # the detector itself: a call that does not return in time fails the test
    with pytest.raises(pytest.fail.Exception, match="no answer within"):
        within_limit(time.sleep, 2.0, limit=0.1)
