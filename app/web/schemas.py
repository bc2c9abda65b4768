"""Request and response models of the API (they make the OpenAPI docs)."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationInfo, field_validator
from pydantic_core import PydanticCustomError

from ringwise.analysis.threshold import MAX_SWEEP_POINTS
from ringwise.design import Design
from ringwise.figures import SHEET_FIGURES
from ringwise.result import Result

#: Points of a sweep when the request does not say.
DEFAULT_SWEEP_POINTS = 50


class RequestModel(BaseModel):
    """Base of every request body: unknown keys refused, and JSON ``true``/``false``
    refused wherever a number or text is expected (never read as 1 or 0)."""

    model_config = ConfigDict(extra="forbid")

    @field_validator("*", mode="before")
    @classmethod
    def _no_booleans(cls, value: Any, info: ValidationInfo) -> Any:
        if isinstance(value, bool) and info.field_name is not None:
            annotation = cls.model_fields[info.field_name].annotation
            if annotation is not bool:
                raise PydanticCustomError(
                    "float_type", "must be a number, not {given}", {"given": str(value).lower()}
                )
        return value


_In = RequestModel


class SweepRequest(_In):
    design: Design
    param: str = Field(
        description="Part to vary, e.g. RC, RB2, C2 (see ringwise.design.PARAMETERS)"
    )
    start: float | str = Field(description="First value, SI units or text such as 100, 2k2, 1n")
    stop: float | str = Field(description="Last value")
    points: int = Field(
        DEFAULT_SWEEP_POINTS,
        ge=2,
        le=MAX_SWEEP_POINTS,
        description=f"Number of values, 2 to {MAX_SWEEP_POINTS}",
    )
    scale: Literal["log", "linear"] | None = Field(
        None, description="Spacing of the values (default: log, linear for temperature_C)"
    )


class ThresholdOut(BaseModel):
    param: str
    value: float | None = Field(description="Value of the part at loop gain 1 (null: none found)")
    current: float = Field(description="Its value in the design")
    reason: str | None = Field(description="Why no value was found, when none was")


class SweepOut(BaseModel):
    param: str
    values: list[float]
    f_osc: list[float | None] = Field(description="Oscillation frequency at each value, Hz")
    gain: list[float | None] = Field(description="Loop gain at each value")
    valid: list[bool] = Field(description="False where the design is not valid or has no DC point")
    threshold: ThresholdOut


class ThresholdRequest(_In):
    design: Design
    param: str | None = Field(None, description="Part to vary (default: the gain-setting resistor)")


class SheetRequest(_In):
    fields: dict[str, str] = Field(
        description="Form texts by field name, as typed (L, C1, RB2, topology, name, ...)"
    )
    sweep_param: str | None = Field(None, description="Part of the what-if plot")
    figures: list[str] | None = Field(
        None,
        max_length=len(SHEET_FIGURES),
        description="The plots to answer with, by name: "
        f"{', '.join(SHEET_FIGURES)} (default: every one the design has)",
    )

    @field_validator("figures")
    @classmethod
    def _known_figures(cls, names: list[str] | None) -> list[str] | None:
        unknown = [n for n in names or () if n not in SHEET_FIGURES]
        if unknown:
            raise PydanticCustomError(
                "value_error",
                "unknown plot {unknown}; known: {known}",
                {"unknown": ", ".join(map(repr, unknown)), "known": ", ".join(SHEET_FIGURES)},
            )
        return names


class SheetSweepRequest(_In):
    fields: dict[str, str]
    param: str | None = None
    threshold_hint: float | None = Field(
        None, description="Threshold already known, used to choose the span"
    )


class ProblemOut(BaseModel):
    field: str = Field(description="Dotted path of the field in the request (tank.C2, points)")
    message: str = Field(description="What is wrong and what is allowed")
    type: str = Field(description="Machine-readable kind (greater_than_equal, too_large, ...)")


class ErrorOut(BaseModel):
    """The one shape of every error answer (app/web/errors.py)."""

    status: int = Field(description="The HTTP status again")
    error: str = Field(description="Its name: invalid-input, not-found, too-large, ...")
    message: str = Field(description="The first problem, in one line")
    problems: list[ProblemOut]


class SampleOut(BaseModel):
    name: str = Field(description="Key of the sample: GET /api/designs/{name}")
    title: str
    topology: str
    url: str = Field(description="The sheet opened on this sample")


class ImportOut(BaseModel):
    fields: dict[str, str]
    query: str


class FieldStateOut(BaseModel):
    text: str = Field(description="The text as typed")
    value: float | str | None = Field(
        description="Its value in SI units (null when blank or wrong)"
    )
    display: str = Field(description="The value as the sheet shows it")
    error: str | None = Field(description="What is wrong with it, naming the limit")
    step: float | None = Field(description="Slider step near the value (null: no slider)")


class SheetProblemOut(BaseModel):
    field: str = Field(description="Dotted path of the problem (tank.C2, design, sweep_param)")
    message: str
    type: str
    input: str | None = Field(description="The form field it belongs to (null: the design)")


class ShownFigureOut(BaseModel):
    value: Any = Field(description="Raw value (SI), a word, a flag, or null")
    text: str = Field(description="Display text with unit")
    raw: str = Field(description="The value as data-value holds it (shortest float text)")
    hidden: bool | None = None


class SheetView(BaseModel):
    """What the sheet shows for a set of form texts (``POST /api/sheet``).

    ``result`` is exactly ``POST /api/analyze``'s answer; ``shown`` holds the
    display text of every figure of ``ringwise.display``, keyed by result path.
    """

    ok: bool = Field(description="The texts make a design and it was analysed")
    fields: dict[str, FieldStateOut]
    problems: list[SheetProblemOut]
    link_problems: list[dict[str, Any]]
    result: Result | None
    design: dict[str, Any] | None = Field(description="The design document of the texts")
    shown: dict[str, ShownFigureOut] | None
    noise_offsets: list[dict[str, Any]]
    part_rows: list[dict[str, Any]]
    figures: dict[str, dict[str, Any]] | None = Field(
        description="The sheet's plots as Plotly figures ({data, layout}) by name "
        "(ringwise.figures): loop, reactance, budget, noise, tuning (those the "
        "request named); sweep on a page"
    )
    budget_caption: str = Field(description="The hand formula with its numbers, and the gap")
    unused: list[str]
    sweep_options: list[Any]
    sweep_param: str | None
    query: str = Field(description="The share link's query for these texts")
    topology: str
