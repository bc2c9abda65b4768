"""The table of shown figures: every path exists in the result, and the table reads it."""

from __future__ import annotations

import pytest

from ringwise.analysis.analyze import analyze
from ringwise.design import PARAMETERS
from ringwise.display import (
    PANELS,
    PARAM_UNITS,
    RUN_SHOWN,
    SHOWN,
    STABILITY_SHOWN,
    format_value,
    lookup,
    table,
)
from ringwise.result import Result, SimulationResult
from tests.conftest import BASE_CE, design_from


def _has_path(model: type, path: str) -> bool:
    for key in path.split("."):
        if key.isdigit():  # an index into a list figure (output.harmonics_dBc.0)
            continue
        fields = getattr(model, "model_fields", {})
        if key not in fields:
            return False
        annotation = fields[key].annotation
        model = next(
            (
                a
                for a in getattr(annotation, "__args__", (annotation,))
                if hasattr(a, "model_fields")
            ),
            annotation,
        )
    return True


def test_every_shown_path_is_in_the_result_models() -> None:
    for fig in (*SHOWN, *STABILITY_SHOWN):
        assert _has_path(Result, fig.path), fig.path
    for row in RUN_SHOWN:
        assert _has_path(SimulationResult, row.path), row.path
    assert {fig.panel for fig in SHOWN} == {key for key, _ in PANELS}
    assert set(PARAMETERS) <= set(PARAM_UNITS)


def test_table_reads_the_result() -> None:
    result = analyze(design_from(BASE_CE)).model_dump(mode="json")
    rows = table(result)
    assert [r["path"] for r in rows] == [
        f.path for key, _ in PANELS for f in SHOWN if f.panel == key
    ]
    by_path = {r["path"]: r for r in rows}
    assert by_path["loop.f_osc"]["value"] == result["loop"]["f_osc"]
    assert by_path["loop.f_osc"]["text"].endswith("MHz")
    assert by_path["startup.threshold_value"]["unit"] == "Ω"  # RC, the gain setter
    assert by_path["operating_point.region"]["text"] == "active"


@pytest.mark.parametrize(
    ("value", "unit", "text"),
    [
        (2.2e-9, "F", "2.2 nF"),
        (None, "Hz", "—"),
        (0.05, "%", "5 %"),
        (True, "yesno", "yes"),
        (1.23456, "", "1.235"),
        (-3.0, "dB", "-3 dB"),
        ("active", "text", "active"),
    ],
)
def test_format_value(value, unit: str, text: str) -> None:
    # SI prefixes as the SI Brochure (BIPM) defines them (n = 1e-9); the rest our own convention.
    assert format_value(value, unit) == text


def test_lookup_indexes_lists_and_misses_cleanly() -> None:
    data = {"a": {"b": [{"c": 1.0}]}}
    assert lookup(data, "a.b.0.c") == 1.0
    assert lookup(data, "a.x") is None
    assert lookup(data, "a.b.5.c") is None
