r"""Normalised sensitivities of the oscillation frequency and the loop gain.

For each part x: :math:`S^f_x = \partial\ln f_{osc}/\partial\ln x` and
:math:`S^T_x = \partial\ln|T|/\partial\ln x`, by central differences of full
solves (operating point re-solved) at x·(1 ± δ).  A part with
:math:`|S^f| = 0.5` moves the frequency by 0.5 % per 1 % of its own change;
ranking by :math:`|S|` times the part's tolerance says what to tighten first.

For the ideal tank, :math:`S^f_L = -1/2` and :math:`S^f_{C_i} = -\tfrac12 C_s/C_i`
(from f = 1/(2π√(L·C_s))), which the tests use as the check.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

from pydantic import ValidationError

from ringwise.analysis.dc import DCConvergenceError
from ringwise.analysis.operating import Solved, solve
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
    """Sensitivities of every part present, ranked by |S_f| + |S_gain| (largest first)."""
    base = base or solve(design)
    out = []
    for part in PARTS:
        value = get_param(design, part)
        if value is None or part in design.unused_parts():
            continue
        logs = []
        for sign in (1.0, -1.0):
            try:
                s = solve(
                    with_param(design, part, value * (1.0 + sign * STEP)), base.op.x, base.f_osc
                )
            except (ValidationError, DCConvergenceError):
                logs.append(None)
                continue
            ok = s.f_osc is not None and s.gain > 0
            logs.append((math.log(s.f_osc), math.log(s.gain)) if ok else None)
        if None in logs:
            out.append(Sensitivity(part, value, None, None))
            continue
        (f_hi, g_hi), (f_lo, g_lo) = logs  # type: ignore[misc]
        span = math.log1p(STEP) - math.log1p(-STEP)
        out.append(Sensitivity(part, value, (f_hi - f_lo) / span, (g_hi - g_lo) / span))
    return sorted(out, key=lambda s: -(abs(s.S_f or 0.0) + abs(s.S_gain or 0.0)))
