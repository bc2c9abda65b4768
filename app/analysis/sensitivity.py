r"""Normalised sensitivities of the oscillation frequency and the loop gain.

For each part x: :math:`S^f_x = \partial\ln f_{osc}/\partial\ln x` and
:math:`S^T_x = \partial\ln|T|/\partial\ln x`, by central differences of full
solves (operating point re-solved) at x·(1 ± δ), all in one batch.  A part with
:math:`|S^f| = 0.5` moves the frequency by 0.5 % per 1 % of its own change;
ranking by :math:`|S|` times the part's tolerance says what to tighten first.

For the ideal tank, :math:`S^f_L = -1/2` and :math:`S^f_{C_i} = -\tfrac12 C_s/C_i`
(from f = 1/(2π√(L·C_s))), which the tests use as the check.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

import numpy as np
from pydantic import ValidationError

from ringwise.analysis.operating import Solved, solve
from ringwise.analysis.pipeline import solve_designs
from ringwise.design import PARAMETERS, Design, get_param, with_param

#: Relative step of the central differences.
STEP: Final = 1e-3
#: Parts whose sensitivities are reported (design parameters that are parts or
#: device properties; noise inputs and ratings do not move the circuit).
PARTS: Final = tuple(p for p in PARAMETERS if p not in ("F_dB", "f_corner", "V_cap"))


@dataclass(frozen=True)
class Sensitivity:
    part: str
    value: float
    S_f: float | None
    S_gain: float | None


def sensitivities(design: Design, base: Solved | None = None) -> list[Sensitivity]:
    """Sensitivities of every part present, ranked by |S_f| + |S_gain| (largest first).

    Every perturbed design (each part at x·(1 ± δ)) is one member of a single
    batch of the pipeline, started from the nominal operating point.
    """
    base = base or solve(design)
    parts: list[tuple[str, float]] = []
    designs: list[Design] = []
    for part in PARTS:
        value = get_param(design, part)
        if value is None or part in design.unused_parts():
            continue
        try:
            pair = [with_param(design, part, value * (1.0 + sign * STEP)) for sign in (1.0, -1.0)]
        except ValidationError:
            pair = []
        parts.append((part, value))
        designs += pair or [design, design]
    batch = solve_designs(designs, base.op.x, base.f_osc)
    f, g = batch.loop.f_osc, batch.gain
    ok = batch.converged & np.isfinite(f) & (g > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_f, log_g = np.log(f), np.log(g)
    span = math.log1p(STEP) - math.log1p(-STEP)
    out = []
    for k, (part, value) in enumerate(parts):
        hi, lo = 2 * k, 2 * k + 1
        if not (ok[hi] and ok[lo]) or designs[hi] is design:
            out.append(Sensitivity(part, value, None, None))
            continue
        S_f = float(log_f[hi] - log_f[lo]) / span
        S_g = float(log_g[hi] - log_g[lo]) / span
        out.append(Sensitivity(part, value, S_f, S_g))
    return sorted(out, key=lambda s: -(abs(s.S_f or 0.0) + abs(s.S_gain or 0.0)))
