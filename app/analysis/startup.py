"""Startup verdict and the first amplitude estimate.

Verdict bands and what "starts" means: :mod:`ringwise.analysis.criteria`
(the same definitions the Monte Carlo yield counts with).

Amplitude: with a fixed bias current, the large-signal transconductance of
the exponential junction at a drive x = V_be/V_T is
G_m(x)/g_m = 2·I1(x)/(x·I0(x)); the amplitude settles where
|T|·G_m(x)/g_m = 1 (Clarke & Hess, *Communication Circuits: Analysis and
Design*, 1971; Gray & Meyer, oscillator chapter; both from memory).  This
fixed-bias figure feeds the headroom check here; the large-signal analysis
refines it with the bias shift.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

from scipy.optimize import brentq
from scipy.special import i0e, i1e

from ringwise.analysis.criteria import (
    MARGINAL_BELOW,
    OVERDRIVEN_ABOVE,
    START_GAIN,
    Region,
    starts,
)
from ringwise.analysis.dc import OperatingPoint

__all__ = ["MARGINAL_BELOW", "OVERDRIVEN_ABOVE", "Verdict", "fixed_bias_drive", "verdict"]
#: Largest drive searched, in units of V_T.
MAX_DRIVE: Final = 1e4

LABELS: Final = {
    "will-start": "Will start",
    "marginal": "Marginal: tolerances or temperature may stop it",
    "will-not-start": "Will not start",
    "overdriven": "Starts, but overdriven: expect heavy distortion",
}


@dataclass(frozen=True)
class Verdict:
    verdict: str
    label: str
    margin: float | None
    margin_dB: float | None


def verdict(gain: float | None, op: OperatingPoint) -> Verdict:
    """Startup verdict from the loop gain and the bias state."""
    if op.region is not Region.ACTIVE or gain is None or gain <= 0:
        margin = gain if gain else None
        label = LABELS["will-not-start"]
        if op.region is Region.CUTOFF:
            label += " (transistor cut off)"
        elif op.region is Region.SATURATION:
            label += " (transistor saturated)"
        elif gain is None:
            label += " (no zero-phase crossing)"
        return Verdict("will-not-start", label, margin, _dB(margin))
    if not starts(gain, True):
        key = "will-not-start"
    elif gain < MARGINAL_BELOW:
        key = "marginal"
    elif gain <= OVERDRIVEN_ABOVE:
        key = "will-start"
    else:
        key = "overdriven"
    return Verdict(key, LABELS[key], gain, _dB(gain))


def _dB(ratio: float | None) -> float | None:
    return 20.0 * math.log10(ratio) if ratio else None


def gm_ratio(x: float) -> float:
    """G_m(x)/g_m = 2·I1(x)/(x·I0(x)) for drive x = V1/V_T (→ 1 as x → 0)."""
    if x < 1e-6:
        return 1.0 - x * x / 8.0
    return 2.0 * i1e(x) / (x * i0e(x))


def fixed_bias_drive(gain: float) -> float | None:
    """Drive x at which gain·G_m(x)/g_m = 1 (``None`` when gain ≤ 1: no oscillation)."""
    if gain <= START_GAIN:
        return None
    target = 1.0 / gain
    return brentq(lambda x: gm_ratio(x) - target, 0.0, MAX_DRIVE, xtol=1e-12)
