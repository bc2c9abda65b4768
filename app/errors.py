"""One shape for every input error, shared by the CLI and the web API.

Each problem is ``{"field": "tank.C2", "message": "...", "type": "..."}``:
the dotted path of the field as it appears in the design file, a sentence
saying what is wrong and what is allowed, and pydantic's machine-readable
error type.
"""

from __future__ import annotations

from typing import Any

from pydantic import ValidationError

from ringwise.units import SHOWN_TEXT, shown

#: Whole numbers longer than this (in bits, about 30 digits) are described, not printed.
MAX_SHOWN_BITS = 100
#: log10(2): decimal digits per bit.
LOG10_2 = 0.30103


class DesignError(ValueError):
    """A design (or a request about one) that the analyses cannot serve as asked.

    The web layer maps every subclass to a 422 with the message; the CLI to
    exit status 2.
    """


_LIMIT_WORDS = {
    "greater_than": "must be greater than {gt:g}",
    "greater_than_equal": "must be at least {ge:g}",
    "less_than": "must be less than {lt:g}",
    "less_than_equal": "must be at most {le:g}",
}


def _message(error: dict[str, Any]) -> str:
    kind = error["type"]
    ctx = error.get("ctx") or {}
    given = _given(error.get("input"))
    if kind in _LIMIT_WORDS and "limit_text" in ctx:
        return str(error["msg"])  # ringwise.quantities: the value as typed, the limit with its unit
    if kind in _LIMIT_WORDS:
        return f"{_LIMIT_WORDS[kind].format(**ctx)}, got {given}"
    if kind == "missing":
        return "is required"
    if kind == "part_required":
        return f"is required by the {ctx.get('form')}"
    if kind == "coil_required":
        return "is required without a crystal (the coil sets the tank)"
    if kind == "extra_forbidden":
        return "is not a field of the design format"
    if kind == "value_error":
        return str(ctx.get("error", error["msg"]))
    if kind in ("float_parsing", "float_type"):
        if "given" in ctx:
            return str(error["msg"])
        return f"must be a number (e.g. 2.2n, 2n2, 39k), got {given}"
    if kind == "literal_error":
        return f"must be {ctx.get('expected')}, got {given}"
    if kind == "enum":
        return f"must be one of {ctx.get('expected')}, got {given}"
    return f"{error['msg']}, got {given}"


def _given(value: Any) -> str:
    """A value as a message repeats it: JSON-like, cut to a readable length."""
    if isinstance(value, bool):
        return str(value).lower()
    if value is None:
        return "null"
    if isinstance(value, int) and value.bit_length() > MAX_SHOWN_BITS:
        return f"a number of about {int(value.bit_length() * LOG10_2)} digits"
    if isinstance(value, str):
        return shown(value)
    text = str(value)
    return f"{text[:SHOWN_TEXT]}… ({len(text)} characters)" if len(text) > SHOWN_TEXT else text


def describe_validation_error(err: ValidationError, prefix: tuple[str, ...] = ()) -> list[dict]:
    """Field-named, readable problems from a pydantic ``ValidationError``."""
    problems = []
    for error in err.errors(include_url=False):
        loc = [str(p) for p in (*prefix, *error["loc"]) if not str(p).startswith("function-")]
        problems.append(
            {
                "field": ".".join(loc) or "design",
                "message": _message(error),
                "type": error["type"],
            }
        )
    return problems


def domain_message(err: Exception) -> str:
    """One line for an error the core raised while analysing a valid design.

    A pydantic ``ValidationError`` there means a value the analysis derived
    (a step of a difference, a trial of a search) crossed a field's bound:
    it is told as such, in our words, never as pydantic's multi-line text.
    """
    if isinstance(err, ValidationError):
        problems = describe_validation_error(err)
        first = problems[0] if problems else {"field": "design", "message": "is not valid"}
        name = first["field"].rsplit(".", 1)[-1]
        return (
            f"a value the analysis derived from this design is out of bounds: {name} "
            f"{first['message']}; move {name} away from its limit"
        )
    return str(err) or type(err).__name__
