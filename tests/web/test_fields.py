"""The form's conversions (app/web/fields.py): link, document, per-field checks."""

from __future__ import annotations

from urllib.parse import parse_qsl, urlencode

import pytest

from ringwise.design import PARAMETERS, Design
from ringwise.web.fields import (
    BY_NAME,
    FIELDS,
    PAGE_STATE,
    DocumentError,
    check_field,
    document,
    from_query,
    page_state,
    texts_from_document,
    to_query,
)
from ringwise.web.samples import DEFAULT_SAMPLE, sample_texts, samples

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


def test_link_carries_the_page_state_beside_the_design():
    items = [("design", "clapp-clock-1M"), ("what_if", "RB2"), ("spread_samples", "5000"),
             ("bench_f", "1.012M"), ("run_cycles", "600")]  # fmt: skip
    texts, problems = from_query(items, SAMPLES, DEFAULT_SAMPLE)
    assert problems == []  # page state is not an unknown parameter
    assert texts == SAMPLES["clapp-clock-1M"]
    assert page_state(items) == {"what_if": "RB2", "spread_samples": "5000",
                                 "bench_f": "1.012M", "run_cycles": "600"}  # fmt: skip
    assert set(page_state(items)) <= set(PAGE_STATE)


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


#: A tolerances section with every kind of entry (values made up for the round trip).
TOLERANCES = {
    "R": 0.02,
    "C": "30m",
    "L": 0.05,
    "Q_L": 0.1,
    "beta_ratio": 2.5,
    "IS_ratio": 1.5,
    "per_part": {"C1": 0.01, "L": "20m"},
    "dielectric": {"C1": "X7R", "CE": "C0G"},
    "L_tempco_ppm": 50,
    "T_min": -20,
    "T_max": 70,
}


def test_tolerances_round_trip_through_form_link_and_file():
    doc = {**samples()[DEFAULT_SAMPLE].document, "tolerances": TOLERANCES}
    texts = texts_from_document(doc)
    assert texts["tol_C"] == "30m" and texts["diel_C1"] == "X7R"
    assert texts["tol_parts"] == "C1=0.01; L=20m"
    query = urlencode(to_query(texts))
    back, problems = from_query(parse_qsl(query, keep_blank_values=True), SAMPLES, DEFAULT_SAMPLE)
    assert problems == [] and back == texts
    assert document(back, for_file=True)["tolerances"] == TOLERANCES
    design = Design.model_validate(document(back))
    assert design.tolerances.of("L") == 0.02 and design.tolerances.dielectric_of("CE") == "C0G"


def test_blank_tolerances_leave_the_section_out():
    assert "tolerances" not in document(SAMPLES[DEFAULT_SAMPLE])


@pytest.mark.parametrize(
    ("name", "text", "needle"),
    [
        ("tol_parts", "C9=0.1", "'C9' is not a part"),
        ("tol_parts", "C1", "is not part=value"),
        ("tol_parts", "C1=0.9", "C1:"),
        ("diel_C2", "Y5V", "must be one of C0G, X7R"),
        ("tol_R", "0.7", "0.5"),
    ],
)
def test_tolerance_fields_report(name, text, needle):
    assert needle in check_field(BY_NAME[name], text).error


def test_tolerance_problem_goes_to_its_own_input_not_the_tank():
    from ringwise.web.view import build_view

    texts = {**SAMPLES[DEFAULT_SAMPLE], "T_min": "90", "T_max": "80"}
    view = build_view(texts, with_sweep=False)
    assert not view["ok"]
    assert view["fields"]["L"]["error"] is None
    assert any("T_min" in p["message"] for p in view["problems"])


def test_the_choke_feed_travels_through_form_document_and_link():
    texts = {**SAMPLES[DEFAULT_SAMPLE], "feed": "choke", "L_ch": "4m7", "Q_ch": "35"}
    doc = document(texts)
    assert doc["bias"]["feed"] == "choke" and doc["bias"]["L_ch"] == "4m7"
    assert doc["bias"]["f_ch"] is None  # blank self-resonance: none
    design = Design.model_validate(doc)
    assert design.choke_fed and design.bias.L_ch == pytest.approx(4.7e-3)
    back = texts_from_document(doc)
    assert (back["feed"], back["L_ch"], back["Q_ch"]) == ("choke", "4m7", "35")
    assert ("feed", "choke") in to_query(texts)
    assert check_field(BY_NAME["feed"], "coil").error is not None


def test_idle_inputs_follow_the_form_and_the_feed():
    from ringwise.web.view import idle_by_form

    idle = idle_by_form()
    assert "RC" in idle["common-emitter|choke"] and "L_ch" not in idle["common-emitter|choke"]
    assert "L_ch" in idle["common-base|resistor"] and "RC" not in idle["common-base|resistor"]
    assert {"RC", "L_ch", "feed"} <= set(idle["common-collector|resistor"])


def test_the_crystal_section_is_absent_when_blank_and_whole_when_given():
    texts = dict(SAMPLES[DEFAULT_SAMPLE])
    assert "crystal" not in document(texts)
    texts.update(R_x1="25", f_xs="10M", C_x1="18f", C_x0="5p")
    doc = document(texts)
    assert doc["crystal"]["f_xs"] == "10M" and doc["crystal"]["L_x1"] is None
    design = Design.model_validate(doc)
    assert design.crystal is not None and design.crystal.L1 > 0
    back = texts_from_document({**doc, "crystal": None})
    assert back["R_x1"] == ""
    assert texts_from_document(doc)["C_x0"] == "5p"
