"""The one place where text with SI prefixes and RKM codes meets SI base units.

Inside ringwise every quantity is a float in SI base units (ohm, farad, henry,
volt, ampere, hertz, kelvin).  Text such as ``"2n2"``, ``"39k"``, ``"1M5"``
(RKM codes, IEC 60062) or ``"2.2 nF"``, ``"47u"`` (SI prefixes) is turned into
numbers here, and numbers are turned back into short engineering text here
(``quantiphy`` formats; ``rkm_codes`` reads the RKM codes).

Parsing is bounded and linear in its input, whatever arrives: a text longer
than :data:`MAX_TEXT` characters is refused before any regular expression
sees it, the expressions used have no nested or overlapping repetition (each
character is looked at a fixed number of times), and a whole number of more
than :data:`MAX_DIGITS` digits is refused before it is converted.  Every
refusal says what was typed (cut to :data:`SHOWN_TEXT` characters), why, and
what to write instead: a decimal comma (``4,7n``) is refused with both
accepted forms (``4.7n`` or ``4n7``), never read as ``47n``; digits other than
0-9 (Arabic-Indic, full-width, superscripts) are refused everywhere, in
quantities and in whole numbers alike.
"""

from __future__ import annotations

import math
import re
from typing import Final

from quantiphy import Quantity
from rkm_codes import from_rkm

__all__ = [
    "MAX_DIGITS",
    "MAX_TEXT",
    "UnitError",
    "format_limit",
    "format_si",
    "parse_quantity",
    "parse_whole",
    "shown",
]

#: Longest text a quantity may be, characters.  ``-1.234567890123e-12 kΩ`` is
#: 22; 64 leaves room for any honest spelling while bounding the work per
#: field (common practice, no source).
MAX_TEXT: Final = 64
#: Most decimal digits of a number given as a JSON number or a whole-number
#: text.  A double has at most 17 significant digits and ±308 as exponent, so
#: nothing longer than a few hundred digits can be a meaningful value; the
#: limit also keeps Python's int-to-float conversion (quadratic in the digits)
#: short.  Python's own guard (``sys.get_int_max_str_digits``) is 4300.
MAX_DIGITS: Final = 320
#: Characters of a refused text repeated in the message (the rest is cut).
SHOWN_TEXT: Final = 24

#: SI prefixes read after a number (SI Brochure, 9th ed., table 7; ``K`` for
#: kilo and ``u``/Greek ``μ`` for micro as commonly typed).  ``R``/``r``/``Q``/
#: ``q`` (ronna, ronto, quetta, quecto) are left out: ``R`` is the RKM decimal
#: point for resistors.
#: Each maps to its power of ten, added to the number's own exponent so that
#: ``2.2n`` is read as exactly the double nearest 2.2e-9.
PREFIXES: Final = {
    "Y": 24, "Z": 21, "E": 18, "P": 15, "T": 12, "G": 9, "M": 6, "k": 3, "K": 3,
    "m": -3, "u": -6, "µ": -6, "μ": -6, "n": -9, "p": -12, "f": -15, "a": -18,
    "z": -21, "y": -24,
}  # fmt: skip

#: An RKM code (IEC 60062): digits, one multiplier letter standing for the
#: decimal point, digits, then an optional unit.  ``e``/``E`` are deliberately
#: not multipliers here, so that ``1e3`` stays scientific notation.  Linear:
#: the three parts are told apart by their character classes.
_RKM: Final = re.compile(r"([0-9]*)([pnuµμmRrkKMGT])([0-9]+)([^0-9]*)", re.ASCII)
#: A decimal number with an optional exponent, then whatever follows (prefix
#: and unit).  Linear: each part has one way to match.
_NUMBER: Final = re.compile(
    r"([0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE]([+-]?[0-9]+))?[ \t]*([^0-9 \t]*)", re.ASCII
)
#: Spellings of the ohm that users type (compared case-blind), read as ``Ω``.
_OHM_WORDS: Final = ("ohms", "ohm")
#: Words that are not numbers but that float() would read.
_NOT_FINITE: Final = frozenset({"inf", "infinity", "nan"})
#: Largest exponent written in a quantity; beyond it the value is not finite
#: or not distinguishable from zero in a double (IEEE 754: about ±308).
MAX_EXPONENT: Final = 400
#: The mega spelling of circuit-listing formats, answered with the SI one.
_MEGA_WORDS: Final = ("meg", "Meg", "MEG")

HINT: Final = "write e.g. 2.2n, 2n2, 39k or 1e-6"


class UnitError(ValueError):
    """A text value that is not a number with an SI prefix or an RKM code."""


def shown(text: str) -> str:
    """``text`` quoted for a message, cut to :data:`SHOWN_TEXT` characters with its length."""
    if len(text) <= SHOWN_TEXT:
        return repr(text)
    return f"{text[:SHOWN_TEXT]!r}… ({len(text)} characters)"


def parse_quantity(value: float | int | str, unit: str = "") -> float:
    """Return ``value`` in SI base units.

    Parameters
    ----------
    value
        A number (taken as already in base units) or text: ``"2n2"``,
        ``"39k"``, ``"4R7"`` (RKM, IEC 60062), ``"2.2n"``, ``"2.2 nF"``,
        ``"1e-9"``, ``"47 uH"``, ``"10 kohm"``.
    unit
        The unit the field expects (``"F"``, ``"H"``, ``"Ω"``, ``"V"``, ...).
        Text carrying a different unit is refused, so ``"47uF"`` typed into
        an inductance is caught rather than read as 47 µH.

    Raises
    ------
    UnitError
        If the value is a boolean, text over :data:`MAX_TEXT` characters, a
        whole number over :data:`MAX_DIGITS` digits, not a number, carries the
        wrong unit, or is not finite.
    """
    if isinstance(value, bool):
        raise UnitError(f"{str(value).lower()} is not a number; write the value, e.g. 2.2n")
    if isinstance(value, int):
        _check_digits(value)
        number = float(value)
    elif isinstance(value, float):
        number = value
    else:
        number = _parse_text(str(value), unit)
    if not math.isfinite(number):
        raise UnitError(f"{shown(str(value))} is not a finite number")
    return number


def parse_whole(text: str) -> int:
    """A whole number typed as text (``"2000"``, ``" -3 "``), digits 0-9 only.

    Raises
    ------
    UnitError
        If the text is longer than :data:`MAX_TEXT` or is not a whole number.
    """
    _check_text(text)
    body = text.strip()
    if not re.fullmatch(r"[+-]?[0-9]+", body, re.ASCII):
        raise UnitError(f"{shown(text)} is not a whole number (digits 0-9, e.g. 2000)")
    return int(body)


def _check_digits(value: int) -> None:
    # bit_length is O(1); 3.33 bits per decimal digit
    if value.bit_length() > MAX_DIGITS * math.log2(10):
        raise UnitError(
            f"a number of about {int(value.bit_length() / math.log2(10))} digits is too long; "
            f"a number has at most {MAX_DIGITS} digits"
        )


def _check_text(text: str) -> None:
    if len(text) > MAX_TEXT:
        raise UnitError(
            f"{shown(text)} is too long: a value is at most {MAX_TEXT} characters; {HINT}"
        )
    if any(c.isnumeric() and not c.isascii() for c in text):
        raise UnitError(f"{shown(text)} has digits other than 0-9; write the digits as 0-9")


def _parse_text(text: str, unit: str) -> float:
    _check_text(text)
    body = text.strip()
    if not body:
        raise UnitError("empty text is not a number")
    lower = body.lower()
    for word in _OHM_WORDS:
        if lower.endswith(word):
            body = body[: -len(word)].rstrip() + "Ω"
            break
    sign = -1.0 if body[0] == "-" else 1.0
    if body[0] in "+-":
        body = body[1:].lstrip()
    if "," in body:
        raise UnitError(_comma_message(text, body))
    if body.lower().lstrip("+-") in _NOT_FINITE:
        raise UnitError(f"{shown(text)} is not a finite number")
    rkm = _RKM.fullmatch(body)
    if rkm is not None:
        quantity = from_rkm(body if body[0].isdigit() else "0" + body)
        if quantity is None:  # pragma: no cover - the regex admits only codes it reads
            raise UnitError(f"{shown(text)} is not a valid RKM code; {HINT}")
        _check_unit(text, rkm.group(4), unit)
        return sign * float(quantity)
    number = _NUMBER.fullmatch(body)
    if number is None:
        raise UnitError(f"{shown(text)} is not a number; {HINT}")
    mantissa, exponent, rest = number.groups()
    if exponent is not None and abs(int(exponent)) > MAX_EXPONENT:
        raise UnitError(f"{shown(text)} is not a finite number")
    power, given = _prefix_and_unit(text, rest, unit)
    _check_unit(text, given, unit)
    return sign * float(f"{mantissa}e{int(exponent or 0) + power}")


def _prefix_and_unit(text: str, rest: str, unit: str) -> tuple[int, str]:
    """The prefix's power of ten and the unit after the number (``"nF"`` -> -9, ``"F"``)."""
    if rest[:3] in _MEGA_WORDS:
        raise UnitError(
            f"{shown(text)}: {rest[:3]!r} is not an SI prefix; write M for mega "
            f"(e.g. 1M{unit}) and m for milli"
        )
    if rest and rest != unit and rest[0] in PREFIXES:
        return PREFIXES[rest[0]], rest[1:]
    return 0, rest


def _comma_message(text: str, body: str) -> str:
    """Why a comma is refused, with the two spellings that are read."""
    head, _, tail = body.partition(",")
    m = re.fullmatch(r"([0-9]+)", head, re.ASCII)
    t = re.fullmatch(r"([0-9]+)[ \t]*([^0-9 \t]?)([^0-9]*)", tail, re.ASCII)
    if m and t:
        digits, letter, unit = t.groups()
        if letter and (letter in PREFIXES or letter in "Rr"):
            return (
                f"{shown(text)} uses a decimal comma; "
                f"write {head}.{digits}{letter}{unit} or {head}{letter}{digits}{unit}"
            )
        if not letter:
            return (
                f"{shown(text)} uses a comma; write {head}.{digits} or {head}R{digits} "
                "for a decimal (commas are not read, neither as decimal point nor as "
                "thousands separator)"
            )
    return f"{shown(text)}: commas are not read in numbers (no decimal comma, no thousands); {HINT}"


def _check_unit(text: str, given: str, expected: str) -> None:
    if not given:
        return
    if expected and given != expected:
        raise UnitError(f"{shown(text)} carries the unit {given!r}, this field takes {expected!r}")
    if not expected:
        raise UnitError(f"{shown(text)} carries the unit {given!r}, this field is a plain number")


#: The scale factors :func:`format_si` writes, by power of ten (quantiphy's
#: default output set, ``u`` for micro as it writes it).
_OUTPUT_PREFIXES: Final = {
    12: "T", 9: "G", 6: "M", 3: "k", 0: "", -3: "m", -6: "u", -9: "n", -12: "p", -15: "f",
    -18: "a",
}  # fmt: skip


def format_si(value: float | None, unit: str = "", digits: int = 4) -> str:
    """Short engineering text for a value in SI base units (``2.2e-9, "F"`` -> ``"2.2 nF"``).

    Written as quantiphy renders it (``prec=digits - 1``, zeros stripped;
    ``tests/test_units.py`` compares the two), by string formatting where
    that is plain — a scale factor of quantiphy's output set and a unit
    without its tight-unit rules — and by quantiphy itself otherwise: the
    sheet formats a few numbers per analysis, and quantiphy takes some 60 µs
    for each.
    """
    if value is None or not math.isfinite(value):
        return "—"
    text = _plain_si(float(value), unit, digits)
    if text is None:
        text = Quantity(value, unit).render(prec=digits - 1, strip_zeros=True)
    return text.replace(" u", " µ")


def _plain_si(value: float, unit: str, digits: int) -> str | None:
    """:func:`format_si`'s text before the micro sign, ``None`` where quantiphy must write it."""
    if digits < 1 or unit[:1] in _TIGHT or (unit and not unit.isprintable()):
        return None
    if value == 0.0:
        return None  # its sign is quantiphy's affair
    mantissa, _, exp = f"{abs(value):.{digits - 1}e}".partition("e")
    exponent = int(exp)
    power = exponent - exponent % 3
    figures = mantissa.replace(".", "")
    point = 1 + exponent - power
    if len(figures) < point:
        figures += "0" * (point - len(figures))
    whole, fraction = figures[:point], figures[point:].rstrip("0")
    number = ("-" if value < 0 else "") + (f"{whole}.{fraction}" if fraction else whole)
    prefix = _OUTPUT_PREFIXES.get(power)
    if prefix is None:
        return None
    if not unit:
        return number + prefix
    return f"{number} {prefix}{unit}"


#: Units quantiphy writes without the space (its ``tight_units``).
_TIGHT: Final = frozenset(Quantity.get_pref("tight_units"))


def format_limit(value: float, unit: str) -> str:
    """A bound as a message writes it: ``"10 mV"``, ``"1 kV"``; ``"0.5"`` for a plain number."""
    if not unit or unit == "°C":
        return f"{value:g} {unit}".rstrip()
    return format_si(value, unit)
