"""Bill of materials: every part of a design with its standard value and its stress.

For each resistor, capacitor and the coil the design uses: the value as the
file writes it, the nearest IEC 60063 value (and the coarsest series that
holds it, or "not standard"), its tolerance and dielectric class, and what
the part sees in the running oscillator: the peak voltage across it and the
power it dissipates, from the periodic steady state
(:func:`~ringwise.analysis.periodic.steady_state`, the whole waveform).  A
design without a steady orbit (it does not start, or no orbit was found)
shows what the DC operating point alone puts on each part: V_pk = |V_DC|,
P_R = V_DC²/R, P_L = 0.  Voltages come from the one circuit model: the
element's nodes in the netlist and the orbit's (or the DC point's) solution
vectors.  A note marks a
capacitor over :data:`~ringwise.analysis.stability.RATING_FRACTION` of its
voltage rating and a resistor over its assumed power rating.
"""

from __future__ import annotations

import math
from typing import Any, Final

from pydantic import BaseModel, Field

from ringwise.analysis.operating import Solved, solve
from ringwise.analysis.periodic import steady_state
from ringwise.analysis.stability import RATING_FRACTION
from ringwise.circuit.netlist import Capacitor, Inductor, Resistor
from ringwise.circuit.topologies import (
    CHOKE,
    VARACTOR_COUPLING,
    VARACTOR_FEED,
    VARACTOR_RETURN,
)
from ringwise.design import CAPACITOR_PARTS, PARAMETERS, Design, get_param
from ringwise.preferred import (
    CAPACITORS,
    INDUCTOR_SERIES_LIMIT,
    INDUCTORS,
    RESISTORS,
    nearest,
    series_of,
)
from ringwise.units import format_si

#: Power rating assumed for a resistor, W: the common small through-hole or
#: 1206 part (common practice, no source); the design file states none.
RESISTOR_POWER_RATING: Final = 0.25
#: Series a non-standard value is rounded to for the suggestion: E24 for
#: resistors and capacitors, E12 for coils (as ringwise.preferred snaps them).
SUGGESTED_SERIES: Final = {"R": "E24", "C": "E24", "L": INDUCTOR_SERIES_LIMIT}
DIELECTRIC_CLASS: Final = {"C0G": "class 1 (C0G)", "X7R": "class 2 (X7R)"}
UNITS: Final = {"R": "Ω", "C": "F", "L": "H"}
#: The coils listed: the tank's and the collector feed's RF choke.
COILS: Final = (*INDUCTORS, "L_ch")
#: Design parameter -> element name in the netlist, where they differ.
ELEMENT: Final = {"L_ch": CHOKE}
KINDS: Final = {"R": "resistor", "C": "capacitor", "L": "inductor"}
#: The varactor's passive parts: reference -> (design parameter, letter).  The anode's
#: DC return is a resistor of R_tune's value (``topologies.VARACTOR_RETURN``).
VARACTOR_PARTS: Final = {
    VARACTOR_FEED: (VARACTOR_FEED, "R"),
    VARACTOR_RETURN: (VARACTOR_FEED, "R"),
    VARACTOR_COUPLING: (VARACTOR_COUPLING, "C"),
}
LETTERS: Final = {kind: letter for letter, kind in KINDS.items()}


class BomLine(BaseModel):
    reference: str = Field(description="Part name in the design, e.g. RC, C2, L")
    kind: str = Field(description="resistor, capacitor or inductor")
    written: str = Field(description="Value as the design file writes it")
    value: float = Field(description="Value, SI units (Ω, F, H)")
    standard_value: float = Field(description="Nearest IEC 60063 value, SI units")
    series: str | None = Field(description="Coarsest E-series holding the value; None if none")
    tolerance: float = Field(description="Tolerance (fraction) the spread uses")
    dielectric: str | None = Field(description="Dielectric class of a capacitor")
    V_peak: float | None = Field(description="Peak voltage across the part, V")
    P: float | None = Field(description="Power dissipated in the part, W")
    stress_from: str = Field(description="steady state, or the DC operating point without one")
    note: str = Field(description="Where a rating is exceeded or the value is not standard")

    def table_row(self) -> list[str]:
        unit = UNITS[LETTERS[self.kind]]
        standard = (
            f"{self.series}"
            if self.series
            else f"{format_si(self.standard_value, unit)} (nearest {self._suggested})"
        )
        return [
            self.reference,
            self.written,
            standard,
            f"{100 * self.tolerance:g} %",
            self.dielectric or "",
            format_si(self.V_peak, "V"),
            format_si(self.P, "W"),
            self.note,
        ]

    @property
    def _suggested(self) -> str:
        return SUGGESTED_SERIES[LETTERS[self.kind]]


def _written(document: Any, part: str, value: float, unit: str) -> str:
    section = PARAMETERS.get(part)
    raw = document.get(section, {}).get(part) if isinstance(document, dict) else None
    if isinstance(raw, dict):
        raw = None
    if isinstance(raw, str):
        return raw
    return (
        format_si(value, unit)
        if raw is None
        else f"{raw:g}"
        if isinstance(raw, float)
        else str(raw)
    )


def _stresses(design: Design) -> tuple[dict[str, tuple[float, float]], str]:
    """(V_peak, P) of every two-terminal element by name, and where they come from."""
    solved = solve(design)
    steady = steady_state(solved)
    if steady.parts:
        return {p.part: (p.V_peak, p.P) for p in steady.parts}, "steady state"
    return _dc_stresses(solved), "DC operating point (no steady oscillation)"


def _dc_stresses(solved: Solved) -> dict[str, tuple[float, float]]:
    """(V_peak, P) of each element at the DC operating point alone."""
    x_dc = solved.op.x
    lay = solved.system.layout
    out = {}
    for el in solved.netlist:
        if not isinstance(el, Resistor | Capacitor | Inductor):
            continue
        V_dc = abs(float(lay.v(x_dc, el.a)) - float(lay.v(x_dc, el.b)))
        P = V_dc**2 / el.R if isinstance(el, Resistor) and math.isfinite(el.R) else 0.0
        out[el.name] = (V_dc, P)
    return out


def bill_of_materials(design: Design, document: Any = None) -> list[BomLine]:
    """Every resistor, capacitor and the coil of ``design``; ``document`` is the file's
    JSON (for the values as written)."""
    stress, source = _stresses(design)
    unused = design.unused_parts()
    tol = design.tolerances
    lines = []
    parts = [
        (part, part, "L" if part in COILS else "C" if part in CAPACITORS else "R")
        for part in (*RESISTORS, *CAPACITORS, *COILS)
    ]
    if design.varactor is not None:
        parts += [(ref, param, letter) for ref, (param, letter) in VARACTOR_PARTS.items()]
    for part, param, letter in parts:
        value = get_param(design, param)
        if value is None or part in unused:
            continue
        series = series_of(value)
        if letter == "L" and series not in (None, "E6", "E12"):
            series = None  # coils are stocked in E12 at most
        standard = value if series else nearest(value, SUGGESTED_SERIES[letter])
        V_peak, P = stress.get(ELEMENT.get(part, part), (None, None))
        notes = []
        if series is None:
            notes.append("not a standard value")
        if letter == "C" and V_peak is not None:
            rating = design.ratings.V_cap
            if V_peak > RATING_FRACTION * rating:
                notes.append(
                    f"{V_peak:.3g} V peak is over {100 * RATING_FRACTION:.0f} % of the "
                    f"{rating:g} V rating"
                )
        if letter == "R" and P is not None and P > RESISTOR_POWER_RATING:
            notes.append(f"{P:.3g} W is over an assumed {RESISTOR_POWER_RATING:g} W rating")
        lines.append(
            BomLine(
                reference=part,
                kind=KINDS[letter],
                written=_written(document, param, value, UNITS[letter]),
                value=value,
                standard_value=standard,
                series=series,
                tolerance=tol.C if part == VARACTOR_COUPLING else tol.of(part),
                dielectric=DIELECTRIC_CLASS[tol.dielectric_of(part)]
                if part in CAPACITOR_PARTS
                else DIELECTRIC_CLASS["C0G"]  # in the tank, beside the diode
                if part == VARACTOR_COUPLING
                else None,
                V_peak=V_peak,
                P=P,
                stress_from=source,
                note="; ".join(notes),
            )
        )
    return lines
