"""The one place where text with SI prefixes and RKM codes meets SI base units.

Inside ringwise every quantity is a float in SI base units (ohm, farad, henry,
volt, ampere, hertz, kelvin).  Text such as ``"2n2"``, ``"39k"``, ``"1M5"``
(RKM codes, IEC 60062) or ``"2.2 nF"``, ``"47u"`` (SI prefixes) is turned into
numbers here, and numbers are turned back into short engineering text here.
Parsing is done by the ``rkm_codes`` and ``quantiphy`` libraries, not by hand.
"""

from __future__ import annotations

import math
import re

from quantiphy import InvalidNumber, Quantity
from rkm_codes import from_rkm

__all__ = ["UnitError", "format_si", "parse_quantity"]

#: An RKM code: digits, one multiplier letter standing for the decimal point,
#: digits, then an optional unit.  ``e``/``E`` are deliberately not multipliers
#: here, so that ``1e3`` stays scientific notation.
_RKM = re.compile(r"^(\d*)[pnuµmRrkKMGT]\d+[A-Za-zΩ]*$")

#: Spellings of the ohm that users type and quantiphy does not know.
_OHM_WORDS = re.compile(r"\s*(ohms?|Ohms?|OHMS?)$")


class UnitError(ValueError):
    """A text value that is not a number with an SI prefix or an RKM code."""


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
        If the text is not a number, carries the wrong unit, or is not finite.
    """
    if isinstance(value, bool):
        raise UnitError(f"{value!r} is not a number")
    if isinstance(value, int | float):
        number = float(value)
    else:
        number = _parse_text(str(value), unit)
    if not math.isfinite(number):
        raise UnitError(f"{value!r} is not a finite number")
    return number


def _parse_text(text: str, unit: str) -> float:
    stripped = _OHM_WORDS.sub("Ω", text.strip())
    if not stripped:
        raise UnitError("empty text is not a number")
    sign = -1.0 if stripped[0] == "-" else 1.0
    body = stripped[1:].strip() if stripped[0] in "+-" else stripped
    if _RKM.match(body):
        quantity = from_rkm(body if body[0].isdigit() else "0" + body)
        if quantity is None:  # pragma: no cover - the regex admits only codes it reads
            raise UnitError(f"{text!r} is not a valid RKM code")
        trailing = re.sub(r"^\d*[pnuµmRrkKMGT]\d+", "", body)
        _check_unit(text, trailing, unit)
        return sign * float(quantity)
    try:
        quantity = Quantity(stripped)
    except InvalidNumber as err:
        raise UnitError(f"{text!r} is not a number; write e.g. 2.2n, 2n2, 39k or 1e-6") from err
    _check_unit(text, quantity.units, unit)
    return float(quantity.real)


def _check_unit(text: str, given: str, expected: str) -> None:
    if not given:
        return
    if expected and given != expected:
        raise UnitError(f"{text!r} carries the unit {given!r}, this field takes {expected!r}")
    if not expected:
        raise UnitError(f"{text!r} carries the unit {given!r}, this field is a plain number")


def format_si(value: float | None, unit: str = "", digits: int = 4) -> str:
    """Short engineering text for a value in SI base units (``2.2e-9, "F"`` -> ``"2.2 nF"``)."""
    if value is None or not math.isfinite(value):
        return "—"
    return Quantity(value, unit).render(prec=digits - 1, strip_zeros=True).replace(" u", " µ")
