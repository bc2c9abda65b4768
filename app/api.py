"""The public API for scripts and notebooks (re-exported by ``import ringwise``).

Each function returns the same pydantic model the web API serves and the CLI
prints; in a notebook a result shows as a table.  Values in SI units.
"""

from __future__ import annotations

import json
from os import PathLike
from pathlib import Path
from typing import Any

from ringwise.analysis.analyze import analyze as _analyze
from ringwise.analysis.operating import solve
from ringwise.analysis.periodic import SteadyState
from ringwise.analysis.periodic import steady_state as _steady_state
from ringwise.analysis.spread import DEFAULT_SAMPLES, spread_result
from ringwise.analysis.startup import MARGINAL_BELOW
from ringwise.analysis.transient import simulate as _simulate
from ringwise.bom import BomLine
from ringwise.bom import bill_of_materials as _bill_of_materials
from ringwise.design import Design
from ringwise.result import Result, SimulationResult, SpreadResult


def load(source: str | PathLike[str] | dict[str, Any]) -> Design:
    """A design from a file path or from a design file's JSON as a dict.

    Values may be written as in the file (``"2n2"``, ``"4k7"``); a bad value
    raises :class:`pydantic.ValidationError` naming the field.
    """
    if isinstance(source, dict):
        return Design.model_validate(source)
    text = Path(source).read_text(encoding="utf-8-sig")
    return Design.model_validate(json.loads(text))


def analyze(design: Design) -> Result:
    """The full analysis of ``design``: small signal, periodic steady state, one verdict."""
    return _analyze(design)


def steady_state(design: Design) -> SteadyState:
    """The periodic steady state: frequency, amplitudes, harmonics, each part's stress,
    and its Floquet stability (shooting-Newton on the transient's period map)."""
    return _steady_state(solve(design))


def spread(
    design: Design,
    samples: int = DEFAULT_SAMPLES,
    seed: int = 1,
    margin: float = MARGINAL_BELOW,
    window: tuple[float, float] | None = None,
) -> SpreadResult:
    """Monte Carlo over tolerances and temperature: yields, percentiles, worst cases."""
    return spread_result(design, samples, seed, margin, window)


def simulate(design: Design, cycles: float = 300.0, points: int = 4000) -> SimulationResult:
    """The nonlinear transient: measured frequency, amplitude, THD, startup, squegging."""
    return _simulate(design, cycles, points)


def bill_of_materials(design: Design) -> list[BomLine]:
    """The bill of materials: standard values, tolerances and each part's stress."""
    return _bill_of_materials(design)
