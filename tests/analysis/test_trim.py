"""Trimming one tank capacitor for a frequency with the full model."""

from __future__ import annotations

import pytest

from ringwise.analysis.operating import solve
from ringwise.analysis.trim import (
    MIN_OVER_JUNCTION,
    TRIM_RANGE,
    build_value,
    trim_frequency,
    trim_part,
)
from ringwise.preferred import nearest
from tests.conftest import BASE_CE, design_from, load_sample, sample_paths


def _is_e24(value: float) -> bool:
    # IEC 60063 E24 figures
    return nearest(value, "E24") == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.stem)
@pytest.mark.parametrize("factor", [1.03, 0.96])
def test_trim_meets_the_frequency_with_standard_parts(path, factor: float) -> None:
    design = load_sample(path)
    if design.crystal is not None:
        pytest.skip("a crystal sets the frequency: a capacitor pulls it by ppm, not by %")
    f = solve(design).f_osc * factor
    t = trim_frequency(design, f)
    assert t.reason is None
    assert t.part == trim_part(design)
    assert all(_is_e24(v) for v in t.parts) and 1 <= len(t.parts) <= 2
    # the exact value meets f; the built one within the pair's resolution
    assert t.exact == pytest.approx(sum(t.parts), rel=0.01)
    assert t.f_after == pytest.approx(f, rel=5e-3)
    assert solve(t.design).f_osc == pytest.approx(t.f_after, rel=1e-9)
    assert "trimmed from" in t.text


def test_trim_part_is_c3_in_the_clapp_form_else_the_smaller() -> None:
    assert trim_part(design_from(BASE_CE, tank__C3="100p")) == "C3"
    assert trim_part(design_from(BASE_CE)) == "C1"  # 1n against 2n2
    assert trim_part(design_from(BASE_CE, tank__C1="4n7")) == "C2"


def test_build_value_single_or_pair() -> None:
    assert build_value(2.2e-9, "E24") == (2.2e-9,)
    pair = build_value(1.116e-9, "E12")
    assert len(pair) == 2 and sum(pair) == pytest.approx(1.116e-9, rel=0.01)


def test_out_of_reach_or_below_the_junction_says_why() -> None:
    design = design_from(BASE_CE)
    far = trim_frequency(design, 0.2 * solve(design).f_osc, part="C2")
    assert far.reason is not None and f"{TRIM_RANGE:g}×" in far.reason
    assert far.design is design
    # C2 carries C_π (some 24 pF here): a C2 under 5× that is refused with the figures
    small = design_from(BASE_CE, tank__C2="200p", tank__C1="1n")
    near_pi = trim_frequency(small, 1.3 * solve(small).f_osc, part="C2")
    assert near_pi.reason is not None
    assert f"below {MIN_OVER_JUNCTION:g}× the transistor's 23.94 pF" in near_pi.reason
    assert near_pi.exact is not None and near_pi.exact < MIN_OVER_JUNCTION * 23.94e-12
