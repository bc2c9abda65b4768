"""SI prefixes and RKM codes at the edge."""

from __future__ import annotations

import math

import pytest

from ringwise.units import UnitError, format_si, parse_quantity


@pytest.mark.parametrize(
    ("text", "unit", "value"),
    [
        # RKM codes: the letter marks the decimal point (IEC 60062).
        ("2n2", "F", 2.2e-9),
        ("39k", "Ω", 39e3),
        ("1M5", "Ω", 1.5e6),
        ("4R7", "Ω", 4.7),
        ("R47", "Ω", 0.47),
        ("6K8", "Ω", 6.8e3),
        ("3u3H", "H", 3.3e-6),
        # SI prefixes (SI Brochure, 9th ed., prefixes table).
        ("10u", "H", 10e-6),
        ("2.2n", "F", 2.2e-9),
        ("2.2 nF", "F", 2.2e-9),
        ("47 uH", "H", 47e-6),
        ("10 kohm", "Ω", 10e3),
        ("10kΩ", "Ω", 10e3),
        ("1.5 MHz", "Hz", 1.5e6),
        ("1e-9", "F", 1e-9),
        ("1e3", "Ω", 1e3),
        ("12", "V", 12.0),
        (3.3e-9, "F", 3.3e-9),
        (10, "V", 10.0),
    ],
)
def test_parse(text: str | float, unit: str, value: float) -> None:
    assert parse_quantity(text, unit) == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize(
    ("text", "unit", "needle"),
    [
        ("abc", "F", "not a number"),
        ("", "F", "empty"),
        ("47uF", "H", "carries the unit 'F'"),
        ("inf", "F", "finite"),
        ("nan", "Ω", "finite"),
        ("3 V", "", "plain number"),
    ],
)
def test_refusals_say_why(text: str, unit: str, needle: str) -> None:
    with pytest.raises(UnitError, match=needle):
        parse_quantity(text, unit)


def test_booleans_are_not_numbers() -> None:
    with pytest.raises(UnitError):
        parse_quantity(True, "F")  # type: ignore[arg-type]


def test_format() -> None:
    assert format_si(2.2e-9, "F") == "2.2 nF"
    assert format_si(39e3, "Ω") == "39 kΩ"
    assert format_si(None, "F") == "—"
    assert format_si(math.inf, "F") == "—"
