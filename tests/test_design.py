"""The design model: parsing, bounds, cross-field rules, messages that name the field."""

from __future__ import annotations

import copy
import json

import pytest
from pydantic import ValidationError

from ringwise.design import PARAMETERS, Design, get_param, param_limits, with_param
from ringwise.errors import describe_validation_error
from ringwise.presets import DEVICE_PRESETS
from tests.conftest import BASE_CE, load_sample, sample_paths


def _problems(data: dict) -> list[dict]:
    with pytest.raises(ValidationError) as info:
        Design.model_validate(data)
    return describe_validation_error(info.value)


def test_text_values_become_SI() -> None:
    d = Design.model_validate(BASE_CE)
    assert pytest.approx(2.2e-9) == d.tank.C2
    assert pytest.approx(39e3) == d.bias.RB1
    assert pytest.approx(10e-6) == d.tank.L


def test_preset_fills_device_and_explicit_values_win() -> None:
    data = copy.deepcopy(BASE_CE)
    data["device"] = {"preset": "rf", "beta": 80}
    d = Design.model_validate(data)
    assert d.device.beta == 80
    assert d.device.fT == DEVICE_PRESETS["rf"]["fT"]


def test_negative_capacitor_names_field_and_limit() -> None:
    data = copy.deepcopy(BASE_CE)
    data["tank"]["C2"] = "-2n2"
    assert _problems(data) == [
        {
            "field": "tank.C2",
            "message": "must be at least 1 fF, got '-2n2' = -2.2 nF",
            "type": "greater_than_equal",
        }
    ]


def test_garbage_text_names_field() -> None:
    data = copy.deepcopy(BASE_CE)
    data["bias"]["RB2"] = "ten k"
    [problem] = _problems(data)
    assert problem["field"] == "bias.RB2"
    assert "'ten k' is not a number" in problem["message"]


def test_wrong_unit_is_caught() -> None:
    data = copy.deepcopy(BASE_CE)
    data["tank"]["L"] = "47uF"
    [problem] = _problems(data)
    assert problem["field"] == "tank.L"
    assert "this field takes 'H'" in problem["message"]


def test_missing_and_extra_fields() -> None:
    data = copy.deepcopy(BASE_CE)
    del data["tank"]["L"]  # optional only where a crystal replaces the coil
    fields = {p["field"]: p["message"] for p in _problems(data)}
    assert fields == {"tank.L": "is required without a crystal (the coil sets the tank)"}
    data = copy.deepcopy(BASE_CE)
    del data["supply"]["Vcc"]
    data["tank"]["Lx"] = 1
    fields = {p["field"]: p["message"] for p in _problems(data)}
    assert fields == {"supply.Vcc": "is required", "tank.Lx": "is not a field of the design format"}


def test_form_needs_its_parts() -> None:
    data = copy.deepcopy(BASE_CE)
    data["bias"]["CE"] = None
    assert _problems(data) == [
        {
            "field": "bias.CE",
            "message": "is required by the common-emitter form",
            "type": "part_required",
        }
    ]
    data = copy.deepcopy(BASE_CE)
    data["topology"] = "common-base"
    [problem] = _problems(data)
    assert problem["field"] == "bias.CB"


def test_unknown_preset() -> None:
    data = copy.deepcopy(BASE_CE)
    data["device"] = {"preset": "mystery"}
    [problem] = _problems(data)
    assert problem["field"] == "device"
    assert "unknown transistor preset 'mystery'" in problem["message"]


def test_unused_parts_are_listed() -> None:
    data = copy.deepcopy(BASE_CE)
    data["topology"] = "common-collector"
    assert Design.model_validate(data).unused_parts() == ["RC", "CE"]


def test_params_roundtrip() -> None:
    d = Design.model_validate(BASE_CE)
    for name in PARAMETERS:
        value = get_param(d, name)
        if value is not None:
            assert get_param(with_param(d, name, value * 1.1), name) == pytest.approx(value * 1.1)
    with pytest.raises(ValidationError):
        with_param(d, "C2", -1.0)


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.name)
def test_sample_export_import_roundtrip(path) -> None:
    d = load_sample(path)
    again = Design.model_validate(json.loads(d.model_dump_json()))
    assert again == d
    assert again.model_dump_json() == d.model_dump_json()


def test_versioned_loader_reads_version_1_and_names_unknown_versions() -> None:
    from ringwise.design import load_design

    data = copy.deepcopy(BASE_CE)
    data["version"] = 1
    assert load_design(data) == Design.model_validate(data)
    data["version"] = 99
    with pytest.raises(ValidationError) as info:
        load_design(data)
    [problem] = describe_validation_error(info.value)
    assert problem["field"] == "version" and "99" in problem["message"]


@pytest.mark.parametrize("name", PARAMETERS)
def test_every_parameter_has_its_field_bounds(name):
    # the bounds come from the model's own fields, optional sections included
    lo, hi = param_limits(name)
    assert lo < hi
