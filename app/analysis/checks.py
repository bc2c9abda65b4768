"""Rule checks: what a practitioner would circle on the schematic.

Each check returns warnings with a stable code and a plain message naming the
part, the figure and the limit.  Limits are common practice, no source,
except where noted.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass
from typing import Final

from ringwise.analysis import floquet
from ringwise.analysis.budget import BudgetLine
from ringwise.analysis.criteria import VCE_HEADROOM, Region
from ringwise.analysis.operating import Solved
from ringwise.analysis.periodic import SteadyState
from ringwise.analysis.poles import PoleFigures
from ringwise.circuit.topologies import CHOKE_SELF_C
from ringwise.units import format_si

#: The divider current should be at least this multiple of the base current.
STIFF_DIVIDER: Final = 10.0
#: Dissipation worth a look in a small-signal package, W.
P_DEVICE_WARN: Final = 0.25
#: C1/C2 outside this band is unusual.
RATIO_BAND: Final = (0.1, 10.0)
#: A coupling or bypass capacitor is "not small" when making it a short
#: would change the loop gain by more than this (dB) ...
COUPLING_COST_DB: Final = 0.5
#: ... or move f_osc by more than this fraction.
COUPLING_SHIFT: Final = 0.002
#: Extra RHP poles below f_osc / this are called a low-frequency loop.
SQUEGGING_RATIO: Final = 10.0
#: An RF choke whose self-resonance lies within this factor of f_osc (either
#: side) resonates "near" it: its reactance swings from inductive to
#: capacitive there (common practice, no source).
CHOKE_SRF_BAND: Final = 1.5


@dataclass(frozen=True)
class Finding:
    code: str
    message: str


def rule_checks(
    solved: Solved,
    budget: list[BudgetLine],
    poles: PoleFigures,
) -> list[Finding]:
    s, op = solved, solved.op
    out: list[Finding] = []
    for part in s.design.unused_parts():
        out.append(
            Finding(
                "unused-part",
                f"{part} is not part of the {s.design.form_text} and is ignored",
            )
        )
    if op.region is Region.CUTOFF:
        out.append(
            Finding(
                "cut-off",
                f"the transistor is cut off (IC = {format_si(op.IC, 'A')}); "
                "check the bias divider and RE",
            )
        )
    elif op.region is Region.SATURATION:
        out.append(
            Finding(
                "saturated",
                f"the transistor is saturated at DC (VCE = {format_si(op.VCE, 'V')}); "
                "lower RC or RE, or raise the divider ratio toward the supply",
            )
        )
    I_div = op.VB / s.design.bias.RB2
    if op.region is not Region.CUTOFF and I_div < STIFF_DIVIDER * op.IB:
        out.append(
            Finding(
                "soft-divider",
                f"divider current {format_si(I_div, 'A')} is only {I_div / op.IB:.1f}× the base "
                f"current {format_si(op.IB, 'A')} (aim for ≥ {STIFF_DIVIDER:g}×): the operating "
                "point will follow β and temperature",
            )
        )
    if op.P_device > P_DEVICE_WARN:
        out.append(
            Finding(
                "hot-device",
                f"transistor dissipation {format_si(op.P_device, 'W')} exceeds "
                f"{P_DEVICE_WARN:g} W: check the part's rating and derating",
            )
        )
    ratio = s.tank.feedback_ratio
    if not RATIO_BAND[0] <= ratio <= RATIO_BAND[1]:
        out.append(
            Finding(
                "extreme-ratio",
                f"C1/C2 = {ratio:.3g} is outside {RATIO_BAND[0]:g} … {RATIO_BAND[1]:g}: "
                "the tank loads one side heavily",
            )
        )
    out += _coupling_checks(s, budget)
    out += _pole_checks(s, poles)
    return out


def _coupling_checks(s: Solved, budget: list[BudgetLine]) -> list[Finding]:
    f = s.f_osc
    if f is None:
        return []
    out = []
    for line in budget:
        if line.element not in ("Cc1", "Cc2", "CE", "CB"):
            continue
        cost = line.cost_dB or 0.0
        shift = abs(line.f_without / f - 1.0) if line.f_without else 0.0
        if cost > COUPLING_COST_DB or shift > COUPLING_SHIFT:
            C = s.netlist[line.element].C  # type: ignore[union-attr]
            X = 1.0 / (2.0 * math.pi * f * C)
            out.append(
                Finding(
                    "coupling-reactance",
                    f"{line.element} = {format_si(C, 'F')} has {format_si(X, 'Ω')} of reactance "
                    f"at f_osc: it costs {cost:.2f} dB of loop gain and moves f_osc "
                    f"{100 * shift:.2f} %; a larger value makes it negligible",
                )
            )
    return out


def _pole_checks(s: Solved, poles: PoleFigures) -> list[Finding]:
    out = []
    f = s.f_osc
    if f is None:
        out.append(
            Finding(
                "no-crossing",
                "the return ratio has no zero-phase crossing near the tank resonance "
                f"({format_si(s.tank.f_ideal, 'Hz')}): there is no oscillation frequency",
            )
        )
    for p in poles.other_rhp:
        near_dc = f is not None and p.f < f / SQUEGGING_RATIO
        extra = (
            ": a low-frequency loop through the coupling or bypass capacitors; "
            "the steady state's multipliers tell whether the envelope holds steady"
            if near_dc
            else ""
        )
        out.append(
            Finding(
                "extra-rhp-pole",
                f"a second growing natural frequency at {format_si(p.f, 'Hz')} "
                f"(σ = {p.sigma:.3g} /s){extra}",
            )
        )
    dom = poles.dominant
    if dom is not None and f is not None and (dom.sigma > 0) != (s.gain > 1.0):
        out.append(
            Finding(
                "pole-gain-mismatch",
                f"the dominant poles (σ = {dom.sigma:.3g} /s) and the loop gain "
                f"({s.gain:.4g}) disagree about startup; the design sits at the threshold",
            )
        )
    return out


def steady_checks(s: Solved, ss: SteadyState) -> list[Finding]:
    """Warnings from the periodic steady state: saturation at the bottom of the swing,
    and an orbit that does not hold (from its Floquet multipliers)."""
    out: list[Finding] = []
    if ss.VCE_min is not None and ss.VCE_min < VCE_HEADROOM:
        out.append(
            Finding(
                "low-headroom",
                f"V_CE falls to {format_si(ss.VCE_min, 'V')} at the bottom of the swing "
                f"(want ≥ {VCE_HEADROOM:g} V): the collector runs into saturation; lower the "
                "loop gain or raise the DC V_CE",
            )
        )
    worst = ss.multipliers[0] if ss.multipliers else None
    if ss.behaviour == floquet.SQUEGS and worst is not None:
        out.append(
            Finding(
                "squegging",
                f"a pair of Floquet multipliers lies outside the unit circle (|μ| = "
                f"{abs(worst):.4g}): the envelope swings about the steady amplitude every "
                f"{2 * math.pi / abs(cmath.phase(worst)):.0f} periods and grows — it squegs; "
                "lower the loop gain or the bias network's time constants",
            )
        )
    elif ss.behaviour == floquet.PERIOD_DOUBLING and worst is not None:
        out.append(
            Finding(
                "period-doubling",
                f"a Floquet multiplier of {worst.real:.3g} (below −1): alternate cycles "
                "differ and a line at f/2 appears; the figures are those of the unstable "
                "period-one orbit — lower the loop gain or the drive into saturation",
            )
        )
    elif ss.behaviour == floquet.UNSTABLE and worst is not None:
        out.append(
            Finding(
                "unstable-orbit",
                f"a Floquet multiplier of {worst.real:.4g} (above 1): the periodic orbit is "
                "unstable and the envelope drifts off it — expect it to collapse and rebuild "
                "(squegging) or jump to another amplitude; lower the loop gain or the bias "
                "network's time constants, and see the time-domain simulation",
            )
        )
    elif ss.behaviour == floquet.NO_ORBIT and s.f_osc is not None and s.gain > 1.0:
        out.append(Finding("no-orbit", ss.reason or "no periodic orbit was found"))
    return out


def choke_checks(s: Solved) -> list[Finding]:
    r"""Warn when the RF choke's self-resonance is near f_osc, or below it.

    A choke with self-resonance :math:`f_{ch}` is an inductance below it and a
    capacitance above it; near :math:`f_{ch}` its impedance peaks and its
    reactance changes fast, so it pulls the frequency and can act as a
    second tank (a second frequency, or a jump between the two).  Well below
    f_osc it feeds the collector through its self-capacitance only.
    """
    b, f = s.design.bias, s.f_osc
    if not s.design.choke_fed or b.f_ch is None or f is None:
        return []
    ratio = b.f_ch / f
    f_ch_t, f_t = format_si(b.f_ch, "Hz"), format_si(f, "Hz")
    if 1.0 / CHOKE_SRF_BAND < ratio < CHOKE_SRF_BAND:
        return [
            Finding(
                "choke-resonance",
                f"the choke's self-resonance f_ch = {f_ch_t} is within a factor "
                f"{CHOKE_SRF_BAND:g} of f_osc = {f_t} ({100 * (ratio - 1):+.0f} %): there its "
                "reactance swings from inductive to capacitive, so it pulls the frequency and "
                "may act as a second tank; choose a choke resonating at least "
                f"{CHOKE_SRF_BAND:g}× above f_osc (a smaller inductance or a "
                "lower-capacitance winding)",
            )
        ]
    if ratio <= 1.0 / CHOKE_SRF_BAND:
        X = 1.0 / (2.0 * math.pi * f * _choke_self_c(s))
        return [
            Finding(
                "choke-capacitive",
                f"the choke resonates at f_ch = {f_ch_t}, below f_osc = {f_t}: at f_osc it is a "
                f"capacitance ({format_si(X, 'Ω')} of reactance), not a choke; choose one "
                f"resonating at least {CHOKE_SRF_BAND:g}× above f_osc",
            )
        ]
    return []


def _choke_self_c(s: Solved) -> float:
    return s.netlist[CHOKE_SELF_C].C  # type: ignore[union-attr]
