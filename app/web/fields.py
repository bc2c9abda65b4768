"""The sheet's form: one text field per design field, and its conversions.

The form is flat (``L``, ``C1``, ``RB2``, ``topology``, ...), the design
document is nested by section (``tank.L``).  This module maps between the
two, between the form and the share-link query string, and checks each
field on its own with the core's own validators (so a bad value is flagged
beside its field even while another field is also wrong).  Which section a
parameter lives in comes from :data:`ringwise.design.PARAMETERS`; bounds, units
of parsing and which parts are optional come from the core's models.
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from functools import cache, lru_cache
from typing import Annotated, Any, Final, get_args

from pydantic import BaseModel, TypeAdapter, ValidationError

from ringwise.design import (
    CAPACITOR_PARTS,
    DEFAULT_DIELECTRIC,
    FORMAT,
    PARAMETERS,
    TOLERANCED_PARTS,
    VERSION,
    Design,
    Fraction,
    Tolerances,
    Topology,
)
from ringwise.display import format_value
from ringwise.errors import describe_validation_error
from ringwise.presets import DEVICE_PRESET_LABELS, DEVICE_PRESETS, VARACTOR_PRESET_LABELS
from ringwise.units import format_si


@dataclass(frozen=True)
class FormField:
    """One input of the sheet.

    ``unit`` is the display unit (parsing is the core's), ``slider`` whether
    a log-scale slider sits beside it.
    """

    name: str
    group: str
    label: str
    unit: str = ""
    slider: bool = False
    kind: str = "quantity"  # "quantity", "text" or "choice"
    #: Where the field lives in the design document when its form name differs
    #: (the tolerances: form ``tol_L`` is ``tolerances.L``, ``diel_C1`` is
    #: ``tolerances.dielectric.C1``): section, key, and the mapping it sits in.
    doc_section: str | None = None
    doc_key: str | None = None
    doc_sub: str | None = None

    @property
    def section(self) -> str | None:
        """The design section holding the field (``None`` for top-level fields)."""
        if self.doc_section is not None:
            return self.doc_section
        if self.name == "preset":
            return "device"
        return PARAMETERS.get(self.name)

    @property
    def key(self) -> str:
        """The field's key in its section (or in its mapping) of the design document."""
        return self.doc_key or self.name

    @property
    def path(self) -> str:
        parts = [self.section, self.doc_sub, self.key]
        return ".".join(p for p in parts if p)

    @property
    def optional(self) -> bool:
        """Whether the field may be left blank (absent part, or a default applies)."""
        return not _field_info(self).is_required()

    @property
    def nullable(self) -> bool:
        """Whether blank means an absent part (``null``), not "use the default"."""
        return self.optional and _field_info(self).default is None

    @property
    def default(self) -> Any:
        info = _field_info(self)
        return None if info.is_required() else info.default


#: Input groups in page order: key, heading.
#: Distinct (value, unit) pairs whose display text is kept (a few answers' worth).
DISPLAY_CACHE: Final = 4096

GROUPS: Final = (
    ("identity", "Design"),
    ("tank", "Tank"),
    ("bias", "Bias"),
    ("transistor", "Transistor"),
    ("load", "Coupling and load"),
    ("crystal", "Crystal in place of the coil (all blank: the coil)"),
    ("varactor", "Varactor tuning (all blank: a fixed tank)"),
    ("conditions", "Conditions"),
    ("tolerances", "Tolerances and temperature range (for the spread)"),
)

#: Form name of the per-part tolerance overrides (``tolerances.per_part``), kept as
#: one text such as ``C1=0.02; L=0.05``.
PER_PART: Final = "tol_parts"
#: Separator of the per-part entries in that text.
PER_PART_SEP: Final = "; "


def _tol(name: str, key: str, label: str, unit: str = "") -> FormField:
    return FormField(name, "tolerances", label, unit, doc_section="tolerances", doc_key=key)


def _dielectric(part: str) -> FormField:
    return FormField(
        f"diel_{part}",
        "tolerances",
        f"{part} dielectric",
        kind="choice",
        doc_section="tolerances",
        doc_key=part,
        doc_sub="dielectric",
    )


#: Every input, in page order (the share link lists them in this order too).
FIELDS: Final[tuple[FormField, ...]] = (
    FormField("name", "identity", "Name", kind="text"),
    FormField("topology", "identity", "Form (grounded terminal)", kind="choice"),
    FormField("L", "tank", "L, inductance", "H", slider=True),
    FormField("C1", "tank", "C1, across collector–emitter", "F", slider=True),
    FormField("C2", "tank", "C2, across base–emitter", "F", slider=True),
    FormField("C3", "tank", "C3, Clapp, in series with L (blank: none)", "F"),
    FormField("Q_L", "tank", "Q_L, coil's unloaded Q", "", slider=True),
    FormField("RB1", "bias", "RB1, divider to supply", "Ω", slider=True),
    FormField("RB2", "bias", "RB2, divider to ground", "Ω", slider=True),
    FormField("RC", "bias", "RC, collector resistor", "Ω", slider=True),
    FormField("RE", "bias", "RE, emitter resistor", "Ω", slider=True),
    FormField("CE", "bias", "CE, emitter bypass", "F"),
    FormField("CB", "bias", "CB, base bypass", "F"),
    FormField("feed", "bias", "Collector fed through", kind="choice", doc_section="bias"),
    FormField("L_ch", "bias", "L_ch, RF choke inductance", "H"),
    FormField("Q_ch", "bias", "Q_ch, choke's Q at the tank's resonance", ""),
    FormField("f_ch", "bias", "f_ch, choke's self-resonance (blank: none)", "Hz"),
    FormField("preset", "transistor", "Class (fills the values below)", kind="choice"),
    FormField("beta", "transistor", "β, current gain", ""),
    FormField("IS", "transistor", "I_S, saturation current at 25 °C", "A"),
    FormField("VA", "transistor", "V_A, Early voltage", "V"),
    FormField("fT", "transistor", "f_T, transition frequency", "Hz"),
    FormField("C_mu", "transistor", "C_μ, base–collector capacitance", "F"),
    FormField("F_dB", "transistor", "Noise factor for phase noise, dB (blank: default)", ""),
    FormField("f_corner", "transistor", "Flicker corner (blank: default)", "Hz"),
    FormField(
        "K_F",
        "transistor",
        "K_F, base flicker coefficient in K_F·I_B^A_F/f (blank: default; 0: none)",
        doc_section="noise",
    ),
    FormField(
        "A_F", "transistor", "A_F, base flicker exponent (blank: default)", doc_section="noise"
    ),
    FormField(
        "e_supply",
        "conditions",
        "Supply noise density, V/√Hz (blank: noiseless)",
        doc_section="noise",
    ),
    FormField("Cc1", "load", "Cc1, DC block at the output terminal", "F"),
    FormField("Cc2", "load", "Cc2, DC block at the input terminal", "F"),
    FormField("R_load", "load", "R_load, load on the output (blank: none)", "Ω"),
    FormField("C_load", "load", "C_load, buffer's input capacitance (blank: none)", "F"),
    FormField(
        "change", "load", "Load change for pulling, fraction (blank: default)", doc_section="load"
    ),
    FormField("R_x1", "crystal", "R₁, motional resistance (ESR)", "Ω"),
    FormField("f_xs", "crystal", "f_s, series resonance (or L₁)", "Hz"),
    FormField("L_x1", "crystal", "L₁, motional inductance (or f_s)", "H"),
    FormField("C_x1", "crystal", "C₁, motional capacitance", "F"),
    FormField("C_x0", "crystal", "C₀, shunt capacitance", "F"),
    FormField("P_xmax", "crystal", "Drive-level rating (blank: not checked)", "W"),
    FormField(
        "v_preset",
        "varactor",
        "Diode class (fills the blank values; typical, from memory)",
        kind="choice",
        doc_section="varactor",
        doc_key="preset",
    ),
    FormField("V_tune", "varactor", "V_tune, tuning voltage (reverse bias)", "V", slider=True),
    FormField("C_v", "varactor", "C_v, coupling capacitor in series with the diode", "F"),
    FormField("C_j0", "varactor", "C_j0, junction capacitance at 0 V", "F"),
    FormField("phi_j", "varactor", "φ, built-in potential (blank: default)", "V"),
    FormField("m_j", "varactor", "m, grading coefficient (blank: default)", ""),
    FormField("R_v", "varactor", "R_s, diode's series resistance (blank: default)", "Ω"),
    FormField("R_tune", "varactor", "R_tune, tuning-voltage feed (blank: default)", "Ω"),
    FormField(
        "V_min", "varactor", "Tuning range, lowest (blank: default)", "V", doc_section="varactor"
    ),
    FormField(
        "V_max", "varactor", "Tuning range, highest (blank: default)", "V", doc_section="varactor"
    ),
    FormField("place", "varactor", "Placed", kind="choice", doc_section="varactor"),
    FormField("Vcc", "conditions", "Vcc, supply", "V"),
    FormField("temperature_C", "conditions", "Temperature", "°C"),
    FormField("V_cap", "conditions", "Capacitor voltage rating (blank: default)", "V"),
    _tol("tol_R", "R", "Resistors, ± fraction (blank: default)"),
    _tol("tol_C", "C", "Capacitors, ± fraction (blank: default)"),
    _tol("tol_L", "L", "Inductor, ± fraction (blank: default)"),
    _tol("tol_Q_L", "Q_L", "Coil's Q, ± fraction (blank: default)"),
    _tol("beta_ratio", "beta_ratio", "β range, highest over lowest (blank: default)"),
    _tol("IS_ratio", "IS_ratio", "I_S range, highest over lowest (blank: default)"),
    _tol("L_tempco_ppm", "L_tempco_ppm", "Inductor tempco, ppm/°C (blank: default)"),
    _tol("T_min", "T_min", "Lowest operating temperature (blank: default)", "°C"),
    _tol("T_max", "T_max", "Highest operating temperature (blank: default)", "°C"),
    *(_dielectric(part) for part in CAPACITOR_PARTS),
    FormField(
        PER_PART,
        "tolerances",
        "Per-part tolerances, e.g. C1=0.02; L=0.05 (blank: none)",
        kind="text",
        doc_section="tolerances",
        doc_key="per_part",
    ),
)

BY_NAME: Final = {f.name: f for f in FIELDS}
#: Fields by their path in the design document (``tolerances.L`` is ``tol_L``).
BY_PATH: Final = {f.path: f for f in FIELDS}
#: Query parameter that opens a sample design (fields given beside it override it).
SAMPLE_PARAM: Final = "design"
#: Link parameters that carry the page's state beside the design: the what-if
#: choice and the on-demand panels' inputs, as typed (each is the name in
#: ``data-link`` of its input on the sheet), and, in the summary's link only,
#: ``run``: the id of a finished time-domain run of this design.
PAGE_STATE: Final = (
    "what_if",
    "run_cycles",
    "spread_samples",
    "spread_seed",
    "spread_margin",
    "spread_low",
    "spread_high",
    "snap_series",
    "synth_topology",
    "synth_f",
    "synth_Vcc",
    "synth_IC",
    "synth_gain",
    "synth_L",
    "synth_ratio",
    "bench_f",
    "bench_param",
    "bench_value",
    "bench_amp",
    "run",
)

TOPOLOGY_LABELS: Final = {
    Topology.CE.value: "common-emitter (emitter at signal ground)",
    Topology.CB.value: "common-base (base at signal ground)",
    Topology.CC.value: "common-collector (collector at signal ground)",
}


FEED_LABELS: Final = {
    "resistor": "the collector resistor RC",
    "choke": "an RF choke (L_ch, Q_ch)",
}

PLACE_LABELS: Final = {
    "across-L": "across the coil",
    "clapp": "across the Clapp position (in series with L)",
}


def _model_of(annotation: Any) -> type[BaseModel] | None:
    """The section model of a design field's annotation (``Crystal | None`` → Crystal)."""
    for candidate in (annotation, *get_args(annotation)):
        if isinstance(candidate, type) and issubclass(candidate, BaseModel):
            return candidate
    return None


#: The design's sections (its fields that are models of their own), in file order.
_SECTIONS: Final = tuple(
    key for key, info in Design.model_fields.items() if _model_of(info.annotation) is not None
)
#: Sections that may be absent as a whole (``null``): left out when all their fields are blank.
_OPTIONAL_SECTIONS: Final = tuple(
    key for key in _SECTIONS if Design.model_fields[key].default is None
)


@cache  # the design's models are fixed: a field's schema entry is looked up once
def _field_info(field: FormField):
    if field.doc_sub is not None:
        return Tolerances.model_fields[field.doc_sub]
    if field.section is None:
        return Design.model_fields[field.name]
    section_model = _model_of(Design.model_fields[field.section].annotation)
    assert section_model is not None
    return section_model.model_fields[field.key]


def _adapter(field: FormField) -> TypeAdapter:
    if field.doc_sub == "dielectric" or field.name == PER_PART:
        return TypeAdapter(str)  # checked in check_field
    info = _field_info(field)
    if not info.metadata:
        return TypeAdapter(info.annotation)
    return TypeAdapter(Annotated[info.annotation, *info.metadata])


_ADAPTERS: Final = {f.name: _adapter(f) for f in FIELDS if f.name != "preset"}
_FRACTION: Final = TypeAdapter(Fraction)
#: The dielectric classes a capacitor may be given.
DIELECTRICS: Final = {"C0G": "C0G, class 1", "X7R": "X7R, class 2"}


def choices(field: FormField) -> list[tuple[str, str]]:
    """(value, label) of a choice field."""
    if field.name == "topology":
        return [(t.value, TOPOLOGY_LABELS[t.value]) for t in Topology]
    if field.name == "preset":
        return [("", "custom values"), *DEVICE_PRESET_LABELS.items()]
    if field.name == "feed":
        return list(FEED_LABELS.items())
    if field.name == "v_preset":
        return [("", "custom values"), *VARACTOR_PRESET_LABELS.items()]
    if field.name == "place":  # blank: the default (a design without a varactor has none)
        return [("", "default: across the coil"), *PLACE_LABELS.items()]
    if field.doc_sub == "dielectric":
        default = DEFAULT_DIELECTRIC[field.key]
        return [("", f"default ({default})"), *DIELECTRICS.items()]
    raise KeyError(field.name)


def parse_per_part(text: str) -> dict[str, str]:
    """The per-part tolerance text (``C1=0.02; L=0.05``) as {part: value text}.

    Raises ValueError naming the entry that is not ``part=value`` with a known part.
    """
    out: dict[str, str] = {}
    for entry in re.split(r"[;,]", text):
        entry = entry.strip()
        if not entry:
            continue
        part, eq, value = entry.partition("=")
        part, value = part.strip(), value.strip()
        if not eq or not value:
            raise ValueError(f"{entry!r} is not part=value (for example C1=0.02)")
        if part not in TOLERANCED_PARTS:
            raise ValueError(f"{part!r} is not a part; parts: {', '.join(TOLERANCED_PARTS)}")
        if part in out:
            raise ValueError(f"{part} is given twice")
        out[part] = value
    return out


def preset_texts() -> dict[str, dict[str, str]]:
    """The transistor presets as form texts (what choosing one writes into the fields)."""
    return {
        name: {key: format_si(value, "", digits=4) for key, value in values.items()}
        for name, values in DEVICE_PRESETS.items()
    }


@dataclass(frozen=True)
class FieldState:
    """One field as the sheet shows it: the text kept as typed, its value and any problem."""

    text: str
    value: float | str | None
    display: str
    error: str | None


def check_field(field: FormField, text: str) -> FieldState:
    """Validate one field's text with the core's own validator for it."""
    if field.name == "preset":
        if text and text not in DEVICE_PRESETS:
            known = ", ".join(sorted(DEVICE_PRESETS))
            return FieldState(text, None, "", f"unknown transistor preset {text!r}; known: {known}")
        return FieldState(text, text or None, DEVICE_PRESET_LABELS.get(text, ""), None)
    if field.doc_sub == "dielectric":
        if text and text not in DIELECTRICS:
            return FieldState(text, None, "", f"must be one of {', '.join(DIELECTRICS)}")
        return FieldState(text, text or None, text or DEFAULT_DIELECTRIC[field.key], None)
    if field.name == PER_PART:
        try:
            parts = parse_per_part(text)
            for part, value in parts.items():
                try:
                    _FRACTION.validate_python(value)
                except ValidationError as err:
                    message = describe_validation_error(err)[0]["message"]
                    raise ValueError(f"{part}: {message}") from None
        except ValueError as err:
            return FieldState(text, None, "", str(err))
        return FieldState(text, text or None, text or "none", None)
    if text.strip() == "" and field.kind == "choice" and field.optional:
        shown = "none" if field.nullable else f"default {field.default}"
        return FieldState(text, None, shown, None)
    if text.strip() == "" and field.kind == "quantity":
        if field.nullable:
            shown = "none"
        elif field.optional:
            shown = f"default {display(field.default, field.unit)}"
        else:
            shown = ""
        return FieldState(text, None, shown, None)
    try:
        value = _ADAPTERS[field.name].validate_python(text)
    except ValidationError as err:
        return FieldState(text, None, "", describe_validation_error(err)[0]["message"])
    if field.kind == "quantity":
        return FieldState(text, value, display(value, field.unit), None)
    value = value.value if isinstance(value, Topology) else value
    return FieldState(text, value, str(value), None)


def display(value: float | None, unit: str) -> str:
    """Engineering text for a value: SI prefixes for quantities, 4 digits for plain ratios.

    Cached: formatting is a noticeable part of each answer of the live sheet,
    and most values (the inputs, the defaults) repeat from edit to edit.
    (−0 shows as 0, so that the two zeros, equal as cache keys, read the same.)
    """
    return _display(0.0 if value == 0 else value, unit)


@lru_cache(maxsize=DISPLAY_CACHE)
def _display(value: float | None, unit: str) -> str:
    return format_value(value, unit)


def check_fields(texts: Mapping[str, str]) -> dict[str, FieldState]:
    return {f.name: check_field(f, texts.get(f.name, "")) for f in FIELDS}


def _json_value(text: str) -> Any:
    """A form text as it goes into a design file: a JSON number when the text is
    exactly one (so ``"200"`` stays ``200``), otherwise the text itself."""
    try:
        number = json.loads(text)
    except ValueError:
        return text
    is_number = isinstance(number, int | float) and not isinstance(number, bool)
    return number if is_number and json.dumps(number) == text else text


def document(texts: Mapping[str, str], *, for_file: bool = False) -> dict[str, Any]:
    """The nested design document for the form's texts.

    Blank optional parts become ``null``; blank required fields are left out
    (so the core reports them as required).  With ``for_file`` numbers that
    are plain JSON numbers are written as numbers, as in ``sample_designs/``.
    """
    doc: dict[str, Any] = {"format": FORMAT, "version": VERSION}
    sections: dict[str, dict[str, Any]] = {}
    for f in FIELDS:
        text = texts.get(f.name, "")
        if f.section is not None:
            sections.setdefault(f.section, {})
        if text.strip() == "":
            if f.name == "preset" or (f.nullable and f.section is not None):
                sections[f.section][f.name] = None  # type: ignore[index]
            continue
        value: Any = _json_value(text) if for_file and f.kind == "quantity" else text
        if f.name == PER_PART:
            try:
                parts = parse_per_part(text)
            except ValueError:
                value = text  # the core reports it (it is marked beside its field too)
            else:
                value = {k: _json_value(v) if for_file else v for k, v in parts.items()}
        if f.section is None:
            doc[f.name] = value
        elif f.doc_sub is not None:
            sections[f.section].setdefault(f.doc_sub, {})[f.key] = value
        else:
            sections[f.section][f.key] = value
    out: dict[str, Any] = {}
    for key, info in Design.model_fields.items():
        if key in _SECTIONS:
            content = sections.get(key, {})
            if key in _OPTIONAL_SECTIONS and all(v is None for v in content.values()):
                continue  # an absent part (the crystal): every field blank
            # a section that has defaults of its own is left out when nothing in it is set
            if content or info.is_required() or key == "load":
                out[key] = content
        elif key in doc:
            out[key] = doc[key]
    return out


class DocumentError(ValueError):
    """A design document that cannot be read into the form at all."""

    def __init__(self, problems: list[dict]) -> None:
        super().__init__("; ".join(f"{p['field']}: {p['message']}" for p in problems))
        self.problems = problems


def texts_from_document(doc: Any) -> dict[str, str]:
    """Form texts for a design document (a design file or a sample).

    Raises :class:`DocumentError` naming every key that is not part of the
    design format, and values that are neither text, a number nor null.
    Values themselves are checked later, beside their fields.
    """
    if not isinstance(doc, dict):
        raise DocumentError([_p("design", "must be a JSON object (a design file)", "dict_type")])
    problems: list[dict] = []
    if doc.get("format") != FORMAT:
        problems.append(
            _p("format", f"must be {FORMAT!r}, got {doc.get('format')!r}", "literal_error")
        )
    if doc.get("version") != VERSION:
        problems.append(
            _p("version", f"must be {VERSION}, got {doc.get('version')!r}", "literal_error")
        )
    texts = {f.name: "" for f in FIELDS}
    for key, value in doc.items():
        if key in ("format", "version"):
            continue
        if key in _OPTIONAL_SECTIONS and value is None:
            continue
        if key in _SECTIONS:
            if not isinstance(value, dict):
                problems.append(_p(key, "must be an object", "dict_type"))
                continue
            for name, inner in value.items():
                if key == "tolerances" and name in ("dielectric", "per_part"):
                    _put_mapping(texts, name, inner, problems)
                    continue
                field = BY_PATH.get(f"{key}.{name}")
                if field is None:
                    problems.append(
                        _p(
                            f"{key}.{name}",
                            "is not a field of the design format",
                            "extra_forbidden",
                        )
                    )
                    continue
                _put(texts, field, inner, problems)
        elif key in BY_NAME and BY_NAME[key].section is None:
            _put(texts, BY_NAME[key], value, problems)
        else:
            problems.append(_p(key, "is not a field of the design format", "extra_forbidden"))
    if problems:
        raise DocumentError(problems)
    return texts


def _put_mapping(texts: dict[str, str], name: str, value: Any, problems: list[dict]) -> None:
    """``tolerances.dielectric`` into the dielectric choices, ``tolerances.per_part``
    into the per-part text."""
    path = f"tolerances.{name}"
    if not isinstance(value, dict):
        problems.append(_p(path, "must be an object", "dict_type"))
        return
    entries: list[str] = []
    for part, inner in value.items():
        if name == "dielectric":
            field = BY_PATH.get(f"{path}.{part}")
            if field is None:
                problems.append(_p(f"{path}.{part}", "is not a capacitor", "extra_forbidden"))
            else:
                _put(texts, field, inner, problems)
            continue
        bad = not isinstance(part, str) or re.search(r"[;,=]", part) or part != part.strip()
        if bad or part not in TOLERANCED_PARTS:
            problems.append(_p(f"{path}.{part}", "is not a part", "extra_forbidden"))
        elif isinstance(inner, int | float) and not isinstance(inner, bool):
            entries.append(f"{part}={json.dumps(inner)}")
        elif isinstance(inner, str) and inner.strip() and not re.search(r"[;,=]", inner):
            entries.append(f"{part}={inner.strip()}")
        else:
            problems.append(_p(f"{path}.{part}", "must be a number or text", "value_type"))
    if name == "per_part":
        texts[PER_PART] = PER_PART_SEP.join(entries)


def _put(texts: dict[str, str], field: FormField, value: Any, problems: list[dict]) -> None:
    if value is None:
        texts[field.name] = ""
    elif isinstance(value, str):
        texts[field.name] = value
    elif isinstance(value, int | float) and not isinstance(value, bool):
        texts[field.name] = json.dumps(value)
    else:
        problems.append(_p(field.path, "must be text, a number or null", "value_type"))


def _p(field: str, message: str, kind: str) -> dict[str, str]:
    return {"field": field, "message": message, "type": kind}


def to_query(texts: Mapping[str, str]) -> list[tuple[str, str]]:
    """The share link's query: every non-blank field as typed, in page order."""
    return [(f.name, texts[f.name]) for f in FIELDS if texts.get(f.name, "") != ""]


def from_query(
    items: Iterable[tuple[str, str]], samples: Mapping[str, Mapping[str, str]], default: str
) -> tuple[dict[str, str], list[dict]]:
    """Form texts and link problems for a share link's query.

    A link that names any design field carries the whole design: fields it
    leaves out are blank.  ``design=<sample>`` starts from a sample and the
    fields given beside it override it; a query with neither opens the
    default sample.  Unknown, repeated and malformed parameters are reported,
    never dropped in silence.
    """
    seen: dict[str, list[str]] = {}
    for key, value in items:
        seen.setdefault(key, []).append(value)
    problems: list[dict] = []
    for key, values in seen.items():
        if len(values) > 1:
            problems.append(
                _p(
                    key,
                    f"appears {len(values)} times in the link; the first value is used",
                    "duplicate_parameter",
                )
            )
        if key not in BY_NAME and key != SAMPLE_PARAM and key not in PAGE_STATE:
            problems.append(
                _p(
                    key,
                    "is not a design field; this link parameter was ignored",
                    "unknown_parameter",
                )
            )
    given = {k: v[0] for k, v in seen.items() if k in BY_NAME}
    sample = seen.get(SAMPLE_PARAM, [None])[0]
    if sample is not None and sample not in samples:
        known = ", ".join(samples)
        problems.append(
            _p(SAMPLE_PARAM, f"no sample design named {sample!r}; known: {known}", "unknown_sample")
        )
        sample = None
    if sample is not None:
        texts = dict(samples[sample])
    elif given:
        texts = {f.name: "" for f in FIELDS}
    else:
        texts = dict(samples[default])
    texts.update(given)
    return texts, problems


def page_state(items: Iterable[tuple[str, str]]) -> dict[str, str]:
    """The page-state parameters of a link (:data:`PAGE_STATE`), first value of each."""
    out: dict[str, str] = {}
    for key, value in items:
        if key in PAGE_STATE and key not in out:
            out[key] = value
    return out


#: A whole-design message that begins with a field path ("bias.RC is required ...").
_LEADING_PATH: Final = re.compile(r"^(\w+)\.(\w+)\b")


def field_of_problem(problem: Mapping[str, str]) -> str | None:
    """The form field a design problem belongs to, when it can be told."""
    path = problem["field"]
    for prefix in (path, path.rsplit(".", 1)[0]):
        if prefix in BY_PATH:
            return BY_PATH[prefix].name
    if path.startswith("tolerances.per_part"):
        return PER_PART
    if path.startswith("tolerances"):
        return None
    if path == "design":
        m = _LEADING_PATH.match(problem["message"])
        if m and m.group(2) in BY_NAME:
            return m.group(2)
        return None
    name = path.rsplit(".", 1)[-1]
    return name if name in BY_NAME else None
