"""The bill of materials: every part, its standard series, its stress."""

from __future__ import annotations

import csv
import io
import json

import pytest

from ringwise.analysis.operating import solve
from ringwise.analysis.periodic import forget, steady_state
from ringwise.bom import RESISTOR_POWER_RATING, VARACTOR_PARTS, bill_of_materials
from ringwise.cli import main
from ringwise.design import get_param
from ringwise.preferred import CAPACITORS, INDUCTORS, RESISTORS
from tests.conftest import BASE_CE, design_from, load_sample, sample_paths


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.name)
def test_every_part_with_its_standard_series(path, capsys) -> None:
    design = load_sample(path)
    lines = bill_of_materials(design, json.loads(path.read_text()))
    used = {
        p
        for p in (*RESISTORS, *CAPACITORS, *INDUCTORS)
        if get_param(design, p) is not None and p not in design.unused_parts()
    }
    if design.varactor is not None:
        used |= set(VARACTOR_PARTS)  # its feed, its return and its coupling capacitor
    assert {line.reference for line in lines} == used
    for line in lines:
        # the samples are built from standard values (IEC 60063)
        assert line.series in ("E6", "E12", "E24"), line
        assert line.standard_value == pytest.approx(line.value)
    # the CLI's table lists the same parts
    assert main(["bom", str(path)]) == 0
    table = capsys.readouterr().out
    for line in lines:
        assert f"{line.reference} " in table and line.series in table


def test_stresses_are_the_steady_states() -> None:
    design = load_sample(sample_paths()[0])
    by_ref = {line.reference: line for line in bill_of_materials(design)}
    steady = {p.part: p for p in steady_state(solve(design)).parts}
    for ref, line in by_ref.items():
        assert line.stress_from == "steady state"
        # (a second solve starts warm: equal to Newton's tolerance)
        assert line.V_peak == pytest.approx(steady[ref].V_peak, rel=1e-6)
        assert pytest.approx(steady[ref].P, rel=1e-6, abs=1e-15) == line.P


def test_value_as_written_and_non_standard_values_are_named() -> None:
    design = design_from(BASE_CE, bias__RC="1k05", tank__C1="1n")
    lines = {line.reference: line for line in bill_of_materials(design, {"bias": {"RC": "1k05"}})}
    assert lines["RC"].written == "1k05"
    assert lines["RC"].series == "E48"  # 105 is an E48 value (IEC 60063)
    odd = {
        line.reference: line for line in bill_of_materials(design_from(BASE_CE, bias__RC="1k07"))
    }
    assert odd["RC"].series == "E96"
    odd = {
        line.reference: line for line in bill_of_materials(design_from(BASE_CE, bias__RC="1k234"))
    }
    assert odd["RC"].series is None
    assert odd["RC"].standard_value == pytest.approx(1.2e3)  # nearest E24 (IEC 60063)
    assert "not a standard value" in odd["RC"].note


def test_ratings_exceeded_are_noted() -> None:
    design = design_from(BASE_CE, ratings={"V_cap": 0.5}, bias__RE="10")
    lines = {line.reference: line for line in bill_of_materials(design)}
    assert any("rating" in line.note for ref, line in lines.items() if ref.startswith("C"))
    hot = [line for line in lines.values() if line.P and line.P > RESISTOR_POWER_RATING]
    assert all("assumed" in line.note for line in hot)


def test_bom_csv_parses_back_to_the_json(capsys) -> None:
    path = str(sample_paths()[0])
    forget()  # both runs start cold, so both find the very same orbit
    main(["bom", path, "--format", "json"])
    records = json.loads(capsys.readouterr().out)
    forget()
    main(["bom", path, "--format", "csv"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert [r["reference"] for r in rows] == [r["reference"] for r in records]
    for row, rec in zip(rows, records, strict=True):
        assert float(row["value"]) == rec["value"]
        assert float(row["V_peak"]) == rec["V_peak"]


def test_a_choke_fed_collector_lists_the_choke_not_rc() -> None:
    design = design_from(BASE_CE, bias__feed="choke", bias__L_ch="1m", bias__Q_ch=40)
    lines = {line.reference: line for line in bill_of_materials(design)}
    assert "RC" not in lines
    assert lines["L_ch"].kind == "inductor" and lines["L_ch"].series == "E6"  # 1.0 (IEC 60063)
    assert lines["L_ch"].V_peak is not None and lines["L_ch"].V_peak > 0


def test_a_varactor_design_lists_its_feed_return_and_coupling_capacitor() -> None:
    path = next(p for p in sample_paths() if p.stem == "varactor-lo-5M")
    design = load_sample(path)
    lines = {line.reference: line for line in bill_of_materials(design)}
    steady = {p.part: p for p in steady_state(solve(design)).parts}
    v = design.varactor
    assert lines["R_tune"].value == lines["R_ret"].value == v.R_tune
    assert lines["C_v"].value == v.C_v and lines["C_v"].kind == "capacitor"
    assert lines["C_v"].tolerance == design.tolerances.C
    for ref in VARACTOR_PARTS:
        assert lines[ref].V_peak == pytest.approx(steady[ref].V_peak, rel=1e-6)
