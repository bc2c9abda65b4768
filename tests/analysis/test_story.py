"""The loop-gain story: hand formula, full loop gain, and the losses between them."""

from __future__ import annotations

import math
from typing import Any

import pytest

from ringwise.analysis.analyze import analyze
from ringwise.analysis.story import REST_ELEMENT, REST_SHOWN_DB
from ringwise.design import Design
from tests.conftest import BASE_CE, design_from

#: A 455 kHz common-emitter sensor exciter on 12 V, values of our own, chosen
#: so that its figures are those of a worked case: hand 11.94, full 9.93, coil
#: 1.07 dB, divider 0.18 dB, r_π 0.17 dB, r_o 0.10 dB.
EXCITER_455K: dict[str, Any] = {
    "name": "sensor exciter 455 kHz",
    "topology": "common-emitter",
    "supply": {"Vcc": 12.0},
    "bias": {"RB1": "11.79k", "RB2": "2.509k", "RC": "558.1", "RE": "560.6", "CE": "470n"},
    "tank": {"L": "81.37u", "Q_L": 30.7, "C1": "1.834n", "C2": "8.351n"},
    "coupling": {"Cc1": "1u", "Cc2": "1u"},
    "device": {"preset": "general-purpose"},
}


def test_455k_exciter_gap_told_loss_by_loss() -> None:
    r = analyze(Design.model_validate(EXCITER_455K))
    story = r.loop.story
    assert story is not None
    assert story.formula == "g_m·RC·C1/C2"
    # the worked case's figures (our design reproduces them; common practice, no source)
    assert story.hand == pytest.approx(11.94, abs=0.01)
    assert story.full == pytest.approx(9.93, abs=0.01)
    costs = {loss.element: loss.cost_dB for loss in story.losses}
    for element, dB in (("L_loss", 1.07), ("divider", 0.18), ("r_pi", 0.17), ("r_o", 0.10)):
        assert costs[element] == pytest.approx(dB, abs=0.005)
    # the collector resistor is in the hand formula: no loss, no share
    assert "RC" not in costs
    rc = next(b for b in r.loop.budget if b.element == "RC")
    assert rc.in_hand and rc.share is None and rc.cost_dB > 10
    # the coil is the largest, and what each bar says is its cost in dB and %
    coil = story.losses[0]
    assert coil.element == "L_loss"
    assert coil.text == "1.07 dB · 11.6 %"


def test_parallel_losses_are_charged_in_turn() -> None:
    # Fed through a high-Q choke, the coil's loss is nearly the whole load on the
    # tank: with the others in place, removing it alone would look cheap; charged
    # in turn (largest first) it carries the gap and "the rest" stays small.
    design = design_from(BASE_CE, bias__feed="choke", bias__RC=None, bias__L_ch="1m", bias__Q_ch=40)
    story = analyze(design).loop.story
    assert story is not None and story.formula == "g_m·R_p·C1/C2"
    coil = story.losses[0]
    assert coil.element == "L_loss" and coil.share > 0.8
    rest = [x for x in story.losses if x.element == REST_ELEMENT]
    assert not rest or abs(rest[0].cost_dB) < 0.1
    assert sum(x.cost_dB for x in story.losses) == pytest.approx(story.gap_dB, abs=REST_SHOWN_DB)


def test_lines_sum_to_the_gap_and_rest_comes_last() -> None:
    r = analyze(design_from(BASE_CE, load={"R_load": 10e3}))
    story = r.loop.story
    assert story is not None
    assert story.gap_dB == pytest.approx(20 * math.log10(story.hand / story.full))
    assert sum(loss.cost_dB for loss in story.losses) == pytest.approx(
        story.gap_dB, abs=REST_SHOWN_DB
    )
    listed = [loss for loss in story.losses if loss.element != REST_ELEMENT]
    assert [x.cost_dB for x in listed] == sorted((x.cost_dB for x in listed), reverse=True)
    assert story.losses[-1].element == REST_ELEMENT or len(listed) == len(story.losses)
    for loss in story.losses:
        assert loss.fraction == pytest.approx(1 - 10 ** (-loss.cost_dB / 20))
        assert loss.share == pytest.approx(loss.cost_dB / story.gap_dB)
    assert "R_load" in {loss.element for loss in story.losses}


@pytest.mark.parametrize(
    ("topology", "formula"),
    [
        ("common-base", "g_m·RC·C1·C2/(C1+C2)²"),
        ("common-collector", "g_m·RE·C1/C2"),
    ],
)
def test_each_form_starts_from_its_own_formula(topology: str, formula: str) -> None:
    bias = {
        "common-base": {"RC": "2k2", "CE": None, "CB": "100n"},
        "common-collector": {"RC": None, "CE": None},
    }[topology]
    design = design_from(BASE_CE, topology=topology, **{f"bias__{k}": v for k, v in bias.items()})
    r = analyze(design)
    story = r.loop.story
    assert story is not None
    assert story.formula == formula
    assert story.numbers.endswith(f"= {story.hand:.4g}")
    setter = "RE" if topology == "common-collector" else "RC"
    assert setter not in {loss.element for loss in story.losses}


def test_clapp_formula_says_c3_sets_only_the_frequency() -> None:
    r = analyze(design_from(BASE_CE, tank__C3="220p"))
    assert r.loop.story is not None
    assert "C3 = 220 pF sets f, not the gain" in r.loop.story.numbers
