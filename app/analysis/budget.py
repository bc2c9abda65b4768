"""Loop-gain budget: which loss or loading costs how much loop gain.

For each lossy or loading element the loop gain is recomputed with that one
element made ideal (a resistor opened, a coupling or bypass capacitor made a
short, the coil or the RF choke made lossless, a transistor parasitic removed) and every
other element kept.  The operating point is held fixed: the budget is a
small-signal statement about the loop as biased.  All variants are solved in
one batched call.

The cost of an element is 20·log10(gain_without / gain) in dB; its share is
its cost over the sum of the positive costs of the losses.  The gain-setting
resistor is listed (``in_hand``) but is no loss: it is part of the hand
formula, so it takes no share.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Final

import numpy as np

from ringwise.analysis.loop import LoopFigures, find_oscillation
from ringwise.analysis.operating import Solved
from ringwise.circuit.mna import SmallSignal, restamp_batch, small_signal
from ringwise.circuit.netlist import Capacitor, Inductor, Netlist, Resistor
from ringwise.circuit.npn import HybridPi
from ringwise.circuit.topologies import CHOKE_LOSS, CHOKE_SETTER

#: A capacitor "made a short" is multiplied by this factor.
SHORT_FACTOR: Final = 1e4


@dataclass(frozen=True)
class BudgetItem:
    """How to make one loss ideal: netlist changes and hybrid-π changes."""

    element: str
    label: str
    parts: tuple[str, ...] = ()
    hybrid: dict[str, float] = dataclasses.field(default_factory=dict)
    in_hand: bool = False


@dataclass(frozen=True)
class BudgetLine:
    element: str
    label: str
    gain_without: float | None
    f_without: float | None
    cost_dB: float | None
    share: float | None
    in_hand: bool


def budget_items(netlist: Netlist, gain_setter: str) -> list[BudgetItem]:
    """The losses present in ``netlist``, in a fixed reading order."""
    items = [
        BudgetItem("L_loss", "Inductor loss (finite Q_L)", ("L",)),
        BudgetItem("r_pi", "Transistor input resistance r_π", hybrid={"g_pi": 0.0}),
        BudgetItem("divider", "Bias divider RB1 ∥ RB2", ("RB1", "RB2")),
        BudgetItem("r_o", "Output resistance r_o (Early effect)", hybrid={"g_o": 0.0, "g_r": 0.0}),
    ]
    if "R_load" in netlist:
        items.append(BudgetItem("R_load", "Load R_load", ("R_load",)))
    for name in ("RC", "RE"):
        if name in netlist:
            setter = name == gain_setter
            role = "gain-setting resistor" if setter else "loading resistor"
            items.append(BudgetItem(name, f"{name} ({role})", (name,), in_hand=setter))
    if CHOKE_LOSS in netlist:
        setter = gain_setter == CHOKE_SETTER
        label = "RF choke's loss Rch, finite Q_ch (gain-setting)"
        items.append(BudgetItem(CHOKE_LOSS, label, (CHOKE_LOSS,), in_hand=setter))
    for name, label in (("CE", "Emitter bypass CE"), ("CB", "Base bypass CB")):
        if name in netlist:
            items.append(BudgetItem(name, label, (name,)))
    items += [
        BudgetItem("Cc1", "Coupling Cc1", ("Cc1",)),
        BudgetItem("Cc2", "Coupling Cc2", ("Cc2",)),
        BudgetItem(
            "C_pi_C_mu", "Junction capacitances C_π, C_μ", hybrid={"C_pi": 0.0, "C_mu": 0.0}
        ),
    ]
    return items


def _ideal_values(netlist: Netlist, parts: tuple[str, ...]) -> dict[str, dict[str, float]]:
    """New field values that make each named part ideal."""
    changes: dict[str, dict[str, float]] = {}
    for name in parts:
        el = netlist[name]
        if isinstance(el, Resistor):
            changes[name] = {"R": math.inf}
        elif isinstance(el, Capacitor):
            changes[name] = {"C": el.C * SHORT_FACTOR}
        elif isinstance(el, Inductor):
            changes[name] = {"R_s": 0.0}
    return changes


def _variants(solved: Solved, item_sets: Sequence[Sequence[BudgetItem]]) -> SmallSignal:
    """The small-signal circuit with every item of each set made ideal, one
    variant per set, stacked on a batch axis (one assembly for all)."""
    netlist = solved.netlist
    system = restamp_batch(
        solved.system,
        netlist,
        [
            _ideal_values(netlist, tuple(p for item in items for p in item.parts))
            for items in item_sets
        ],
    )
    hp = solved.hybrid
    fields = {name: np.full(len(item_sets), getattr(hp, name)) for name in _HYBRID_FIELDS}
    for j, items in enumerate(item_sets):
        for item in items:
            for name, value in item.hybrid.items():
                fields[name][j] = value
    return small_signal(system, HybridPi(gm=hp.gm, **fields))


#: The hybrid-π elements a budget item may make ideal (g_m is the loop's own).
_HYBRID_FIELDS: Final = ("g_pi", "g_o", "g_r", "C_pi", "C_mu")


def _solve_variants(solved: Solved, variants: SmallSignal) -> LoopFigures:
    """Oscillation figures of all ``variants`` in one batched call."""
    batch = dataclasses.replace(
        variants, gm=np.full(variants.G.shape[0], solved.ss.gm), hybrid=solved.hybrid
    )
    f_ref = solved.f_osc or solved.tank.f_ideal
    return find_oscillation(batch, solved.tank.f_ideal, f_ref)


def sequential_costs(
    solved: Solved, gain_setter: str, order: Sequence[str]
) -> tuple[float, list[float]] | None:
    r"""The losses added one after another to the circuit with all of them ideal.

    With the losses :math:`\ell_1 … \ell_n` in ``order`` (budget elements), variant
    k has :math:`\ell_{k+1} … \ell_n` made ideal: :math:`T_0` has none of the
    losses, :math:`T_n` is the full loop gain.  Loss k costs
    :math:`20\log_{10}(T_{k-1}/T_k)` dB; the costs add up to
    :math:`20\log_{10}(T_0/T_n)` exactly, whatever the losses' interplay (each is
    charged for what it takes given those before it).  Returns :math:`T_0` and
    the costs in ``order``, or None when a variant has no loop crossing.
    """
    by_element = {i.element: i for i in budget_items(solved.netlist, gain_setter)}
    items = [by_element[e] for e in order]
    variants = _variants(solved, [items[k:] for k in range(len(items) + 1)])
    found = _solve_variants(solved, variants).gain
    if not np.all(np.isfinite(found)) or not np.all(found > 0):
        return None
    gains = found.tolist()
    costs = [20.0 * math.log10(gains[k - 1] / gains[k]) for k in range(1, len(items) + 1)]
    return gains[0], costs


def loop_budget(solved: Solved, gain_setter: str) -> list[BudgetLine]:
    """Cost of each loss in loop gain, for a solved design with a loop crossing."""
    items = budget_items(solved.netlist, gain_setter)
    figs = _solve_variants(solved, _variants(solved, [[item] for item in items]))
    gain = solved.gain
    gains, freqs = figs.gain.tolist(), figs.f_osc.tolist()  # floats, not array scalars
    costs: list[float | None] = []
    for g in gains:
        ok = math.isfinite(g) and gain > 0
        costs.append(20.0 * math.log10(g / gain) if ok else None)
    positive = sum(
        c
        for c, item in zip(costs, items, strict=True)
        if c is not None and c > 0 and not item.in_hand
    )
    lines = []
    for item, g, f, cost in zip(items, gains, freqs, costs, strict=True):
        share = None
        if cost is not None and positive > 0 and not item.in_hand:
            share = max(cost, 0.0) / positive
        lines.append(
            BudgetLine(
                element=item.element,
                label=item.label,
                gain_without=g if math.isfinite(g) else None,
                f_without=f if math.isfinite(f) else None,
                cost_dB=cost,
                share=share,
                in_hand=item.in_hand,
            )
        )
    return lines
