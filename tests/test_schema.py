"""The design file's JSON Schema accepts every sample and every exported design file.

Validated with jsonschema-rs (a JSON Schema draft 2020-12 validator library).
"""

from __future__ import annotations

import json

import jsonschema_rs
import pytest

from ringwise.cli import main
from ringwise.design import Design
from ringwise.schema import design_schema
from tests.conftest import sample_paths


@pytest.fixture(scope="module")
def client():
    from fastapi.testclient import TestClient

    from ringwise.web.server import create_app

    with TestClient(create_app(), base_url="http://127.0.0.1") as c:
        yield c


@pytest.fixture(scope="module")
def validator():
    return jsonschema_rs.Draft202012Validator(design_schema())


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.name)
def test_every_sample_validates(validator, path) -> None:
    assert validator.is_valid(json.loads(path.read_text())), list(
        validator.iter_errors(json.loads(path.read_text()))
    )


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.name)
def test_every_exported_design_file_validates(validator, client, path) -> None:
    # the sheet's export of the sample, and the CLI's snapped design
    exported = client.get(f"/api/export?design={path.stem}")
    assert exported.status_code == 200
    assert validator.is_valid(exported.json())


def test_cli_designs_validate(validator, capsys) -> None:
    assert main(["snap", str(sample_paths()[0]), "--series", "E12"]) == 0
    assert validator.is_valid(json.loads(capsys.readouterr().out))


def test_the_schema_still_refuses_what_the_loader_refuses(validator) -> None:
    doc = json.loads(sample_paths()[0].read_text())
    assert not validator.is_valid({**doc, "topology": "hartley"})
    assert not validator.is_valid({**doc, "unknown": 1})
    assert not validator.is_valid({**doc, "tank": {**doc["tank"], "L": -1.0}})
    assert not validator.is_valid({**doc, "tank": {**doc["tank"], "L": [1]}})


def test_ringwise_schema_prints_it(capsys) -> None:
    assert main(["schema"]) == 0
    assert json.loads(capsys.readouterr().out) == design_schema()


def test_a_preset_stands_for_the_device_values(validator) -> None:
    # the loader fills the values from the class; the schema accepts what the loader accepts
    design = json.loads(sample_paths()[0].read_text())
    design["device"] = {"preset": design["device"].get("preset") or "general-purpose"}
    assert validator.is_valid(design), list(validator.iter_errors(design))
    assert Design.model_validate(design).device.beta > 1
    design["device"] = {"beta": 100}
    assert not validator.is_valid(design)
