"""The sliders' value ladders (app/web/ladders.py)."""

from __future__ import annotations

from ringwise.web.ladders import E24, ladder, nearest_step


def test_e24_ladder():
    # E24 series, IEC 60063
    assert E24[:6] == (1.0, 1.1, 1.2, 1.3, 1.5, 1.6)
    assert len(E24) == 24
    values, texts = ladder("RC")
    assert texts[values.index(330.0)] == "330"
    assert ladder("C2")[1][nearest_step("C2", 4.7e-9)] == "4.7n"
    assert nearest_step("C3", 1e-9) is None
