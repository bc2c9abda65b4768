"""SI prefixes and RKM codes at the edge."""

from __future__ import annotations

import math
import re

import pytest

from ringwise.units import (
    MAX_DIGITS,
    MAX_TEXT,
    UnitError,
    format_si,
    parse_quantity,
    parse_whole,
)


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


def test_format_is_quantiphys() -> None:
    """format_si writes what quantiphy renders (reference library: ``quantiphy``,
    ``render(prec=digits - 1, strip_zeros=True)``, micro as µ), rounding edges,
    every scale factor, beyond them and tight units included."""
    import random

    from quantiphy import Quantity

    rng = random.Random(7)
    values = [0.0, -0.0, 999.95, 999.949999, 999.96, 9.9995, 99.995, 1e15, 5e-324]
    for e in range(-25, 20):
        for m in (1.0, 9.9995, 9.99949, 9.9996, 1.00005, 5.0005, 2.5, 3.14159):
            values += [m * 10.0**e, -m * 10.0**e]
    for _ in range(1500):
        values.append(rng.choice((1, -1)) * 10 ** rng.uniform(-22, 18))
        values.append(round(rng.uniform(0, 1000), rng.randint(0, 6)) * 10.0 ** rng.randint(-20, 15))
    for value in values:
        for unit in ("", "F", "Ω", "°C"):
            for digits in (1, 3, 4, 6):
                expected = Quantity(value, unit).render(prec=digits - 1, strip_zeros=True)
                assert format_si(value, unit, digits) == expected.replace(" u", " µ"), value


@pytest.mark.parametrize(
    ("text", "unit", "needle"),
    [
        # a decimal comma is never read as a thousands separator (x10) nor dropped
        ("4,7n", "F", "write 4.7n or 4n7"),
        ("4,7 nF", "F", "write 4.7nF or 4n7F"),
        ("1,5k", "Ω", "write 1.5k or 1k5"),
        ("1,5", "", "write 1.5 or 1R5"),
        ("1,000,000", "Ω", "commas are not read"),
        # the mega of circuit listings is not an SI prefix
        ("1Meg", "Ω", "'Meg' is not an SI prefix; write M for mega"),
        # digits other than 0-9 are refused in every quantity (Arabic-Indic, full-width)
        ("\u0664\u0667n", "F", "digits other than 0-9"),
        ("\uff14\uff17n", "F", "digits other than 0-9"),
        ("1e999", "F", "finite"),
    ],
)
def test_refusals_name_what_to_write(text: str, unit: str, needle: str) -> None:
    with pytest.raises(UnitError, match=re.escape(needle)):
        parse_quantity(text, unit)


def test_a_long_text_is_refused_before_any_pattern_runs() -> None:
    # 4000 nines took seconds in a backtracking parser; the length cap answers at once
    with pytest.raises(UnitError, match=f"at most {MAX_TEXT} characters") as info:
        parse_quantity("9" * 4000, "H")
    assert "(4000 characters)" in str(info.value)
    assert len(str(info.value)) < 200  # the text is cut in the message


def test_numbers_beyond_the_digit_cap_are_refused_unconverted() -> None:
    assert parse_quantity(10**300, "") == 1e300
    with pytest.raises(UnitError, match=f"at most {MAX_DIGITS} digits"):
        parse_quantity(10**400, "")


def test_prefixes_add_to_the_exponent_exactly() -> None:
    # 2.2n is the double nearest 2.2e-9, not 2.2 * 1e-9 (which is 2.2000000000000003e-09)
    assert parse_quantity("2.2n", "F") == 2.2e-9
    assert parse_quantity("2.2 nF", "F") == 2.2e-9
    assert parse_quantity("25 °C", "°C") == 25.0


@pytest.mark.parametrize(("text", "value"), [("2000", 2000), (" -3 ", -3), ("+7", 7)])
def test_whole_numbers(text: str, value: int) -> None:
    assert parse_whole(text) == value


@pytest.mark.parametrize("text", ["2e3", "1_000", "\u0663", "12.0", "", "9" * 100])
def test_whole_numbers_refused(text: str) -> None:
    with pytest.raises(UnitError):
        parse_whole(text)
