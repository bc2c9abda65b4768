"""Shared fixtures: designs of our own for the checks (not the sample designs' values)."""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path
from typing import Any

import pytest

from ringwise.design import Design

SAMPLES = Path(__file__).resolve().parent.parent / "sample_designs"

#: A plain common-emitter Colpitts near 1.6 MHz, values of our own.
BASE_CE: dict[str, Any] = {
    "name": "check design",
    "topology": "common-emitter",
    "supply": {"Vcc": 10.0},
    "bias": {"RB1": "39k", "RB2": "10k", "RC": "1k", "RE": "1k", "CE": "100n"},
    "tank": {"L": "10u", "Q_L": 90, "C1": "1n", "C2": "2n2"},
    "coupling": {"Cc1": "47n", "Cc2": "47n"},
    "device": {"preset": "general-purpose"},
}


def design_from(base: dict[str, Any], **changes: Any) -> Design:
    """A design from ``base`` with dotted-path changes, e.g. ``tank__C2="1n"``."""
    data = copy.deepcopy(base)
    for key, value in changes.items():
        section, _, field = key.partition("__")
        if field:
            data.setdefault(section, {})[field] = value
        else:
            data[section] = value
    return Design.model_validate(data)


def ideal_data(topology: str) -> dict[str, Any]:
    """Losses off, β and VA huge, C_mu = 0, fT huge, coupling and bypass huge."""
    return {
        "name": f"ideal {topology}",
        "topology": topology,
        "supply": {"Vcc": 12.0},
        "bias": {
            "RB1": 3.9e10,
            "RB2": 1.0e10,
            "RC": 1000.0 if topology != "common-collector" else None,
            "RE": 1000.0,
            "CE": 1.0 if topology == "common-emitter" else None,
            "CB": 1.0 if topology == "common-base" else None,
        },
        "tank": {"L": 10e-6, "Q_L": 1e6, "C1": 1e-9, "C2": 2.2e-9},
        "coupling": {"Cc1": 1.0, "Cc2": 1.0},
        "device": {"beta": 1e9, "IS": 1e-14, "VA": 1e12, "fT": 1e12, "C_mu": 0.0},
    }


def all_finite(value: Any) -> bool:
    """Every float in a JSON-like structure is finite (null stands for "does not exist")."""
    if isinstance(value, dict):
        return all(all_finite(v) for v in value.values())
    if isinstance(value, list):
        return all(all_finite(v) for v in value)
    return not isinstance(value, float) or math.isfinite(value)


def at_gain(design: Design, target: float, lo: float = 10.0, hi: float = 10e3) -> Design:
    """``design`` with RC bisected (on a log scale) to give the requested loop gain."""
    from ringwise.analysis.operating import solve
    from ringwise.design import with_param

    a, b = math.log(lo), math.log(hi)
    for _ in range(60):
        mid = 0.5 * (a + b)
        gain = solve(with_param(design, "RC", math.exp(mid))).gain
        a, b = (mid, b) if gain < target else (a, mid)
    return with_param(design, "RC", math.exp(0.5 * (a + b)))


def sample_paths() -> list[Path]:
    return sorted(SAMPLES.glob("*.json"))


def load_sample(path: Path) -> Design:
    return Design.model_validate(json.loads(path.read_text(encoding="utf-8")))


@pytest.fixture
def base_ce() -> Design:
    return Design.model_validate(BASE_CE)
