"""E-series against IEC 60063, and snapping a design to standard values."""

from __future__ import annotations

import pytest

from ringwise.preferred import SeriesError, nearest, snap_design, values
from tests.conftest import load_sample, sample_paths

# IEC 60063:2015, "Preferred number series for resistors and capacitors",
# tables of the E6 … E96 series (typed from the standard's lists, from memory).
IEC_60063 = {
    "E6": "10 15 22 33 47 68",
    "E12": "10 12 15 18 22 27 33 39 47 56 68 82",
    "E24": "10 11 12 13 15 16 18 20 22 24 27 30 33 36 39 43 47 51 56 62 68 75 82 91",
    "E48": (
        "100 105 110 115 121 127 133 140 147 154 162 169 178 187 196 205 215 226 237 249 "
        "261 274 287 301 316 332 348 365 383 402 422 442 464 487 511 536 562 590 619 649 "
        "681 715 750 787 825 866 909 953"
    ),
    "E96": (
        "100 102 105 107 110 113 115 118 121 124 127 130 133 137 140 143 147 150 154 158 "
        "162 165 169 174 178 182 187 191 196 200 205 210 215 221 226 232 237 243 249 255 "
        "261 267 274 280 287 294 301 309 316 324 332 340 348 357 365 374 383 392 402 412 "
        "422 432 442 453 464 475 487 499 511 523 536 549 562 576 590 604 619 634 649 665 "
        "681 698 715 732 750 768 787 806 825 845 866 887 909 931 953 976"
    ),
}


@pytest.mark.parametrize("series", list(IEC_60063))
def test_series_match_the_standard_entry_by_entry(series: str) -> None:
    assert values(series) == tuple(int(v) for v in IEC_60063[series].split())


def test_e24_is_not_the_rounded_geometric_series() -> None:
    # IEC 60063: 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2 differ from
    # round(10^(i/24), 1) — the reason the table, not a formula, is the reference.
    geometric = [round(10 ** (i / 24), 1) for i in range(24)]
    standard = [v / 10 for v in values("E24")]
    differ = {s for s, g in zip(standard, geometric, strict=True) if abs(s - g) > 1e-9}
    assert differ == {2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2}


@pytest.mark.parametrize(
    ("value", "series", "expected"),
    [(4.6e3, "E24", 4.7e3), (2.3e-9, "E12", 2.2e-9), (1.03e3, "E96", 1.02e3), (5.0, "E6", 4.7)],
)
def test_nearest(value: float, series: str, expected: float) -> None:
    assert nearest(value, series) == pytest.approx(expected)


def test_unknown_series_is_named() -> None:
    with pytest.raises(SeriesError, match="unknown series 'E7'"):
        values("E7")


@pytest.mark.parametrize("path", sample_paths(), ids=lambda p: p.name)
def test_snapping_reports_its_effect(path) -> None:
    design = load_sample(path)
    result = snap_design(design, "E6")
    for _part, before, after in result.changes:
        assert before != after
        assert after == pytest.approx(nearest(before, "E6"))
    assert result.f_after is not None
    # the report is the full model's figures of the two designs
    again = snap_design(result.design, "E6")
    assert again.changes == []
    assert again.f_before == pytest.approx(result.f_after)


def test_keep_the_frequency_retrims_one_capacitor() -> None:
    from tests.conftest import BASE_CE, design_from

    # off-series values whose snapping to E12 moves f by about 4 %
    design = design_from(BASE_CE, tank__C1="1.07n", tank__C2="2.05n", tank__L="10.6u")
    plain = snap_design(design, "E12")
    assert abs(plain.f_after / plain.f_before - 1) > 0.03 and plain.trim is None
    kept = snap_design(design, "E12", keep_frequency=True)
    assert kept.trim is not None and kept.trim.reason is None
    assert kept.trim.part == "C1"  # the smaller of C1, C2
    assert abs(kept.f_after / kept.f_before - 1) < 5e-3
    # the trimmed capacitor is one or two E12 values in parallel (IEC 60063 E12)
    assert all(nearest(v, "E12") == pytest.approx(v) for v in kept.trim.parts)
    assert dict((p, b) for p, _, b in kept.changes)["C1"] == pytest.approx(sum(kept.trim.parts))
    assert pytest.approx(sum(kept.trim.parts)) == kept.design.tank.C1
