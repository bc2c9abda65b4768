"""The form's conversions (app/web/fields.py): link, document, per-field checks."""

from __future__ import annotations

from urllib.parse import parse_qsl, urlencode

import pytest

from app.design import PARAMETERS, Design
from app.web.fields import (
    BY_NAME,
    FIELDS,
    DocumentError,
    check_field,
    document,
    from_query,
    texts_from_document,
    to_query,
)
from app.web.samples import DEFAULT_SAMPLE, sample_texts, samples

SAMPLES = sample_texts()


def test_every_design_field_has_an_input():
    names = {f.name for f in FIELDS}
    assert set(PARAMETERS) <= names
    assert {"name", "topology", "temperature_C", "preset"} <= names


@pytest.mark.parametrize("key", sorted(SAMPLES))
def test_samples_validate_through_the_form(key):
    design = Design.model_validate(document(SAMPLES[key]))
    assert design == Design.model_validate(samples()[key].document)


@pytest.mark.parametrize("key", sorted(SAMPLES))
def test_link_round_trip_is_exact(key):
    texts = SAMPLES[key]
    query = urlencode(to_query(texts))
    back, problems = from_query(parse_qsl(query, keep_blank_values=True), SAMPLES, DEFAULT_SAMPLE)
    assert problems == []
    assert back == texts


def test_link_keeps_text_as_typed():
    texts = {**SAMPLES[DEFAULT_SAMPLE], "C2": "4.7 nF", "name": "Bench #2 · µ & <b>"}
    back, _ = from_query(parse_qsl(urlencode(to_query(texts))), SAMPLES, DEFAULT_SAMPLE)
    assert back["C2"] == "4.7 nF"
    assert back["name"] == "Bench #2 · µ & <b>"


def test_link_reports_unknown_repeated_and_unknown_sample():
    _texts, problems = from_query(
        [("L", "1u"), ("L", "2u"), ("colour", "red"), ("design", "../x")], SAMPLES, DEFAULT_SAMPLE
    )
    assert [(p["field"], p["type"]) for p in problems] == [
        ("L", "duplicate_parameter"),
        ("colour", "unknown_parameter"),
        ("design", "unknown_sample"),
    ]


def test_link_with_fields_is_the_whole_design():
    texts, _ = from_query([("L", "1u")], SAMPLES, DEFAULT_SAMPLE)
    assert texts["L"] == "1u"
    assert texts["C1"] == ""  # not filled from a sample behind the user's back


def test_sample_link_with_overrides():
    texts, _ = from_query([("design", "clapp-clock-1M"), ("C2", "10n")], SAMPLES, DEFAULT_SAMPLE)
    assert texts["C2"] == "10n"
    assert texts["L"] == SAMPLES["clapp-clock-1M"]["L"]


@pytest.mark.parametrize(
    ("name", "text", "value", "display"),
    [
        ("C2", "2n2", 2.2e-9, "2.2 nF"),  # RKM code, IEC 60062
        ("RB1", "39k", 39e3, "39 kΩ"),
        ("RE", "4R7", 4.7, "4.7 Ω"),  # RKM code, IEC 60062
        ("L", "47 uH", 47e-6, "47 µH"),
        ("Q_L", "120", 120.0, "120"),
        ("C3", "", None, "none"),
    ],
)
def test_check_field_parses_with_the_core(name, text, value, display):
    state = check_field(BY_NAME[name], text)
    assert state.error is None
    assert state.value == (pytest.approx(value) if value else None)
    assert state.display == display


@pytest.mark.parametrize(
    ("name", "text"),
    [("L", "47uF"), ("C2", "-1"), ("RB2", "abc"), ("topology", "sideways"), ("preset", "x")],
)
def test_check_field_reports(name, text):
    state = check_field(BY_NAME[name], text)
    assert state.error
    assert state.text == text


def test_file_numbers_stay_numbers_and_texts_stay_texts():
    texts = {**SAMPLES[DEFAULT_SAMPLE], "beta": "200", "VA": "1E2", "Vcc": "9.0"}
    doc = document(texts, for_file=True)
    assert doc["device"]["beta"] == 200
    assert doc["device"]["VA"] == "1E2"  # 1E2 would come back as 100.0: kept as text
    assert doc["supply"]["Vcc"] == 9.0
    assert texts_from_document(doc) == texts


def test_document_errors_name_every_key():
    with pytest.raises(DocumentError) as info:
        texts_from_document({"format": "ringwise.design", "version": 1, "x": 1, "bias": {"Q": 2}})
    assert [p["field"] for p in info.value.problems] == ["x", "bias.Q"]


def test_blank_field_with_a_default_uses_the_core_default():
    state = check_field(BY_NAME["F_dB"], "")
    assert state.error is None
    assert state.display == "default 6"
    texts = dict(SAMPLES[DEFAULT_SAMPLE])
    assert "noise" not in document(texts)  # nothing set: the core's defaults apply
    doc = document({**texts, "F_dB": "8"})
    assert doc["noise"] == {"F_dB": "8"}
    assert Design.model_validate(doc).noise.F_dB == 8.0
