"""The design model: what a user writes down about one oscillator.

A design file is JSON (``"format": "ringwise.design"``, ``"version": 1``).
Every value is stored in SI base units; on input a value may also be text with
an SI prefix or an RKM code (``"2n2"``, ``"39k"``, ``"2.2 nF"``), parsed in
:mod:`ringwise.units`.  Physical bounds live on the fields, so a bad value is
refused with a message that names the field, the value and the limit.
"""

from __future__ import annotations

import math
import typing
from enum import Enum
from functools import cache
from typing import Any, Final, Literal

from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    model_validator,
)
from pydantic_core import InitErrorDetails, PydanticCustomError

from ringwise.presets import DEVICE_PRESETS, VARACTOR_PRESETS
from ringwise.quantities import SI

FORMAT: Final = "ringwise.design"
VERSION: Final = 1


class Topology(str, Enum):
    """Which transistor terminal is at signal ground."""

    CE = "common-emitter"
    CB = "common-base"
    CC = "common-collector"


# Bounds are generous on purpose: wide enough for 1 kHz - 1 GHz designs and for
# the "ideal limit" checks (huge coupling capacitors, huge beta and VA).
# Lower bounds are far below any real part but keep the arithmetic finite.
Volts = SI("V", ge=0.01, le=1000, description="volt")
Ohms = SI("Ω", ge=1e-3, le=1e12, description="ohm")
Farads = SI("F", ge=1e-15, le=1e3, description="farad")
Henries = SI("H", ge=1e-12, le=1e3, description="henry")
Quality = SI("", ge=0.01, le=1e6)
Hertz = SI("Hz", ge=1e3, le=1e12, description="hertz")
#: How the collector is fed from the supply in the forms that have a collector
#: load: through the resistor RC, or through an RF choke.
Feed = Literal["resistor", "choke"]


def _preset(presets: dict[str, dict[str, Any]], name: Any, kind: str) -> dict[str, Any]:
    """The values of a named class (a transistor or varactor preset), or a message
    naming the known ones."""
    if not isinstance(name, str) or name not in presets:
        known = ", ".join(sorted(presets))
        raise ValueError(f"unknown {kind} preset {name!r}; known: {known}")
    return presets[name]


class _Part(BaseModel):
    model_config = ConfigDict(extra="forbid", validate_assignment=True)


class Supply(_Part):
    Vcc: Volts = Field(description="Supply voltage, V")


class Bias(_Part):
    RB1: Ohms = Field(description="Base divider, supply side, Ω")
    RB2: Ohms = Field(description="Base divider, ground side, Ω")
    RC: Ohms | None = Field(
        default=None,
        description="Collector resistor from the supply, Ω (common-emitter and common-base)",
    )
    RE: Ohms = Field(description="Emitter resistor to ground, Ω")
    CE: Farads | None = Field(
        default=None, description="Emitter bypass capacitor, F (common-emitter form)"
    )
    CB: Farads | None = Field(
        default=None, description="Base bypass capacitor, F (common-base form)"
    )
    feed: Feed = Field(
        default="resistor",
        description="Collector fed through RC or through an RF choke "
        "(common-emitter and common-base)",
    )
    L_ch: Henries | None = Field(default=None, description="RF choke inductance, H")
    Q_ch: Quality | None = Field(
        default=None, description="Unloaded Q of the choke at the tank's ideal resonance"
    )
    f_ch: Hertz | None = Field(
        default=None, description="Self-resonant frequency of the choke, Hz (none: ideal coil)"
    )


class Tank(_Part):
    L: Henries | None = Field(
        default=None, description="Tank inductance, H (required unless a crystal replaces the coil)"
    )
    Q_L: Quality | None = Field(
        default=None,
        description="Unloaded Q of the inductor at the tank's ideal resonance "
        "(required unless a crystal replaces the coil)",
    )
    C1: Farads = Field(description="Tank capacitor, collector side (across C-E), F")
    C2: Farads = Field(description="Tank capacitor, base side (across B-E), F")
    C3: Farads | None = Field(default=None, description="Clapp capacitor in series with L, F")


class Crystal(_Part):
    r"""A quartz crystal in place of the coil: the Butterworth–Van Dyke model.

    Motional arm R_x1 + L_x1 + C_x1 in series, shunted by C_x0.  L_x1 is
    entered, or follows from the series resonance f_xs:
    :math:`L_1 = 1/((2\pi f_s)^2 C_1)`.
    """

    R_x1: Ohms = Field(description="Motional resistance R₁ (the ESR at series resonance), Ω")
    L_x1: Henries | None = Field(default=None, description="Motional inductance L₁, H")
    f_xs: Hertz | None = Field(
        default=None, description="Series resonance f_s = 1/(2π√(L₁C₁)), Hz (instead of L₁)"
    )
    C_x1: Farads = Field(description="Motional capacitance C₁, F")
    C_x0: Farads = Field(description="Shunt (holder) capacitance C₀, F")
    P_xmax: SI("W", ge=1e-9, le=1.0) | None = Field(
        default=None, description="Drive-level rating, W (none: not checked)"
    )

    @model_validator(mode="after")
    def _one_inductance(self) -> Crystal:
        if (self.L_x1 is None) == (self.f_xs is None):
            raise ValueError("give the crystal's L_x1 or its series resonance f_xs, one of the two")
        return self

    @property
    def L1(self) -> float:
        """Motional inductance, H (entered, or from f_xs and C_x1)."""
        if self.L_x1 is not None:
            return self.L_x1
        assert self.f_xs is not None
        return 1.0 / ((2.0 * math.pi * self.f_xs) ** 2 * self.C_x1)


#: Where the varactor (in series with its coupling capacitor C_v) sits in the
#: tank: across the coil, or across the Clapp position (in series with L,
#: beside C3 when there is one).
VaractorPlace = Literal["across-L", "clapp"]


class Varactor(_Part):
    r"""A reverse-biased tuning diode in the tank: C(V) = C_j0/(1 + V/φ)^m.

    In series with the coupling capacitor C_v; its cathode is fed the tuning
    voltage through R_tune (the anode sits on the tank, at 0 V DC), so its
    reverse bias is the tuning voltage.  A ``preset`` fills the diode's values
    of a class (typical, from memory).
    """

    preset: Literal["abrupt", "hyperabrupt"] | None = Field(
        default=None, description="Varactor class the values were taken from (typical, from memory)"
    )
    C_j0: Farads = Field(description="Junction capacitance at zero bias, F")
    phi_j: SI("V", ge=0.1, le=5) = Field(default=0.7, description="Built-in potential φ, V")
    m_j: SI("", ge=0.1, le=3) = Field(
        default=0.5, description="Grading coefficient m (1/2 abrupt, about 1 and above hyperabrupt)"
    )
    R_v: Ohms = Field(default=0.5, description="Series resistance of the diode, Ω")
    C_v: Farads = Field(description="Coupling capacitor in series with the diode, F")
    R_tune: Ohms = Field(
        default=100e3,
        description="Resistor feeding the tuning voltage, Ω (the anode's DC return has the same)",
    )
    V_tune: Volts = Field(description="Tuning voltage (the diode's reverse bias) of this design, V")
    V_min: Volts = Field(default=1.0, description="Lowest tuning voltage of the range, V")
    V_max: Volts = Field(default=8.0, description="Highest tuning voltage of the range, V")
    place: VaractorPlace = Field(
        default="across-L", description="Across the coil, or across the Clapp position"
    )

    @model_validator(mode="before")
    @classmethod
    def _fill_from_preset(cls, data: Any) -> Any:
        if isinstance(data, dict) and data.get("preset") is not None:
            given = {k: v for k, v in data.items() if v is not None}
            return {**_preset(VARACTOR_PRESETS, data["preset"], "varactor"), **given}
        return data

    @model_validator(mode="after")
    def _range(self) -> Varactor:
        if self.V_min >= self.V_max:
            raise ValueError(
                f"the tuning range is empty: V_min ({self.V_min:g} V) is not below "
                f"V_max ({self.V_max:g} V)"
            )
        return self


class Coupling(_Part):
    Cc1: Farads = Field(description="DC block from the transistor's output terminal to the tank, F")
    Cc2: Farads = Field(description="DC block from the tank to the transistor's input terminal, F")


class Load(_Part):
    R_load: Ohms | None = Field(
        default=None,
        description="Load on the output tank node (a resistor or a buffer's input resistance), Ω",
    )
    C_load: Farads | None = Field(
        default=None, description="Buffer's input capacitance across the load, F (none: none)"
    )
    change: SI("", ge=0.001, le=0.9) = Field(
        default=0.1,
        description="Load change for the pulling figure: R_load falls and C_load rises by "
        "this fraction",
    )


def _preset_or_values(schema: dict[str, Any]) -> None:
    """The device's JSON Schema: either a preset (its values fill the rest) or every value."""
    values = [k for k in schema.get("required", []) if k != "preset"]
    schema.pop("required", None)
    schema["anyOf"] = [{"required": ["preset"]}, {"required": values}]


class Device(_Part):
    model_config = ConfigDict(
        extra="forbid", validate_assignment=True, json_schema_extra=_preset_or_values
    )

    preset: str | None = Field(
        default=None, description="Transistor class the values were taken from (informative)"
    )
    beta: SI("", ge=1, le=1e9) = Field(description="Forward current gain β")
    IS: SI("A", ge=1e-30, le=1e-6) = Field(description="Transport saturation current at 25 °C, A")
    VA: SI("V", ge=1, le=1e12) = Field(description="Early voltage, V")
    fT: SI("Hz", ge=1e3, le=1e12) = Field(description="Transition frequency, Hz")
    C_mu: SI("F", ge=0, le=1e-6) = Field(description="Base-collector capacitance, F")

    @model_validator(mode="before")
    @classmethod
    def _fill_from_preset(cls, data: Any) -> Any:
        if isinstance(data, dict) and data.get("preset") is not None:
            return {**_preset(DEVICE_PRESETS, data["preset"], "transistor"), **data}
        return data


class Noise(_Part):
    """Inputs of the phase-noise figures: Leeson's comparison (F, corner) and the
    device's flicker law and the supply's noise for the computed spectrum."""

    F_dB: SI("", ge=0, le=40) = Field(
        default=6.0, description="Effective device noise factor, dB (typical, from memory)"
    )
    f_corner: SI("Hz", ge=1e-3, le=1e9) = Field(
        default=10e3, description="Flicker corner of the device, Hz (typical, from memory)"
    )
    K_F: SI("", ge=0, le=1e-6) = Field(
        default=1e-15,
        description="Flicker coefficient of the base current, K_F in K_F·I_B^A_F/f, "
        "A^(2−A_F) (typical of small-signal transistors, from memory; 0 switches it off)",
    )
    A_F: SI("", ge=0.5, le=2.5) = Field(
        default=1.0,
        description="Flicker exponent of the base current, A_F (typical, from memory)",
    )
    e_supply: SI("V", ge=0, le=1e-3) = Field(
        default=0.0,
        description="Noise voltage density of the supply, V/√Hz (0: a noiseless supply)",
    )


class Ratings(_Part):
    """Part ratings checked against the estimated stresses."""

    V_cap: Volts = Field(
        default=50.0, description="Voltage rating of the capacitors, V (common ceramic rating)"
    )


Fraction = SI("", ge=0, le=0.5)
Dielectric = Literal["C0G", "X7R"]
#: Capacitors whose dielectric may be stated, and the default class of each:
#: class 1 in the tank (where the frequency is set), class 2 for blocking and bypass.
CAPACITOR_PARTS: Final = ("C1", "C2", "C3", "Cc1", "Cc2", "CE", "CB")
DEFAULT_DIELECTRIC: Final[dict[str, str]] = {
    "C1": "C0G", "C2": "C0G", "C3": "C0G",
    "Cc1": "X7R", "Cc2": "X7R", "CE": "X7R", "CB": "X7R",
}  # fmt: skip
#: Parts that may carry a tolerance of their own.
TOLERANCED_PARTS: Final = (
    "RB1", "RB2", "RC", "RE", "R_load", "C_load", *CAPACITOR_PARTS, "L", "Q_L", "L_ch", "Q_ch",
)  # fmt: skip


class Tolerances(_Part):
    """Manufacturing spread and temperature behaviour, for the spread analyses.

    Tolerances are half-widths of a uniform distribution (a 5 % part lies
    anywhere within ±5 %).  Defaults are common catalogue grades (common
    practice, no source).
    """

    R: Fraction = Field(default=0.01, description="Resistor tolerance (fraction)")
    C: Fraction = Field(default=0.05, description="Capacitor tolerance (fraction)")
    L: Fraction = Field(default=0.10, description="Inductor tolerance (fraction)")
    Q_L: Fraction = Field(default=0.20, description="Spread of the coil's Q (fraction)")
    beta_ratio: SI("", ge=1, le=100) = Field(
        default=3.0, description="Highest over lowest β of the part type (log-uniform)"
    )
    IS_ratio: SI("", ge=1, le=100) = Field(
        default=2.0, description="Highest over lowest I_S of the part type (log-uniform)"
    )
    per_part: dict[str, Fraction] = Field(
        default_factory=dict, description="Tolerances of individual parts, overriding the class"
    )
    dielectric: dict[str, Dielectric] = Field(
        default_factory=dict,
        description="Dielectric class per capacitor (default C0G in the tank, X7R elsewhere)",
    )
    L_tempco_ppm: SI("", ge=-5000, le=5000) = Field(
        default=100.0, description="Inductor temperature coefficient, ppm/°C (typical, from memory)"
    )
    T_min: SI("°C", ge=-60, le=200) = Field(
        default=-40.0, description="Lowest operating temperature, °C"
    )
    T_max: SI("°C", ge=-60, le=200) = Field(
        default=85.0, description="Highest operating temperature, °C"
    )

    @model_validator(mode="after")
    def _sensible(self) -> Tolerances:
        if self.T_min > self.T_max:
            raise ValueError(f"T_min ({self.T_min:g} °C) is above T_max ({self.T_max:g} °C)")
        for name in self.per_part:
            if name not in TOLERANCED_PARTS:
                raise ValueError(
                    f"per_part: {name!r} is not a part; parts: {', '.join(TOLERANCED_PARTS)}"
                )
        for name in self.dielectric:
            if name not in CAPACITOR_PARTS:
                raise ValueError(f"dielectric: {name!r} is not a capacitor")
        return self

    def of(self, part: str) -> float:
        """The tolerance that applies to ``part``."""
        if part in self.per_part:
            return self.per_part[part]
        if part in ("L", "L_ch"):
            return self.L
        if part in ("Q_L", "Q_ch"):
            return self.Q_L
        return self.C if part in (*CAPACITOR_PARTS, "C_load") else self.R

    def dielectric_of(self, part: str) -> str:
        return self.dielectric.get(part, DEFAULT_DIELECTRIC[part])


class Design(_Part):
    """One oscillator design, all values in SI base units."""

    format: Literal["ringwise.design"] = FORMAT
    version: Literal[1] = VERSION
    name: str = Field(default="untitled", max_length=200)
    topology: Topology = Topology.CE
    supply: Supply
    bias: Bias
    tank: Tank
    crystal: Crystal | None = Field(
        default=None, description="A crystal in place of the coil (tank L and Q_L unused)"
    )
    varactor: Varactor | None = Field(
        default=None, description="A varactor tuning the tank (none: a fixed tank)"
    )
    coupling: Coupling
    load: Load = Field(default_factory=Load)
    device: Device
    temperature_C: SI("°C", ge=-60, le=200) = Field(
        default=25.0, description="Operating temperature, °C"
    )
    noise: Noise = Field(default_factory=Noise)
    ratings: Ratings = Field(default_factory=Ratings)
    tolerances: Tolerances = Field(default_factory=Tolerances)

    @model_validator(mode="after")
    def _parts_for_topology(self) -> Design:
        needs = self.needed_parts()
        missing = [part for part in needs if getattr(self.bias, part) is None]
        if self.crystal is None:
            # the coil sets the tank unless a crystal takes its place
            lacking = [p for p in ("L", "Q_L") if getattr(self.tank, p) is None]
            if lacking:
                raise ValidationError.from_exception_data(
                    "Design",
                    [
                        InitErrorDetails(
                            type=PydanticCustomError(
                                "coil_required",
                                "tank.{part} is required without a crystal "
                                "(the coil sets the tank)",
                                {"part": part},
                            ),
                            loc=("tank", part),
                            input=None,
                        )
                        for part in lacking
                    ],
                )
        if missing:
            raise ValidationError.from_exception_data(
                "Design",
                [
                    InitErrorDetails(
                        type=PydanticCustomError(
                            "part_required",
                            "bias.{part} is required by the {form}",
                            {"part": part, "form": self.form_text},
                        ),
                        loc=("bias", part),
                        input=None,
                    )
                    for part in missing
                ],
            )
        return self

    @property
    def form_text(self) -> str:
        """The form in words, with the collector feed where it matters."""
        feed = ", collector fed through the choke" if self.choke_fed else ""
        return f"{self.topology.value} form{feed}"

    @property
    def choke_fed(self) -> bool:
        """Whether the collector is fed through the RF choke (a form with a collector load)."""
        return self.bias.feed == "choke" and self.topology is not Topology.CC

    def needed_parts(self) -> tuple[str, ...]:
        """Bias parts the chosen form and collector feed require."""
        if self.topology is Topology.CC:
            return ()
        load = ("L_ch", "Q_ch") if self.bias.feed == "choke" else ("RC",)
        bypass = "CE" if self.topology is Topology.CE else "CB"
        return (*load, bypass)

    def idle_parts(self) -> tuple[str, ...]:
        """Bias parts the chosen form and collector feed leave out, given or not."""
        choke = ("L_ch", "Q_ch", "f_ch")
        if self.topology is Topology.CC:
            return ("RC", "CE", "CB", *choke)
        bypass = "CB" if self.topology is Topology.CE else "CE"
        return (bypass, "RC") if self.bias.feed == "choke" else (bypass, *choke)

    def unused_parts(self) -> list[str]:
        """Parts given in the design that the chosen form (and collector feed) do not use."""
        return [p for p in self.idle_parts() if getattr(self.bias, p) is not None]


#: Parameter names usable by the threshold finder and sweeps, mapped to the
#: section of the design that holds them.
PARAMETERS: Final[dict[str, str]] = {
    "Vcc": "supply",
    "RB1": "bias",
    "RB2": "bias",
    "RC": "bias",
    "RE": "bias",
    "CE": "bias",
    "CB": "bias",
    "L_ch": "bias",
    "Q_ch": "bias",
    "f_ch": "bias",
    "L": "tank",
    "Q_L": "tank",
    "C1": "tank",
    "C2": "tank",
    "C3": "tank",
    "Cc1": "coupling",
    "Cc2": "coupling",
    "R_load": "load",
    "R_x1": "crystal",
    "L_x1": "crystal",
    "f_xs": "crystal",
    "C_x1": "crystal",
    "C_x0": "crystal",
    "P_xmax": "crystal",
    "C_j0": "varactor",
    "phi_j": "varactor",
    "m_j": "varactor",
    "R_v": "varactor",
    "C_v": "varactor",
    "R_tune": "varactor",
    "V_tune": "varactor",
    "C_load": "load",
    "beta": "device",
    "IS": "device",
    "VA": "device",
    "fT": "device",
    "C_mu": "device",
    "F_dB": "noise",
    "f_corner": "noise",
    "V_cap": "ratings",
}


#: The parameters that are parts of the circuit (the transistor's included), the ones
#: a what-if plot or a bench reading may name: the noise model's figures and the
#: capacitors' voltage rating describe the design, they are not parts.
PART_PARAMETERS: Final = tuple(p for p, s in PARAMETERS.items() if s not in ("noise", "ratings"))


def get_param(design: Design, name: str) -> float | None:
    """Value of a named parameter in SI units (``None`` when the part is absent)."""
    if name == "temperature_C":
        return design.temperature_C
    section = _section_of(name)
    part = getattr(design, section)
    return None if part is None else getattr(part, name)


def with_param(design: Design, name: str, value: float) -> Design:
    """A copy of ``design`` with one parameter changed (validated like any input)."""
    if name == "temperature_C":
        return design.model_copy(update={"temperature_C": value})
    section = _section_of(name)
    part = getattr(design, section)
    # model_copy skips validation; construct to keep the bounds in force.
    new_part = type(part).model_validate({**part.model_dump(), name: value})
    return design.model_copy(update={section: new_part})


@cache
def param_limits(name: str) -> tuple[float, float]:
    """The lowest and highest value a parameter may take (its field's bounds; ±inf where open)."""
    section = Design.model_fields[_section_of(name)].annotation
    # an optional section (``Section | None``): its model is the member that has a schema
    models = [a for a in typing.get_args(section) if hasattr(a, "model_json_schema")]
    section = models[0] if models else section
    schema = section.model_json_schema()["properties"][name]  # type: ignore[union-attr]
    lo, hi = -math.inf, math.inf
    for option in [schema, *schema.get("anyOf", [])]:
        lo = max(lo, option.get("ge", option.get("minimum", option.get("gt", lo))))
        hi = min(hi, option.get("le", option.get("maximum", option.get("lt", hi))))
    return lo, hi


def step_within(name: str, value: float, step: float) -> tuple[float, float]:
    """Values ``value ± step`` moved inside the parameter's bounds, for a central
    difference at a value on or near a bound (divide by their difference)."""
    lo, hi = param_limits(name)
    return min(value + step, hi), max(value - step, lo)


def _section_of(name: str) -> str:
    try:
        return PARAMETERS[name]
    except KeyError:
        known = ", ".join([*PARAMETERS, "temperature_C"])
        raise ValueError(f"unknown parameter {name!r}; known: {known}") from None


def _upgrade_v1(data: dict[str, Any]) -> dict[str, Any]:
    """Version 1 is the current format: nothing to change."""
    return data


#: One step per version, each turning a document of that version into the next
#: (the last one into the current format).  A new version adds a step here and
#: keeps every older file loading.
UPGRADES: Final = {1: _upgrade_v1}


class FormatVersionError(ValueError):
    """A design document of a version this program does not know."""


def load_design(data: dict[str, Any]) -> Design:
    """Validate a design document of any supported version into a :class:`Design`."""
    version = data.get("version", VERSION) if isinstance(data, dict) else None
    if version not in UPGRADES:
        known = ", ".join(str(v) for v in UPGRADES)
        raise ValidationError.from_exception_data(
            "Design",
            [
                InitErrorDetails(
                    type=PydanticCustomError(
                        "unknown_version",
                        "version {version!r} is not a known format version ({known})",
                        {"version": version, "known": known},
                    ),
                    loc=("version",),
                    input=version,
                )
            ],
        )
    for step in sorted(v for v in UPGRADES if v >= version):
        data = UPGRADES[step](data)
    return Design.model_validate(data)
