"""Pydantic field types for quantities: text or number in, SI float out, bounds with units.

``SI("V", ge=0.01, le=1000)`` is a float field that reads ``"12"``, ``"3V3"``,
``"500m"`` or ``12.0`` through :func:`ringwise.units.parse_quantity` and
checks the bounds itself, so that a refusal names the value as the user wrote
it and the limit with its unit (``must be at most 1 kV, got '1.5k' = 1.5 kV``)
instead of pydantic's text about a float the user never typed.  The bounds
are also given to pydantic's ``Field``, so the JSON schema (and the OpenAPI
document) states them as ``minimum``/``maximum``.  Booleans are refused: JSON
``true`` is not the number 1 here.

The error types are pydantic's own (``greater_than_equal``, ...), with the
message ready in ``msg`` and the unit and limit in ``ctx``.
"""

from __future__ import annotations

from typing import Annotated, Any

from pydantic import BeforeValidator, Field
from pydantic_core import PydanticCustomError

from ringwise.units import UnitError, format_limit, parse_quantity, shown

__all__ = ["SI", "given_text"]


def given_text(value: Any, number: float, unit: str) -> str:
    """What the user gave, as a message repeats it: the text as typed (cut) and,
    when it had a prefix or code, its value with the unit."""
    if isinstance(value, str):
        plain = format_limit(number, unit)
        return shown(value) if value.strip() == plain or not unit else f"{shown(value)} = {plain}"
    return format_limit(number, unit) if unit else f"{number:g}"


def _bounds_check(unit: str, ge: float | None, le: float | None, gt: float | None) -> Any:
    def parse(value: Any) -> Any:
        if value is None:
            return value
        if isinstance(value, bool):
            raise PydanticCustomError(
                "float_type", "must be a number, not {given}", {"given": str(value).lower()}
            )
        if not isinstance(value, int | float | str):
            return value  # pydantic's own type error names it
        try:
            number = parse_quantity(value, unit)
        except UnitError as err:
            raise PydanticCustomError("value_error", "{reason}", {"reason": str(err)}) from err
        for kind, key, limit, words, bad in (
            ("greater_than_equal", "ge", ge, "at least", ge is not None and number < ge),
            ("greater_than", "gt", gt, "above", gt is not None and number <= gt),
            ("less_than_equal", "le", le, "at most", le is not None and number > le),
        ):
            if bad and limit is not None:
                raise PydanticCustomError(
                    kind,
                    "must be {words} {limit_text}, got {given}",
                    {
                        "words": words,
                        "limit_text": format_limit(limit, unit),
                        "given": given_text(value, number, unit),
                        "unit": unit,
                        key: limit,
                    },
                )
        return number

    parse.unit = unit  # type: ignore[attr-defined]
    return parse


def SI(
    unit: str,
    *,
    ge: float | None = None,
    le: float | None = None,
    gt: float | None = None,
    description: str | None = None,
) -> Any:
    """A float field in SI base units of ``unit`` with the given bounds (see the module doc)."""
    return Annotated[
        float,
        BeforeValidator(_bounds_check(unit, ge, le, gt)),
        Field(ge=ge, le=le, gt=gt, description=description),
    ]
