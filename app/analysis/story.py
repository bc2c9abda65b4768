r"""The loop-gain story: from the hand formula to the full circuit.

The hand method gives the loop gain of the lossless circuit with only the
gain-setting resistor (:func:`ringwise.circuit.topologies.hand_formula`);
the full model counts everything.  The gap between the two, in dB,

.. math:: \Delta = 20\log_{10}(T_{hand}/T_{full}),

is told as the losses the hand method ignores, added one after another to
the circuit with all of them ideal (:func:`ringwise.analysis.budget.sequential_costs`),
the largest first by the budget's one-at-a-time cost.  Each loss is charged
for what it takes given those before it, so the costs add up however the
losses interact (losses in parallel across the tank do: one alone costs
little while the others remain).  One more line, "the rest", holds what the
hand formula itself leaves out (the circuit with every loss ideal against
the formula) and the losses below ``REST_SHOWN_DB``, so the lines sum to Δ
(to within ``REST_SHOWN_DB``: a smaller rest is not listed).

Each loss's cost is given in dB and as the fraction of the loop gain it
takes away, :math:`1 - 10^{-c/20}` (1.07 dB takes 11.6 %), and as its share
of the gap, :math:`c/\Delta`.  The gain-setting resistor is no loss here: it
is in the hand formula.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

from ringwise.analysis.budget import BudgetLine, sequential_costs
from ringwise.analysis.operating import Solved
from ringwise.circuit.topologies import HandFormula

#: A loss is listed on its own, and "the rest" at all, when at least this
#: large, dB: below it, it would print as 0.00 dB.  Smaller losses go into
#: "the rest".
REST_SHOWN_DB: Final = 0.005
REST_ELEMENT: Final = "rest"
REST_LABEL: Final = "The rest (the hand formula's own approximations, small losses)"


@dataclass(frozen=True)
class Loss:
    """One loss the hand method ignores: what it costs the loop gain.

    ``cost_dB`` is 20·log10(gain without it / gain); ``fraction`` the part
    of the loop gain it takes, 1 − 10^(−cost/20); ``share`` its cost over
    the whole gap (None when there is no gap to share); ``text`` what the
    bar says.
    """

    element: str
    label: str
    cost_dB: float
    fraction: float
    share: float | None
    text: str


@dataclass(frozen=True)
class GainStory:
    """Hand formula, full loop gain, the gap (dB) and the losses that make it."""

    formula: HandFormula
    full: float
    gap_dB: float
    losses: list[Loss]


def _loss(element: str, label: str, cost_dB: float, gap_dB: float) -> Loss:
    fraction = 1.0 - 10.0 ** (-cost_dB / 20.0)
    share = cost_dB / gap_dB if gap_dB != 0 else None
    text = f"{cost_dB:.2f} dB · {100 * fraction:.1f} %"
    return Loss(element, label, cost_dB, fraction, share, text)


def gain_story(
    formula: HandFormula, solved: Solved, budget: list[BudgetLine], gain_setter: str
) -> GainStory | None:
    """The losses between the hand formula and the full loop gain, largest first,
    "the rest" last.

    ``None`` when either gain is not a positive number (no oscillation
    frequency, or a hand formula that gives nothing to compare).
    """
    full = solved.gain
    if not (formula.value > 0 and full > 0 and math.isfinite(full)):
        return None
    gap = 20.0 * math.log10(formula.value / full)
    # largest one-at-a-time cost first: each loss is then charged, in turn, for
    # what it takes from the circuit with the ones before it
    ranked = sorted(
        (b for b in budget if not b.in_hand and b.cost_dB is not None),
        key=lambda b: b.cost_dB or 0.0,
        reverse=True,
    )
    sequence = sequential_costs(solved, gain_setter, [b.element for b in ranked])
    costs = (
        sequence[1] if sequence is not None else [b.cost_dB or 0.0 for b in ranked]
    )  # no crossing in some variant: the one-at-a-time costs
    losses = [
        _loss(b.element, b.label, c, gap)
        for b, c in zip(ranked, costs, strict=True)
        if abs(c) >= REST_SHOWN_DB
    ]
    losses.sort(key=lambda loss: loss.cost_dB, reverse=True)
    rest = gap - sum(loss.cost_dB for loss in losses)
    if abs(rest) >= REST_SHOWN_DB:
        losses.append(_loss(REST_ELEMENT, REST_LABEL, rest, gap))
    return GainStory(formula=formula, full=full, gap_dB=gap, losses=losses)
