"""Tick choice and tick labels (app/figures/axes.py)."""

from __future__ import annotations

import math

import pytest

from ringwise.figures import axes


def _mantissas(ticks):
    return {round(t / 10 ** math.floor(math.log10(t)), 9) for t in ticks}


@pytest.mark.parametrize(
    ("lo", "hi", "unit"),
    [(250e3, 4e6, "Hz"), (3e-12, 3e-8, "F"), (0.004, 30.0, ""), (10.0, 1e7, "Hz"), (33, 3300, "Ω")],
)
def test_log_ticks_are_round_and_few(lo, hi, unit):
    a = axes.log_axis(lo, hi, unit, max_labels=7)
    ticks = a["tickvals"]
    assert 3 <= len(ticks) <= 7
    assert all(lo * (1 - 1e-9) <= t <= hi * (1 + 1e-9) for t in ticks)
    # 1-2-5 (or 1-2-3-5) per decade: common practice, no source
    assert _mantissas(ticks) <= {1.0, 2.0, 3.0, 5.0}
    assert len(set(a["ticktext"])) == len(ticks)
    assert a["range"] == pytest.approx([math.log10(lo), math.log10(hi)])
    # the minor ticks are unlabelled and never sit on a labelled one
    assert not set(a["minor"]["tickvals"]) & set(ticks)


def test_log_labels_are_whole_values_in_engineering_notation():
    a = axes.log_axis(0.1, 10.0, "", 7)
    assert a["ticktext"] == ["0.1", "0.2", "0.3", "0.5", "1", "2", "3", "5", "10"][
        : len(a["tickvals"])
    ] or a["ticktext"] == ["0.1", "0.2", "0.5", "1", "2", "5", "10"]
    assert axes.log_axis(100e3, 10e6, "Hz", 7)["ticktext"] == [
        "100 kHz",
        "200 kHz",
        "500 kHz",
        "1 MHz",
        "2 MHz",
        "5 MHz",
        "10 MHz",
    ]


def test_short_log_span_falls_back_to_linear_steps():
    a = axes.log_axis(900e3, 1.1e6, "Hz", 7)
    assert a["ticktext"] == ["900 kHz", "950 kHz", "1 MHz", "1.05 MHz", "1.1 MHz"]


def test_linear_ticks_read_like_a_person_writes_them():
    a = axes.linear_axis(13.53e6, 13.71e6, "Hz", 6)
    assert a["ticktext"] == ["13.55 MHz", "13.6 MHz", "13.65 MHz", "13.7 MHz"]
    a = axes.linear_axis(-1.2e-3, 3.1e-3, "V", 6)
    assert a["ticktext"] == ["−1 mV", "0 V", "1 mV", "2 mV", "3 mV"]
    # no float dust: 0.1 + 0.2 is written 0.3
    assert axes.linear_axis(0.0, 0.9, "", 10)["tickvals"][3] == 0.3


@pytest.mark.parametrize(("lo", "hi"), [(-118.3, 86.3), (-10.0, 10.0), (-300.0, 250.0)])
def test_phase_ticks_at_multiples_of_30_or_45_degrees(lo, hi):
    a = axes.phase_axis(lo, hi, 7)
    ticks = a["tickvals"]
    assert len(ticks) <= 7
    assert all(t % 30 == 0 or t % 45 == 0 for t in ticks)
    assert ticks[0] <= lo and ticks[-1] >= hi
    assert all(text.endswith("°") for text in a["ticktext"])
