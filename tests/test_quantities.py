"""Quantity fields: bounds stated with units, the value as typed, booleans refused."""

from __future__ import annotations

import pytest
from pydantic import BaseModel, ValidationError

from ringwise.errors import describe_validation_error
from ringwise.quantities import SI


class _Probe(BaseModel):
    Vcc: SI("V", ge=0.01, le=1000)
    gain: SI("", gt=1, le=20) = 3.0


def _message(**values: object) -> str:
    with pytest.raises(ValidationError) as info:
        _Probe.model_validate(values)
    [problem] = describe_validation_error(info.value)
    return problem["message"]


@pytest.mark.parametrize(
    ("value", "message"),
    [
        ("1.5k", "must be at most 1 kV, got '1.5k' = 1.5 kV"),
        (1001, "must be at most 1 kV, got 1.001 kV"),
        ("5m", "must be at least 10 mV, got '5m' = 5 mV"),
        (True, "must be a number, not true"),
        ("4,7", "'4,7' uses a comma; write 4.7 or 4R7 for a decimal"),
    ],
)
def test_messages_name_value_and_limit_with_units(value: object, message: str) -> None:
    assert _message(Vcc=value).startswith(message)


def test_a_bound_of_a_plain_number_has_no_unit() -> None:
    assert _message(Vcc=12, gain="1") == "must be above 1, got '1'"


def test_the_bound_on_the_limit_itself_is_accepted() -> None:
    # the field's own stated maximum is a valid value
    assert _Probe.model_validate({"Vcc": 1000}).Vcc == 1000.0


def test_bounds_are_in_the_json_schema() -> None:
    # pydantic writes them as ge/le behind a before-validator; the OpenAPI document renames
    # them to minimum/maximum (app/web/server.py)
    prop = _Probe.model_json_schema()["properties"]["Vcc"]
    assert (prop["ge"], prop["le"]) == (0.01, 1000)
