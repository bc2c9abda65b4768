"""One shape for every input error, shared by the CLI and the web API.

Each problem is ``{"field": "tank.C2", "message": "...", "type": "..."}``:
the dotted path of the field as it appears in the design file, a sentence
saying what is wrong and what is allowed, and pydantic's machine-readable
error type.
"""

from __future__ import annotations

from typing import Any

from pydantic import ValidationError


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
    given = error.get("input")
    if kind in _LIMIT_WORDS:
        return f"{_LIMIT_WORDS[kind].format(**ctx)}, got {given!r}"
    if kind == "missing":
        return "is required"
    if kind == "part_required":
        return f"is required by the {ctx.get('form')}"
    if kind == "extra_forbidden":
        return "is not a field of the design format"
    if kind == "value_error":
        return str(ctx.get("error", error["msg"]))
    if kind in ("float_parsing", "float_type"):
        return f"must be a number (e.g. 2.2n, 2n2, 39k), got {given!r}"
    if kind == "literal_error":
        return f"must be {ctx.get('expected')}, got {given!r}"
    if kind == "enum":
        return f"must be one of {ctx.get('expected')}, got {given!r}"
    return f"{error['msg']}, got {given!r}"


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
